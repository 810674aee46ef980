// Test helper: two Eigen matrices or vectors of doubles hold the same bits (same shape and a
// byte-for-byte equal payload), for results promised to be bit-identical, not just close.
#pragma once
#include <cstddef>
#include <cstring>

namespace dobudget::test {

template <class M>
bool same_bits(const M& a, const M& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() &&
         std::memcmp(a.data(), b.data(), sizeof(double) * static_cast<std::size_t>(a.size())) == 0;
}

}  // namespace dobudget::test
