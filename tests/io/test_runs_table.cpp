// runs.csv lines read back to the same record, bit for bit (design.md sec. 7: runs.csv is the
// stored result that `answer`, `merge` and resume read again). IEEE 754 doubles printed in the
// shortest round-trip form (fmt "{}") must parse back exactly, subnormals included (*common practice*:
// std::from_chars is specified to be exact; C++17 [charconv.from.chars]).
#include <catch2/catch.hpp>

#include <cmath>
#include <limits>

#include "io/runs_table.hpp"

using namespace dobudget;

TEST_CASE("runs.csv line round trip is exact, subnormals and infinities included", "[runs_table]") {
  for (double x : {0.0, -0.0, 5e-324, 2.2250738585072014e-308, 1e-300, 0.1, 1.0 / 3.0, 1e300,
                   std::numeric_limits<double>::max(), std::numeric_limits<double>::infinity()}) {
    RunRecord r;
    r.scenario = 2;
    r.environment = 3;
    r.replicate = 4;
    r.strategy = Strategy::regime_aware;
    r.logged = 1000;
    r.pilot = 30;
    r.model_kl = x;
    r.return_gap = -x;
    r.loglik = -x;
    r.iterations = 17;
    r.converged = true;
    r.note = "no room for planning";
    const RunRecord back = io::parse_runs_line(io::runs_line(r));
    INFO(io::runs_line(r));
    CHECK(std::signbit(*back.model_kl) == std::signbit(x));
    CHECK(*back.model_kl == x);
    CHECK(*back.return_gap == -x);
    CHECK(back.loglik == -x);
    CHECK(back.strategy == r.strategy);
    CHECK(back.note == r.note);
    CHECK(io::runs_line(back) == io::runs_line(r));
  }
  RunRecord empty;
  CHECK_FALSE(io::parse_runs_line(io::runs_line(empty)).model_kl.has_value());
  CHECK_THROWS(io::parse_runs_line("0,0,0,pooled,0,10,0.1x,,1,2,1,"));
  CHECK_THROWS(io::parse_runs_line("0,0,0,pooled,0,10,0.1,,1,2,1"));  // 11 cells
}
