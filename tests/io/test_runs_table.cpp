// runs.csv lines read back to the same record, bit for bit (docs/run-directory.md, "runs.csv": runs.csv is the
// stored result that `answer`, `merge` and resume read again). IEEE 754 doubles printed in the
// shortest round-trip form (fmt "{}") must parse back exactly, subnormals included (*common practice*:
// std::from_chars is specified to be exact; C++17 [charconv.from.chars]). Reading treats the text as
// hostile: every bad cell is an InputError naming the file, the line and the column.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <limits>

#include "input_error_of.hpp"
#include "core/running/unit.hpp"
#include "io/runs_table.hpp"
#include "temp_dir.hpp"

using namespace dobudget;
using dobudget::test::error_of;

namespace {

const std::string header = std::string(io::runs_header) + "\n";
const std::string good = "0,1,2,pooled,100,30,0.25,,-12.5,17,1,,3,1";

}  // namespace

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
    if (std::isfinite(x)) r.return_gap = -x;
    r.loglik = -x;
    r.iterations = 17;
    r.converged = true;
    r.note = "no room for planning";
    const RunRecord back = io::parse_runs_line(io::runs_line(r));
    INFO(io::runs_line(r));
    CHECK(std::signbit(*back.model_kl) == std::signbit(x));
    CHECK(*back.model_kl == x);
    CHECK(back.return_gap == r.return_gap);
    CHECK(back.loglik == -x);
    CHECK(back.strategy == r.strategy);
    CHECK(back.note == r.note);
    CHECK(io::runs_line(back) == io::runs_line(r));
  }
  RunRecord empty;
  CHECK_FALSE(io::parse_runs_line(io::runs_line(empty)).model_kl.has_value());
  CHECK_THROWS(io::parse_runs_line("0,0,0,pooled,0,10,0.1x,,1,2,1,,3,1"));
  CHECK_THROWS(io::parse_runs_line("0,0,0,pooled,0,10,0.1,,1,2,1,,3"));  // 13 cells
}

TEST_CASE("runs.csv: a cell with no data (pilot budget 0) reads back with infinite measures", "[runs_table][budget0]") {
  // unit.hpp (kNoData): nothing fitted, every measure +inf. return_gap is otherwise finite or empty.
  const std::string line = "0,1,2,pilot-only,0,0,inf,inf,0,0,0,no data: nothing fitted,0,0";
  const RunRecord r = io::parse_runs_line(line);
  CHECK(std::isinf(*r.model_kl));
  CHECK(std::isinf(*r.return_gap));
  CHECK(r.note == kNoData);
  CHECK(io::runs_line(r) == line);
  CHECK_THROWS(io::parse_runs_line("0,1,2,pilot-only,0,0,inf,inf,0,0,0,no room for planning,0,0"));
  CHECK_THROWS(io::parse_runs_line("0,1,2,pilot-only,0,0,inf,-inf,0,0,0,no data: nothing fitted,0,0"));
}

TEST_CASE("runs.csv: every bad cell is refused with the file, the line and the column", "[runs_table]") {
  // (line with one bad cell, column named, words of the message)
  const std::vector<std::tuple<std::string, std::string, std::string>> cases{
      {"-1,1,2,pooled,100,30,0.25,,-12.5,17,1,,3,1", "scenario", "at least 0"},
      {"0,x,2,pooled,100,30,0.25,,-12.5,17,1,,3,1", "environment", "integer"},
      {"0,1,99999999999,pooled,100,30,0.25,,-12.5,17,1,,3,1", "replicate", "integer"},
      {"0,1,2,oracle,100,30,0.25,,-12.5,17,1,,3,1", "strategy", "unknown strategy 'oracle'"},
      {"0,1,2,pooled,1e3,30,0.25,,-12.5,17,1,,3,1", "logged", "integer"},
      {"0,1,2,pooled,100,+30,0.25,,-12.5,17,1,,3,1", "pilot", "integer"},
      {"0,1,2,pooled,100,30,-0.3,,-12.5,17,1,,3,1", "model_kl", "must be at least 0, got -0.3"},
      {"0,1,2,pooled,100,30,nan,,-12.5,17,1,,3,1", "model_kl", "must be at least 0"},
      {"0,1,2,pooled,100,30,0.25,inf,-12.5,17,1,,3,1", "return_gap", "finite"},
      {"0,1,2,pooled,100,30,0.25,0.1.2,-12.5,17,1,,3,1", "return_gap", "expected a number"},
      {"0,1,2,pooled,100,30,0.25,,nan,17,1,,3,1", "loglik", "nan"},
      {"0,1,2,pooled,100,30,0.25,,,17,1,,3,1", "loglik", "expected a number"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,-4,1,,3,1", "iterations", "at least 0"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,17,2,,3,1", "converged", "must be 0 or 1"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,17,1,,-1,0", "starts", "at least 0"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,17,1,,3,2", "confirmed", "must be 0 or 1"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,17,1,,1,1", "confirmed", "second start"},
      {"0,1,2,pooled,100,30,0.25,,-12.5,17,1,bad\r,3,1", "note", "control character"},
  };
  for (const auto& [line, column, words] : cases) {
    INFO(line);
    const auto e = error_of([&, l = line] { io::parse_runs(header + good + "\n" + l + "\n", "run/runs.csv"); });
    CHECK(e.file == "run/runs.csv");
    CHECK(e.line == 3);
    CHECK(e.key == column);
    CHECK_THAT(e.message, Catch::Contains(words));
    CHECK_THAT(e.what(), Catch::StartsWith("run/runs.csv:3: " + column + ": "));
  }
  const auto cells = error_of([] { io::parse_runs(header + "0,1,2,pooled,100,30,0.25\n", "runs.csv"); });
  CHECK(cells.line == 2);
  CHECK_THAT(cells.message, Catch::Contains("expected 14 cells"));
  CHECK(error_of([] { io::parse_runs(header + good + "\n\n" + good + "\n", "runs.csv"); }).line == 3);  // a gap
  CHECK(error_of([] { io::parse_runs("scenario,draw\n" + good + "\n", "runs.csv"); }).line == 1);
  CHECK_THAT(error_of([] { io::parse_runs("", "runs.csv"); }).message, Catch::Contains("is empty"));
  // A header alone parses (no rows); whether rows are missing is for the study to say (expected_rows.hpp).
  CHECK(io::parse_runs(header, "runs.csv").empty());
  CHECK(io::parse_runs(header + good, "runs.csv").size() == 1);  // the final LF is optional
}

TEST_CASE("runs.csv: damaged text only ever gives an InputError", "[runs_table]") {
  // Mutations of a valid table (common practice: mutation fuzzing of a parser, run here as a
  // deterministic test): each is read back or refused with an InputError, never anything else.
  const std::string text = header + good + "\n" + "0,1,3,regime-aware,0,5,inf,-0.5,-1e300,0,0,no room for planning\n";
  std::uint64_t state = 12345;
  const auto next = [&] {  // SplitMix64 (Steele, Lea and Flood 2014)
    std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  };
  int refused = 0, read = 0;
  for (int trial = 0; trial < 5000; ++trial) {
    std::string t = text;
    const int edits = 1 + static_cast<int>(next() % 3);
    for (int k = 0; k < edits; ++k) {
      const std::size_t at = next() % t.size();
      switch (next() % 3) {
        case 0: t[at] = static_cast<char>(next() & 0xff); break;
        case 1: t.erase(at, 1 + next() % 8); break;
        default: t.insert(at, 1, ",;\n-.e9x\0"[next() % 9]); break;
      }
      if (t.empty()) t = "x";
    }
    try {
      io::parse_runs(t, "runs.csv");
      ++read;
    } catch (const io::InputError& e) {
      CHECK(e.line >= 0);
      ++refused;
    }
  }
  CHECK(refused + read == 5000);
  CHECK(refused > 1000);
}

TEST_CASE("timings.csv: fit_seconds read beside runs.csv, and a timings.csv that disagrees is refused",
          "[runs_table]") {
  test::TempDir d("dobudget_test_runs_table");
  const std::string row2 = "0,1,3,pilot-only,0,5,0.5,,-3,4,1,,3,0";
  d.write("runs.csv", header + good + "\n" + row2 + "\n");
  const std::string th = std::string(io::timings_header) + "\n";
  d.write("timings.csv", th + "0,1,2,pooled,100,30,0.125000\n0,1,3,pilot-only,0,5,2.5\n");
  const auto rows = io::read_runs(d.path() / "runs.csv");
  REQUIRE(rows.size() == 2);
  CHECK(rows[0].fit_seconds == 0.125);
  CHECK(rows[1].fit_seconds == 2.5);

  d.write("timings.csv", th + "0,1,2,pooled,100,30,0.125000\n0,1,4,pilot-only,0,5,2.5\n");
  const auto keys = error_of([&] { io::read_runs(d.path() / "runs.csv"); });
  CHECK(keys.file == (d.path() / "timings.csv").string());
  CHECK(keys.line == 3);
  d.write("timings.csv", th + "0,1,2,pooled,100,30,-1\n0,1,3,pilot-only,0,5,2.5\n");
  const auto negative = error_of([&] { io::read_runs(d.path() / "runs.csv"); });
  CHECK(negative.line == 2);
  CHECK(negative.key == "fit_seconds");
  d.write("timings.csv", th + "0,1,2,pooled,100,30,0.1\n");
  CHECK_THAT(error_of([&] { io::read_runs(d.path() / "runs.csv"); }).message, Catch::Contains("has 1 rows"));
}
