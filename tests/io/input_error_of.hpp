// Test helper: runs f, which must throw dobudget::io::InputError, and returns that error so that
// the test can check its file, line, key and message.
#pragma once
#include <catch2/catch.hpp>

#include <functional>

#include "io/input_error.hpp"

namespace dobudget::test {

inline io::InputError error_of(const std::function<void()>& f) {
  try {
    f();
  } catch (const io::InputError& e) {
    return e;
  }
  FAIL("expected an InputError");
  throw;  // not reached
}

}  // namespace dobudget::test
