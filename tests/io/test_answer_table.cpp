// answer.csv / answer.md / terminal table writers, src/io/answer_table.hpp.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>
#include <string>
#include <vector>

#include "io/answer_table.hpp"

using namespace dobudget;
namespace fs = std::filesystem;

namespace {

// A fresh empty directory under the system temporary directory, removed at scope exit.
struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() /
           ("dobudget-answer-test-" + std::to_string(reinterpret_cast<std::uintptr_t>(this)) + "-" +
            std::to_string(std::rand()));
    fs::remove_all(path);
    fs::create_directories(path);
  }
  ~TempDir() {
    std::error_code ec;
    fs::remove_all(path, ec);
  }
};

std::vector<std::string> split(const std::string& line) {
  std::vector<std::string> out;
  std::string cell;
  std::istringstream in(line);
  while (std::getline(in, cell, ',')) out.push_back(cell);
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

// Reads a numeric cell back the way pandas would: empty -> NaN, "inf" -> infinity.
double parse(const std::string& s) {
  if (s.empty()) return std::numeric_limits<double>::quiet_NaN();
  return std::strtod(s.c_str(), nullptr);
}

std::optional<double> parse_opt(const std::string& s) {
  if (s.empty()) return std::nullopt;
  return parse(s);
}

bool contains(const std::string& hay, const std::string& needle) { return hay.find(needle) != std::string::npos; }

bool same(double a, double b) { return (std::isnan(a) && std::isnan(b)) || a == b; }

std::vector<AnswerRow> sample_rows() {
  AnswerRow a;
  a.scenario = 0;
  a.measure = Measure::model_kl;
  a.target = 0.02;
  a.assurance = 0.8;
  a.criterion = Criterion::assurance;
  a.strategy = Strategy::pilot_only;
  a.logged = 0;
  a.needed_pilot = 208.00838230519041;
  a.low = 101.3;
  a.high = 1.0 / 3.0 * 1000.0;
  a.status = AnswerStatus::reached;
  a.pairs = 40;
  a.unconfirmed = 0.0125;

  AnswerRow b = a;
  b.unconfirmed.reset();
  b.strategy = Strategy::regime_aware;
  b.logged = 1000;
  b.needed_pilot = 12345.678901234567;
  b.low = 3000.5;
  b.high = std::numeric_limits<double>::infinity();
  b.status = AnswerStatus::extrapolated;
  b.floor = 0.0031415926535897933;
  b.saved_vs_pilot_only = -12137.670518929377;
  b.exchange_rate = -12.137670518929377;
  b.pairs = 39;

  AnswerRow c = a;
  c.scenario = 1;
  c.measure = Measure::return_gap;
  c.target = 0.1;
  c.assurance = std::numeric_limits<double>::quiet_NaN();
  c.criterion = Criterion::mean;
  c.strategy = Strategy::pooled;
  c.needed_pilot = std::numeric_limits<double>::infinity();
  c.low = 500;
  c.high = std::numeric_limits<double>::infinity();
  c.status = AnswerStatus::unreachable;
  c.floor = 0.25;
  c.saved_vs_pilot_only = std::nullopt;

  AnswerRow d = a;
  d.status = AnswerStatus::met_at_smallest;
  d.needed_pilot = 10;
  d.low = 10;
  d.high = 10;
  return {a, b, c, d};
}

}  // namespace

TEST_CASE("answer.csv: header and exact round trip", "[answer_table]") {
  // Header: docs/run-directory.md lists the columns: the first ten came first; the rest are appended (answer_table.hpp).
  // Numbers are written shortest-round-trip, so strtod gives back the same doubles (*common practice*:
  // fmt's "{}" for double is the shortest representation that round-trips).
  TempDir dir;
  const fs::path file = dir.path / "answer.csv";
  const auto rows = sample_rows();
  io::write_answer_csv(file, rows);

  std::ifstream in(file);
  std::string line;
  REQUIRE(std::getline(in, line));
  CHECK(line ==
        "scenario,measure,target,assurance,strategy,logged,needed_pilot,low,high,status,"
        "floor,saved_vs_pilot_only,exchange_rate,pairs,criterion,draws,unconfirmed,pilot_policy");
  std::vector<std::vector<std::string>> parsed;
  while (std::getline(in, line)) parsed.push_back(split(line));
  REQUIRE(parsed.size() == rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const auto& c = parsed[i];
    const auto& r = rows[i];
    INFO("row " << i);
    REQUIRE(c.size() == 18);
    CHECK(std::stoi(c[0]) == r.scenario);
    CHECK(parse_measure(c[1]) == r.measure);
    CHECK(same(parse(c[2]), r.target));
    CHECK(same(parse(c[3]), r.assurance));
    CHECK(parse_strategy(c[4]) == r.strategy);
    CHECK(std::stoi(c[5]) == r.logged);
    CHECK(same(parse(c[6]), r.needed_pilot));
    CHECK(same(parse(c[7]), r.low));
    CHECK(same(parse(c[8]), r.high));
    CHECK(parse_answer_status(c[9]) == r.status);
    CHECK(parse_opt(c[10]) == r.floor);
    CHECK(parse_opt(c[11]) == r.saved_vs_pilot_only);
    CHECK(parse_opt(c[12]) == r.exchange_rate);
    CHECK(std::stoi(c[13]) == r.pairs);
    CHECK(parse_criterion(c[14]) == r.criterion);
    CHECK(std::stoi(c[15]) == r.draws);
    CHECK(parse_opt(c[16]) == r.unconfirmed);
    CHECK(parse_pilot_policy(c[17]) == r.pilot_policy);  // issue 13: appended last
  }
  CHECK(parsed[0][16] == "0.0125");
  CHECK(parsed[1][16].empty());  // no share known: empty
  // Spelling of special cells: "inf" for infinity, empty for missing.
  CHECK(parsed[1][8] == "inf");
  CHECK(parsed[2][3].empty());
  CHECK(parsed[2][11].empty());
  CHECK(parsed[0][10].empty());

  // Written through a temporary name and renamed: nothing else is left in the directory.
  std::vector<fs::path> entries;
  for (const auto& e : fs::directory_iterator(dir.path)) entries.push_back(e.path().filename());
  REQUIRE(entries.size() == 1);
  CHECK(entries[0] == "answer.csv");

  // Rewriting replaces the file whole.
  io::write_answer_csv(file, {rows[0]});
  std::ifstream again(file);
  int lines = 0;
  while (std::getline(again, line)) ++lines;
  CHECK(lines == 2);
}

TEST_CASE("answer.md: tables, criterion, statuses and caution", "[answer_table]") {
  TempDir dir;
  const fs::path file = dir.path / "answer.md";
  io::write_answer_md(file, "example", {"logging.privilege=0.5", "logging.privilege=0.9"}, sample_rows());
  std::ifstream in(file);
  std::stringstream ss;
  ss << in.rdbuf();
  const std::string md = ss.str();
  CHECK(md.find("# Pilot episodes needed: example") != std::string::npos);
  CHECK(md.find("## Scenario 0: logging\\.privilege=0\\.5") != std::string::npos);  // labels: markdown_text
  CHECK(md.find("## Scenario 1: logging\\.privilege=0\\.9") != std::string::npos);
  CHECK(md.find("Criterion `assurance`: at least 80% of") != std::string::npos);
  CHECK(md.find("Criterion `mean`") != std::string::npos);
  CHECK(md.find("| pilot-only | 0 | 209 | [102, 334] | reached |") != std::string::npos);
  CHECK(md.find("| pilot-only | 0 | <= 10 |") != std::string::npos);  // upper bound spelled out
  CHECK(md.find("an upper bound") != std::string::npos);
  CHECK(md.find("| unreachable | 0.25 |") != std::string::npos);
  CHECK(md.find("This is a simulation under stated assumptions (the synthetic family or the given model, the "
                "logging model, the pilot policy); it is no substitute for a qualified statistician, for ethics "
                "review, or for local regulations on trials.") != std::string::npos);
  std::size_t n = 0;
  for (const auto& e : fs::directory_iterator(dir.path)) {
    (void)e;
    ++n;
  }
  CHECK(n == 1);
}

TEST_CASE("terminal table: aligned columns", "[answer_table]") {
  const std::string t = io::format_answer_table(sample_rows());
  std::vector<std::string> lines;
  std::istringstream in(t);
  std::string line;
  while (std::getline(in, line)) lines.push_back(line);
  REQUIRE(lines.size() == 5);
  CHECK(lines[0].rfind("scenario", 0) == 0);
  // The status column starts at the same offset on every line.
  const auto col = lines[0].find("status");
  REQUIRE(col != std::string::npos);
  CHECK(lines[1].compare(col, 7, "reached") == 0);
  CHECK(lines[2].compare(col, 12, "extrapolated") == 0);
  CHECK(lines[3].compare(col, 11, "unreachable") == 0);
  CHECK(lines[4].compare(col, 15, "met-at-smallest") == 0);
}

TEST_CASE("answer table: worst case over scenarios takes the largest need, unknown counting as worst",
          "[answer_table]") {
  // Definition (README, "worst case over the swept scenarios"): for each cell, the scenario with the
  // largest needed_pilot; an unknown need (NaN, not-reached) is worse than any known one.
  auto row = [](int scenario, double needed, int logged) {
    dobudget::AnswerRow r;
    r.scenario = scenario;
    r.strategy = dobudget::Strategy::pooled;
    r.target = 0.02;
    r.assurance = 0.8;
    r.logged = logged;
    r.needed_pilot = needed;
    return r;
  };
  const auto w = dobudget::io::worst_case_over_scenarios(
      {row(0, 10.0, 0), row(1, 30.0, 0), row(2, 20.0, 0), row(0, 5.0, 100), row(1, std::nan(""), 100), row(2, 50.0, 100)});
  REQUIRE(w.size() == 2);
  CHECK(w[0].scenario == 1);
  CHECK(w[0].needed_pilot == 30.0);
  CHECK(w[1].scenario == 1);
  CHECK(std::isnan(w[1].needed_pilot));
}

TEST_CASE("answer.md: a hostile study name and labels are shown literally, on one line", "[answer_table]") {
  // User text goes through markdown_text (text_escape.hpp): CommonMark 0.31.2,
  // sections 2.4 and 2.5; GFM spec 0.29, section 4.10 for the pipe in a table cell.
  const std::string name = "x`touch PWNED`y\n# injected](http://e)<script>";
  const std::string md =
      io::format_answer_md(name, {"a=1\n## Caution", "b|c=2 <b>bold</b>"}, sample_rows());
  CHECK(md.rfind("# Pilot episodes needed: x\\`touch PWNED\\`y \\# injected\\]\\(http\\://e\\)&lt;script&gt;\n\n", 0) == 0);
  CHECK(contains(md, "\n## Scenario 0: a=1 \\#\\# Caution\n"));
  CHECK(contains(md, "\n## Scenario 1: b\\|c=2 &lt;b&gt;bold&lt;/b&gt;\n"));
  // The worst-case table names the scenario in its last cell: the row keeps its nine cells (ten
  // unescaped pipes), the pipe in the label escaped.
  const auto at = md.find(" | b\\|c=2 &lt;b&gt;bold&lt;/b&gt; |\n");
  REQUIRE(at != std::string::npos);
  const auto row_start = md.rfind('\n', at) + 1;
  const std::string row = md.substr(row_start, md.find('\n', at) - row_start);
  int pipes = 0;
  for (std::size_t i = 0; i < row.size(); ++i)
    if (row[i] == '|' && (i == 0 || row[i - 1] != '\\')) ++pipes;
  CHECK(pipes == 10);
  CHECK_FALSE(contains(md, "<script>"));
  CHECK_FALSE(contains(md, "](http://e)"));
  CHECK_FALSE(contains(md, "\n# injected"));
  // Exactly one "## Caution" heading: the label cannot make a second one.
  std::size_t cautions = 0;
  for (auto p = md.find("\n## Caution"); p != std::string::npos; p = md.find("\n## Caution", p + 1)) ++cautions;
  CHECK(cautions == 1);
}

namespace {

// One query's answers as compute_answers gives them for pilot-only, pooled and regime-aware at
// logged 0 and 1000: pilot-only the same at both logged budgets (it ignores logged data), the other
// two at logged 0 the same as pilot-only (the same fit).
std::vector<AnswerRow> full_rows() {
  AnswerRow p;
  p.target = 0.02;
  p.assurance = 0.8;
  p.strategy = Strategy::pilot_only;
  p.needed_pilot = 208.2;
  p.low = 100;
  p.high = 300;
  p.pairs = 40;
  p.draws = 12;
  p.smallest = 10;
  std::vector<AnswerRow> rows;
  for (Strategy s : {Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware})
    for (int logged : {0, 1000}) {
      AnswerRow r = p;
      r.strategy = s;
      r.logged = logged;
      if (s != Strategy::pilot_only && logged == 1000) {
        r.needed_pilot = s == Strategy::pooled ? 51.0 : 77.0;
        r.low = 30;
        r.high = 100;
      }
      rows.push_back(r);
    }
  return rows;
}

std::vector<std::string> lines_with(const std::string& text, const std::string& needle) {
  std::vector<std::string> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line))
    if (line.find(needle) != std::string::npos) out.push_back(line);
  return out;
}

}  // namespace

TEST_CASE("answer tables: pilot-only once, no strategy at logged 0, one line saying so; answer.csv keeps every row",
          "[answer_table]") {
  // Issue 10, item 5 (answer_table.hpp, readable_answers).
  const auto rows = full_rows();
  const auto shown = io::readable_answers(rows);
  REQUIRE(shown.rows.size() == 3);
  CHECK(shown.left_out == 3);
  CHECK(shown.rows[0].strategy == Strategy::pilot_only);
  CHECK(shown.logged[0] == "any");
  CHECK(shown.rows[1].strategy == Strategy::pooled);
  CHECK(shown.logged[1] == "1000");
  CHECK(shown.rows[2].strategy == Strategy::regime_aware);

  const std::string md = io::format_answer_md("example", {}, rows);
  CHECK(lines_with(md, "| pilot-only |").size() == 1);
  CHECK(lines_with(md, "| pilot-only | any | 209 | [100, 300] |").size() == 1);
  CHECK(lines_with(md, "| pooled |").size() == 1);
  CHECK(lines_with(md, "| pooled | 0 |").empty());
  CHECK(md.find("pilot-only is shown once") != std::string::npos);

  const std::string t = io::format_answer_table(rows);
  CHECK(lines_with(t, "pilot-only").size() == 2);  // its row and the line saying so
  CHECK(lines_with(t, "pooled").size() == 1);
  CHECK(t.find("(pilot-only is shown once") != std::string::npos);

  TempDir dir;
  io::write_answer_csv(dir.path / "answer.csv", rows);
  std::ifstream in(dir.path / "answer.csv");
  int lines = 0;
  for (std::string line; std::getline(in, line);) ++lines;
  CHECK(lines == 1 + 6);

  // A pooled answer at logged 0 that is not pilot-only's (not produced by compute_answers, but
  // possible from edited rows) is shown, and nothing is said of rows that are not left out.
  auto odd = rows;
  odd[2].needed_pilot = 99.0;
  CHECK(io::readable_answers(odd).rows.size() == 4);
  CHECK(io::readable_answers({rows[3]}).left_out == 0);
  CHECK(io::format_answer_table({rows[3]}).find("shown once") == std::string::npos);
}

TEST_CASE("answer tables: a lower end below the smallest budget reads as an upper bound; few draws warn",
          "[answer_table]") {
  // Issue 10, items 1 and 4: met at the smallest budget 10, the interval [0, 10] reads "<= 10"
  // (not [10, 10]); [0, 30] reads "[<= 10, 30]"; a smallest budget of 0 met is exact ("0").
  auto rows = full_rows();
  AnswerRow r = rows[0];
  r.status = AnswerStatus::met_at_smallest;
  r.needed_pilot = 10;
  r.low = 0;
  r.high = 10;
  AnswerRow wider = r;
  wider.strategy = Strategy::pooled;
  wider.logged = 1000;
  wider.high = 30;
  AnswerRow zero = r;
  zero.strategy = Strategy::regime_aware;
  zero.logged = 1000;
  zero.smallest = 0;
  zero.needed_pilot = 0;
  zero.high = 0;
  const std::string md = io::format_answer_md("example", {}, {r, wider, zero});
  CHECK(lines_with(md, "| pilot-only | any | <= 10 | <= 10 | met-at-smallest |").size() == 1);
  CHECK(lines_with(md, "| pooled | 1000 | <= 10 | [<= 10, 30] |").size() == 1);
  CHECK(lines_with(md, "| regime-aware | 1000 | 0 | [0, 0] |").size() == 1);
  CHECK(md.find("Few environment draws") == std::string::npos);  // 12 draws

  // Fewer than 10 draws of the family: warned in both tables; a given model (one world) is not.
  for (auto& x : rows) x.draws = 4;
  const std::string few_md = io::format_answer_md("example", {}, rows);
  CHECK(few_md.find("**Few environment draws**: these answers rest on 4 environment draws (fewer than 10)") !=
        std::string::npos);
  CHECK(lines_with(few_md, "| pilot-only | any | 209 | [100, 300] | reached | - | - | - | 40 | 4 |").size() == 1);
  CHECK(io::format_answer_table(rows).find("warning: these answers rest on 4 environment draws") != std::string::npos);
  for (auto& x : rows) {
    x.draws = 1;
    x.family_draws = false;
  }
  CHECK(io::format_answer_md("example", {}, rows).find("Few environment draws") == std::string::npos);
  CHECK(io::format_answer_table(rows).find("warning") == std::string::npos);
}
