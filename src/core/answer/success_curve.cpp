#include "core/answer/success_curve.hpp"

#include <cmath>
#include <limits>
#include <map>
#include <stdexcept>
#include <tuple>

namespace dobudget {

namespace {

std::vector<SuccessCell> count(const std::vector<RunRecord>& rows, const int* scenario, Measure measure,
                               double target) {
  if (std::isnan(target)) throw std::invalid_argument("success_curve: the target is NaN");
  using Key = std::tuple<int, Strategy, int, int>;
  std::map<Key, std::size_t> index;
  std::vector<SuccessCell> cells;
  for (const auto& r : rows) {
    if (scenario != nullptr && r.scenario != *scenario) continue;
    const Key k{r.scenario, r.strategy, r.logged, r.pilot};
    auto it = index.find(k);
    if (it == index.end()) {
      it = index.emplace(k, cells.size()).first;
      SuccessCell c;
      c.scenario = r.scenario;
      c.strategy = r.strategy;
      c.logged = r.logged;
      c.pilot = r.pilot;
      cells.push_back(c);
    }
    const auto& v = measure == Measure::model_kl ? r.model_kl : r.return_gap;
    if (!v || std::isnan(*v)) continue;
    auto& c = cells[it->second];
    ++c.pairs;
    if (*v <= target) ++c.successes;
  }
  for (auto& c : cells)
    c.fraction = c.pairs > 0 ? static_cast<double>(c.successes) / static_cast<double>(c.pairs)
                             : std::numeric_limits<double>::quiet_NaN();
  return cells;
}

}  // namespace

std::vector<SuccessCell> success_curve(const std::vector<RunRecord>& rows, Measure measure, double target) {
  return count(rows, nullptr, measure, target);
}

std::vector<SuccessCell> success_curve(const std::vector<RunRecord>& rows, int scenario, Measure measure,
                                       double target) {
  return count(rows, &scenario, measure, target);
}

}  // namespace dobudget
