#include "core/answer/summary.hpp"

#include <algorithm>
#include <cmath>
#include <map>
#include <tuple>

namespace dobudget {

double quantile_type7(std::vector<double> v, double p) {
  if (v.empty()) return std::nan("");
  std::sort(v.begin(), v.end());
  const double h = (static_cast<double>(v.size()) - 1.0) * p;
  const auto lo = static_cast<std::size_t>(std::floor(h));
  const std::size_t hi = std::min(lo + 1, v.size() - 1);
  // An infinite value (a model giving probability 0, or a cell with no data) absorbs: no inf - inf.
  if (v[lo] == v[hi] || std::isinf(v[lo])) return v[lo];
  if (std::isinf(v[hi])) return h == static_cast<double>(lo) ? v[lo] : v[hi];
  return v[lo] + (h - static_cast<double>(lo)) * (v[hi] - v[lo]);
}

std::vector<CellSummary> summarise(const std::vector<RunRecord>& rows, Measure measure) {
  using Key = std::tuple<int, Strategy, int, int>;
  std::map<Key, std::size_t> index;
  std::vector<CellSummary> cells;
  std::vector<std::vector<double>> values;
  for (const auto& r : rows) {
    const Key k{r.scenario, r.strategy, r.logged, r.pilot};
    auto it = index.find(k);
    if (it == index.end()) {
      it = index.emplace(k, cells.size()).first;
      cells.push_back({r.scenario, r.strategy, r.logged, r.pilot});
      values.emplace_back();
    }
    const auto& v = measure == Measure::model_kl ? r.model_kl : r.return_gap;
    if (v) values[it->second].push_back(*v);
  }
  for (std::size_t i = 0; i < cells.size(); ++i) {
    auto& c = cells[i];
    const auto& v = values[i];
    c.count = static_cast<int>(v.size());
    if (v.empty()) {
      c.mean = c.sd = c.median = c.q10 = c.q90 = std::nan("");
      continue;
    }
    double s = 0.0;
    for (double x : v) s += x;
    c.mean = s / static_cast<double>(v.size());
    double ss = 0.0;
    for (double x : v) ss += (x - c.mean) * (x - c.mean);
    c.sd = !std::isfinite(c.mean) ? std::nan("")  // undefined with an infinite value
           : v.size() > 1         ? std::sqrt(ss / static_cast<double>(v.size() - 1))
                                  : 0.0;
    c.median = quantile_type7(v, 0.5);
    c.q10 = quantile_type7(v, 0.1);
    c.q90 = quantile_type7(v, 0.9);
  }
  return cells;
}

}  // namespace dobudget
