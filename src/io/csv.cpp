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

}  // namespace dobudget::io
