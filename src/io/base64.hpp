// Base64 (RFC 4648, Josefsson 2006, section 4: the standard alphabet A-Z a-z 0-9 + /, '=' padding,
// no line breaks), for embedding the report's figures in report.html as data: URIs (RFC 2397).
#pragma once
#include <string>
#include <string_view>

namespace dobudget::io {

std::string base64(std::string_view bytes);

}  // namespace dobudget::io
