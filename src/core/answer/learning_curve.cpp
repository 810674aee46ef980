// Variable-projection fit of e(n) = c + a n^(-b); see learning_curve.hpp.
#include "core/answer/learning_curve.hpp"

#include <algorithm>
#include <boost/math/tools/minima.hpp>
#include <cmath>
#include <cstdint>
#include <limits>
#include <stdexcept>

namespace dobudget {

namespace {

// Design budgets are few (the pilot grid); a fixed bound lets the fit work on the stack.
constexpr std::size_t kMaxPoints = 256;

struct Points {
  double log_n[kMaxPoints];
  double y[kMaxPoints];
  double w[kMaxPoints];
  std::size_t k = 0;
};

struct Linear {
  double c, a, rss;
};

// Best (c, a) for fixed b under a >= 0 (and c >= 0 when asked), with its weighted RSS.
Linear solve_linear(const Points& p, double b, bool nonnegative_floor) {
  double x[kMaxPoints];
  double sw = 0, sx = 0, sy = 0;
  for (std::size_t i = 0; i < p.k; ++i) {
    x[i] = std::exp(-b * p.log_n[i]);
    sw += p.w[i];
    sx += p.w[i] * x[i];
    sy += p.w[i] * p.y[i];
  }
  const double xbar = sx / sw, ybar = sy / sw;
  double cxx = 0, cxy = 0, sxx = 0, sxy = 0;
  for (std::size_t i = 0; i < p.k; ++i) {
    cxx += p.w[i] * (x[i] - xbar) * (x[i] - xbar);
    cxy += p.w[i] * (x[i] - xbar) * (p.y[i] - ybar);
    sxx += p.w[i] * x[i] * x[i];
    sxy += p.w[i] * x[i] * p.y[i];
  }
  // Residuals summed directly (not from the moments) so that an exact fit has RSS ~ 0, not the
  // cancellation error of the moments.
  auto rss = [&](double c, double a) {
    double s = 0;
    for (std::size_t i = 0; i < p.k; ++i) {
      const double r = p.y[i] - c - a * x[i];
      s += p.w[i] * r * r;
    }
    return s;
  };
  // Active-set enumeration of the convex QP: the optimum is the feasible candidate of least RSS.
  // The flat curve (a = 0 active) is always feasible and is the starting candidate.
  const double c_flat = nonnegative_floor ? std::max(ybar, 0.0) : ybar;
  Linear best{c_flat, 0.0, rss(c_flat, 0.0)};
  auto consider = [&](double c, double a) {
    if (a < 0.0 || (nonnegative_floor && c < 0.0)) return;
    const double r = rss(c, a);
    if (r < best.rss) best = {c, a, r};
  };
  if (cxx > 0.0) {
    const double a = cxy / cxx;
    consider(ybar - a * xbar, a);  // no bound active
  }
  if (nonnegative_floor && sxx > 0.0) consider(0.0, std::max(sxy / sxx, 0.0));  // c = 0 active
  return best;
}

}  // namespace

double LearningCurve::operator()(double n) const { return c + a * std::pow(n, -b); }

std::optional<double> LearningCurve::solve(double epsilon) const {
  if (c >= epsilon) return std::nullopt;
  if (!(a > 0.0)) return 0.0;
  return std::pow(a / (epsilon - c), 1.0 / b);
}

std::optional<LearningCurve> fit_learning_curve(std::span<const double> n, std::span<const double> y,
                                                std::span<const double> w, const LearningCurveOptions& opt) {
  if (n.size() != y.size() || n.size() != w.size())
    throw std::invalid_argument("fit_learning_curve: budgets, values and weights differ in length");
  if (!(opt.b_min > 0.0) || !(opt.b_max > opt.b_min) || opt.scan_points < 2)
    throw std::invalid_argument("fit_learning_curve: bad options");
  Points p;
  double first_n = -1.0;
  bool distinct3 = false;
  double second_n = -1.0;
  for (std::size_t i = 0; i < n.size(); ++i) {
    if (!(n[i] > 0.0) || !(w[i] > 0.0) || !std::isfinite(y[i]) || !std::isfinite(w[i])) continue;
    if (p.k == kMaxPoints) throw std::invalid_argument("fit_learning_curve: too many points");
    p.log_n[p.k] = std::log(n[i]);
    p.y[p.k] = y[i];
    p.w[p.k] = w[i];
    ++p.k;
    if (first_n < 0) first_n = n[i];
    else if (n[i] != first_n && second_n < 0) second_n = n[i];
    else if (n[i] != first_n && n[i] != second_n) distinct3 = true;
  }
  if (!distinct3) return std::nullopt;

  auto profile = [&](double b) { return solve_linear(p, b, opt.nonnegative_floor).rss; };

  // Coarse geometric scan of the profile, then Brent inside the bracket around the best point.
  const int m = opt.scan_points;
  const double ratio = std::log(opt.b_max / opt.b_min) / (m - 1);
  int best = 0;
  double best_rss = std::numeric_limits<double>::infinity();
  for (int j = 0; j < m; ++j) {
    const double b = opt.b_min * std::exp(ratio * j);
    const double r = profile(b);
    if (r < best_rss) {
      best_rss = r;
      best = j;
    }
  }
  const double lo = opt.b_min * std::exp(ratio * std::max(best - 1, 0));
  const double hi = best + 1 >= m ? opt.b_max : opt.b_min * std::exp(ratio * (best + 1));
  std::uintmax_t iterations = 100;
  const auto [b, r] = boost::math::tools::brent_find_minima(profile, lo, hi, std::numeric_limits<double>::digits / 2,
                                                            iterations);
  double b_fit = b;
  if (!(r <= best_rss)) b_fit = opt.b_min * std::exp(ratio * best);  // keep the scan point if Brent did worse
  const Linear lin = solve_linear(p, b_fit, opt.nonnegative_floor);
  LearningCurve curve;
  curve.c = lin.c;
  curve.a = lin.a;
  curve.b = b_fit;
  curve.rss = lin.rss;
  return curve;
}

void inverse_variance_weights(std::span<const double> var, std::span<const double> m, std::span<double> out) {
  if (var.size() != m.size() || var.size() != out.size())
    throw std::invalid_argument("inverse_variance_weights: lengths differ");
  double s_max = 0.0;
  for (std::size_t i = 0; i < var.size(); ++i)
    if (m[i] >= 2.0 && std::isfinite(var[i])) s_max = std::max(s_max, var[i] / m[i]);
  if (!(s_max > 0.0)) {
    std::fill(out.begin(), out.end(), 1.0);
    return;
  }
  const double s_floor = 1e-6 * s_max;
  for (std::size_t i = 0; i < var.size(); ++i) {
    const double s = (m[i] >= 2.0 && std::isfinite(var[i])) ? var[i] / m[i] : s_max;
    out[i] = 1.0 / std::max(s, s_floor);
  }
}

}  // namespace dobudget
