// Plain CSV output that spreadsheets and pandas read directly: comma separated, a header row,
// numbers in the shortest form that reads back to the same double, empty cells for missing
// values. Text cells (none today) go through csv_field (text_escape.hpp: RFC 4180 quoting).
#pragma once
#include <optional>
#include <string>

namespace dobudget::io {

std::string csv_number(double x);                    // shortest round-trip; "inf", "-inf", "nan"
std::string csv_number(const std::optional<double>& x);  // empty when missing

}  // namespace dobudget::io
