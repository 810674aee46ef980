#include "cli/option_values.hpp"

#include <fmt/format.h>

#include <charconv>
#include <cmath>
#include <optional>

#include "cli/commands.hpp"

namespace dobudget::cli {
namespace {

// What the user typed, shown in messages; long or unprintable text is cut or replaced.
std::string shown(std::string_view text) {
  std::string s;
  for (char c : text.substr(0, 40)) s += (static_cast<unsigned char>(c) < 0x20 || c == 0x7f) ? '?' : c;
  return "'" + s + (text.size() > 40 ? "...'" : "'");
}

std::optional<double> read_number(std::string_view text) {
  double x = 0.0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), x, std::chars_format::general);
  if (text.empty() || ec != std::errc() || end != text.data() + text.size() || !std::isfinite(x)) return std::nullopt;
  return x;
}

}  // namespace

long long whole_option(std::string_view option, std::string_view text, long long min, long long max) {
  long long x = 0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), x);
  const bool digits = !text.empty() && ec != std::errc::invalid_argument && end == text.data() + text.size();
  if (!digits || ec == std::errc::result_out_of_range || x < min || x > max)
    throw BadInput(fmt::format("{}: expected a whole number from {} to {}, got {}", option, min, max, shown(text)));
  return x;
}

std::uint64_t unsigned_option(std::string_view option, std::string_view text) {
  std::uint64_t x = 0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), x);
  if (text.empty() || ec != std::errc() || end != text.data() + text.size())
    throw BadInput(fmt::format("{}: expected a whole number from 0 to 18446744073709551615, got {}", option, shown(text)));
  return x;
}

double number_option(std::string_view option, std::string_view text) {
  const std::optional<double> x = read_number(text);
  if (!x) throw BadInput(fmt::format("{}: expected a finite decimal number, got {}", option, shown(text)));
  return *x;
}

double open_interval_option(std::string_view option, std::string_view text, double low, double high) {
  const std::optional<double> x = read_number(text);
  if (!x || !(*x > low && *x < high))
    throw BadInput(fmt::format("{}: expected a number greater than {} and less than {}, got {}", option, low, high,
                               shown(text)));
  return *x;
}

}  // namespace dobudget::cli
