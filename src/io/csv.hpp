// Plain CSV output that spreadsheets and pandas read directly: comma separated, a header row,
// numbers in the shortest form that reads back to the same double, empty cells for missing
// values. Text cells are the program's own words (strategy names, notes such as "no room for
// planning"), never user text; one that could hold user text must be quoted by RFC 4180.
#pragma once
#include <optional>
#include <string>

namespace dobudget::io {

std::string csv_number(double x);                    // shortest round-trip; "inf", "-inf", "nan"
std::string csv_number(const std::optional<double>& x);  // empty when missing

}  // namespace dobudget::io
