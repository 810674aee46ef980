#include "io/csv.hpp"

#include <cmath>
#include <fmt/format.h>

namespace dobudget::io {

std::string csv_number(double x) {
  if (std::isnan(x)) return "nan";
  if (std::isinf(x)) return x > 0 ? "inf" : "-inf";
  return fmt::format("{}", x);
}

std::string csv_number(const std::optional<double>& x) { return x ? csv_number(*x) : std::string(); }

std::string csv_text(std::string_view s) {
  if (s.find_first_of(",\"\n\r") == std::string_view::npos) return std::string(s);
  std::string out = "\"";
  for (char c : s) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

}  // namespace dobudget::io
