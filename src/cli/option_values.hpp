// Reading the values of command-line options. CLI11 hands every numeric option over as the text
// the user typed; these functions turn it into a value or a BadInput (exit code 2) that names the
// option, says what was expected and repeats what was given, e.g.
//   --threads: expected a whole number from 1 to 1024, got 'abc'
// Numbers are read with std::from_chars: decimal only (no "0x10", no "inf", no "nan", no locale),
// the whole text, nothing left over.
#pragma once
#include <cstdint>
#include <string>
#include <string_view>

namespace dobudget::cli {

// A whole number in [min, max].
long long whole_option(std::string_view option, std::string_view text, long long min, long long max);

// A whole number from 0 to 2^64 - 1 (a seed).
std::uint64_t unsigned_option(std::string_view option, std::string_view text);

// A finite decimal number (e.g. "0.01", "1e-3").
double number_option(std::string_view option, std::string_view text);

// A finite decimal number with low < x < high (both ends excluded).
double open_interval_option(std::string_view option, std::string_view text, double low, double high);

}  // namespace dobudget::cli
