// What the fuzz targets (tests/fuzz/fuzz_*.cpp) count as a finding, beside the crashes, hangs and
// sanitizer reports libFuzzer catches by itself: an exception other than InputError escaping a
// reader, an InputError that is not one located message, or a written file that does not read back
// to itself. A finding prints what was wrong and aborts, so libFuzzer saves the input.
#pragma once
#include <cstdio>
#include <cstdlib>
#include <exception>
#include <string>

#include "io/input_error.hpp"

namespace dobudget::fuzz {

[[noreturn]] inline void finding(const std::string& what) {
  std::fprintf(stderr, "\n==== dobudget fuzz finding: %s\n", what.c_str());
  std::abort();
}

// Messages that carry a control character from the input (a line break splits the message, an
// escape sequence reaches the terminal): not a finding that stops the run, since such text can as
// well be made printable where it is shown, but counted and shown (one example) when the fuzzer
// exits.
struct Unprintable {
  long count = 0;
  std::string example;
  ~Unprintable() {
    if (count > 0)
      std::fprintf(stderr, "dobudget fuzz: %ld InputError messages held control characters, e.g. %s\n", count,
                   example.c_str());
  }
};
inline Unprintable unprintable;

inline std::string escaped(const std::string& s) {
  std::string out;
  for (char c : s.substr(0, 200)) {
    const auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u == 0x7f) {
      char hex[8];
      std::snprintf(hex, sizeof hex, "\\x%02x", u);
      out += hex;
    } else {
      out += c;
    }
  }
  return out;
}

// One located message (input_error.hpp): "FILE[:LINE]: [KEY: ]MESSAGE", naming a file.
// (what() ends at a NUL byte that the message may carry: a control character like the others.)
inline void check_located(const io::InputError& e) {
  const std::string text = io::InputError::format(e.file, e.line, e.key, e.message);
  if (e.file.empty() || e.message.empty() || e.line < 0) finding("InputError without file or message: " + escaped(text));
  if (text.substr(0, text.find('\0')) != e.what()) finding("InputError text is not FILE:LINE: KEY: message: " + escaped(text));
  for (char c : text)
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7f) {
      if (unprintable.count++ == 0) unprintable.example = escaped(text);
      break;
    }
}

// Runs f, the reading of one input: returns true when it read the input, false when it refused it
// with a located InputError; anything else thrown is a finding.
template <class F>
bool reads(F&& f) {
  try {
    f();
    return true;
  } catch (const io::InputError& e) {
    check_located(e);
    return false;
  } catch (const std::exception& e) {
    finding(std::string("exception other than InputError: ") + e.what());
  } catch (...) {
    finding("exception of unknown type");
  }
}

}  // namespace dobudget::fuzz
