// Weighted pool-adjacent-violators; see isotonic.hpp for the problem and references.
#include "core/answer/isotonic.hpp"

#include <cmath>
#include <stdexcept>

namespace dobudget {

namespace {

void check(std::span<const double> y, std::span<const double> w, std::span<double> out) {
  if (y.size() != w.size() || y.size() != out.size())
    throw std::invalid_argument("isotonic regression: values, weights and output differ in length");
  for (std::size_t i = 0; i < y.size(); ++i) {
    if (!std::isfinite(y[i])) throw std::invalid_argument("isotonic regression: value is not finite");
    if (!(w[i] > 0.0) || !std::isfinite(w[i]))
      throw std::invalid_argument("isotonic regression: weight is not positive and finite");
  }
}

// sign = +1: increasing fit of y; sign = -1: increasing fit of -y, negated (a decreasing fit of y).
void pava(std::span<const double> y, std::span<const double> w, std::span<double> out, IsotonicWorkspace& ws,
          double sign) {
  check(y, w, out);
  ws.block_value.clear();
  ws.block_weight.clear();
  ws.block_end.clear();
  for (std::size_t i = 0; i < y.size(); ++i) {
    double v = sign * y[i];
    double wt = w[i];
    // Pool while the new block violates the order with its left neighbour (equal values are no
    // violation: they stay separate blocks, so a monotone input comes back bit for bit).
    while (!ws.block_value.empty() && ws.block_value.back() > v) {
      const double wl = ws.block_weight.back();
      v = (wl * ws.block_value.back() + wt * v) / (wl + wt);
      wt += wl;
      ws.block_value.pop_back();
      ws.block_weight.pop_back();
      ws.block_end.pop_back();
    }
    ws.block_value.push_back(v);
    ws.block_weight.push_back(wt);
    ws.block_end.push_back(i + 1);
  }
  std::size_t start = 0;
  for (std::size_t b = 0; b < ws.block_value.size(); ++b) {
    for (std::size_t i = start; i < ws.block_end[b]; ++i) out[i] = sign * ws.block_value[b];
    start = ws.block_end[b];
  }
}

}  // namespace

void isotonic_increasing(std::span<const double> y, std::span<const double> w, std::span<double> out,
                         IsotonicWorkspace& ws) {
  pava(y, w, out, ws, 1.0);
}

void isotonic_decreasing(std::span<const double> y, std::span<const double> w, std::span<double> out,
                         IsotonicWorkspace& ws) {
  pava(y, w, out, ws, -1.0);
}

std::vector<double> isotonic_increasing(std::span<const double> y, std::span<const double> w) {
  std::vector<double> out(y.size());
  IsotonicWorkspace ws;
  isotonic_increasing(y, w, out, ws);
  return out;
}

std::vector<double> isotonic_decreasing(std::span<const double> y, std::span<const double> w) {
  std::vector<double> out(y.size());
  IsotonicWorkspace ws;
  isotonic_decreasing(y, w, out, ws);
  return out;
}

}  // namespace dobudget
