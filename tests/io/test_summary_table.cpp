// The table `dobudget plan` prints, src/io/summary_table.hpp: pilot-only once and no strategy at
// logged 0 (issue 10, item 5); runs.csv keeps every row.
#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <sstream>
#include <string>
#include <vector>

#include "../core/run_records.hpp"
#include "io/summary_table.hpp"

using namespace dobudget;

namespace {
constexpr double kInf = std::numeric_limits<double>::infinity();
}  // namespace

TEST_CASE("summary table: pilot-only once, strategies at logged 0 left out, one line saying so", "[summary_table]") {
  // Records as run_unit writes them (unit.hpp: fits are shared): pilot-only the same at logged 0 and
  // 100, pooled at logged 0 the same as pilot-only, pooled at 100 different.
  Study st;
  Scenario sc;
  sc.settings.strategies = {Strategy::pilot_only, Strategy::pooled};
  sc.settings.logged_budgets = {0, 100};
  sc.settings.pilot_budgets = {10, 30};
  st.scenarios.push_back(sc);
  std::vector<RunRecord> rows;
  for (int j = 0; j < 4; ++j)
    for (Strategy s : sc.settings.strategies)
      for (int logged : sc.settings.logged_budgets)
        for (int pilot : sc.settings.pilot_budgets) {
          const bool own = s == Strategy::pooled && logged == 100;
          rows.push_back(test::make_record(0, j, 0, s, logged, pilot, (own ? 0.5 : 1.0) * (j + 1) / pilot));
        }
  const std::string t = io::format_summary(st, rows);
  std::vector<std::string> body;
  std::istringstream in(t);
  for (std::string line; std::getline(in, line);)
    if (line.rfind("  pilot-only", 0) == 0 || line.rfind("  pooled", 0) == 0) body.push_back(line);
  REQUIRE(body.size() == 4);  // pilot-only at 10 and 30, pooled at 100 at 10 and 30
  CHECK(body[0].find("  any ") != std::string::npos);
  CHECK(body[2].rfind("  pooled", 0) == 0);
  CHECK(body[2].find(" 100 ") != std::string::npos);
  CHECK(t.find("pilot-only is shown once") != std::string::npos);
  CHECK(t.find("runs.csv keeps every row") != std::string::npos);

  // Without pilot-only among the strategies, pooled at logged 0 is shown, and nothing is said.
  Study alone = st;
  alone.scenarios[0].settings.strategies = {Strategy::pooled};
  std::vector<RunRecord> pooled;
  for (const auto& r : rows)
    if (r.strategy == Strategy::pooled) pooled.push_back(r);
  const std::string u = io::format_summary(alone, pooled);
  CHECK(u.find("shown once") == std::string::npos);
  CHECK(io::readable_cells(summarise(pooled, Measure::model_kl)).cells.size() == 4);
}

TEST_CASE("summary: infinite values (cells with no data) give infinite quantiles, not NaN", "[summary_table]") {
  // summary.hpp, Hyndman and Fan type 7 with +infinity absorbing: the median of {1, inf} lies
  // between 1 and inf (inf); its 0-quantile is 1; the sd of values with an infinity is undefined.
  CHECK(std::isinf(quantile_type7({1.0, kInf}, 0.5)));
  CHECK(quantile_type7({1.0, kInf}, 0.0) == 1.0);
  CHECK(std::isinf(quantile_type7({kInf, kInf}, 0.1)));
  std::vector<RunRecord> rows;
  for (int j = 0; j < 3; ++j) rows.push_back(test::make_record(0, j, 0, Strategy::pilot_only, 0, 0, kInf));
  const auto c = summarise(rows, Measure::model_kl);
  REQUIRE(c.size() == 1);
  CHECK(std::isinf(c[0].mean));
  CHECK(std::isinf(c[0].median));
  CHECK(std::isinf(c[0].q10));
  CHECK(std::isnan(c[0].sd));
}
