// Plain CSV output that spreadsheets and pandas read directly: comma separated, a header row,
// numbers in the shortest form that reads back to the same double, empty cells for missing
// values, and quoting only where a cell holds a comma, a quote or a line break (RFC 4180).
#pragma once
#include <optional>
#include <string>
#include <string_view>

namespace dobudget::io {

std::string csv_number(double x);                    // shortest round-trip; "inf", "-inf", "nan"
std::string csv_number(const std::optional<double>& x);  // empty when missing
std::string csv_text(std::string_view s);            // quoted when needed

}  // namespace dobudget::io
