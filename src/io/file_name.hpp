// File and folder names derived from user text. A study's name is text, never a path: the default
// run directory runs/<name> and draw's environments/<name> use safe_file_name(name), so that a
// name such as "../../x", "/etc" or "a/b" cannot choose where files are written.
#pragma once
#include <string>
#include <string_view>

namespace dobudget::io {

// A single path component made from `text`: ASCII letters, digits, '.', '_' and '-' are kept; every
// other run of characters (spaces, '/', '\', control characters, non-ASCII bytes, ...) becomes one
// '-'; leading '.' and '-' and trailing '-' are dropped (no hidden names, no "." or "..", nothing
// that reads as an option); at most 80 characters. Text with nothing left gives "study-" and 8 hex
// digits of a hash of the text (empty text: "study").
// Examples: "Orchard irrigation 2026" -> "Orchard-irrigation-2026"; "../../escaped" -> "escaped".
std::string safe_file_name(std::string_view text);

}  // namespace dobudget::io
