// Loading a finished run directory for re-analysis (io/finished_run.hpp): a run as `plan` wrote it
// loads with exactly its rows; a runs.csv cut short, header-only, with an extra, repeated or
// foreign row or a value out of range, and a study.resolved.yaml edited after planning, are each
// refused with an InputError naming the file, the line and the column.
#include <catch2/catch.hpp>

#include <fstream>

#include "input_error_of.hpp"
#include "io/atomic_file.hpp"
#include "io/finished_run.hpp"
#include "io/journal.hpp"
#include "io/run_directory.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"
#include "temp_dir.hpp"

namespace fs = std::filesystem;
using namespace dobudget;
using dobudget::test::error_of;

namespace {

// 2 draws x 2 replicates x (3 strategies x 2 logged x 2 pilot) = 48 rows; a fraction of a second.
const char* study_text = R"(name: finished-run-test
seed: 3
environment: { states: 2, actions: 2, observations: 2, horizon: 3, draws: 2 }
budgets: { logged: [0, 20], pilot: [5, 10] }
replicates: 2
fit: { restarts: 1, max_iterations: 10 }
evaluation: { trajectories: 20 }
targets: { model_kl: 0.05 }
)";
constexpr std::size_t study_rows = 48;

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const auto nl = text.find('\n', pos);
    out.push_back(text.substr(pos, nl - pos));
    pos = nl + 1;
  }
  return out;
}

std::string joined(const std::vector<std::string>& lines) {
  std::string s;
  for (const auto& l : lines) s += l + "\n";
  return s;
}

// A finished run directory of the study above, planned once; each test copies it.
const fs::path& planned() {
  static test::TempDir holder("dobudget_test_finished_run");
  static const fs::path dir = [] {
    const Study study = io::parse_study(study_text, holder.path() / "study.yaml");
    const std::string resolved = io::resolved_yaml(study);
    io::PlanOptions opt;
    opt.out = holder.path() / "run";
    opt.threads = 1;
    const io::PlanOutcome outcome = io::plan_study(study, resolved, opt);
    REQUIRE(outcome.complete);
    io::write_manifest(opt.out, study, resolved, opt, outcome);
    return opt.out;
  }();
  return dir;
}

struct Copy {
  test::TempDir tmp{"dobudget_test_finished_run_copy"};
  fs::path dir = tmp.path() / "run";
  Copy() { fs::copy(planned(), dir, fs::copy_options::recursive); }
  fs::path runs() const { return dir / "runs.csv"; }
  std::vector<std::string> lines() const { return lines_of(io::read_file(runs())); }
  void set_lines(const std::vector<std::string>& ls) const { io::write_file_atomically(runs(), joined(ls)); }
};

}  // namespace

TEST_CASE("finished run: a run directory as plan wrote it loads with its rows", "[io][finished_run]") {
  const io::FinishedRun run = io::load_finished_run(planned());
  CHECK(run.study.name == "finished-run-test");
  REQUIRE(run.rows.size() == study_rows);
  CHECK(io::runs_csv(run.rows) == io::read_file(planned() / "runs.csv"));
  CHECK(run.resolved_yaml == io::read_file(planned() / "study.resolved.yaml"));
}

TEST_CASE("finished run: a runs.csv cut short, header-only or with an extra row is refused at its line",
          "[io][finished_run]") {
  Copy c;
  const auto all = c.lines();
  REQUIRE(all.size() == study_rows + 1);

  c.set_lines({all.begin(), all.begin() + 14});  // the header and 13 rows
  auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.file == c.runs().string());
  CHECK(e.line == 15);
  CHECK_THAT(e.message, Catch::Contains("missing row") && Catch::Contains("ends after 13 of the study's 48 rows"));

  c.set_lines({all[0]});
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 2);
  CHECK_THAT(e.message, Catch::Contains("after 0 of the study's 48 rows"));

  auto extra = all;
  extra.push_back(all.back());
  c.set_lines(extra);
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == static_cast<int>(study_rows) + 2);
  CHECK_THAT(e.message, Catch::Contains("a row beyond the study's 48 rows"));
}

TEST_CASE("finished run: a repeated, missing or foreign row is refused naming its line and column",
          "[io][finished_run]") {
  Copy c;
  const auto all = c.lines();

  auto repeated = all;  // line 3 repeats line 2 in place of the study's row 2 (pilot 10, not 5)
  repeated[2] = repeated[1];
  c.set_lines(repeated);
  auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 3);
  CHECK(e.key == "pilot");
  CHECK_THAT(e.message, Catch::Contains("expected 10, got 5") && Catch::Contains("this row repeats line 2"));

  auto dropped = all;  // one row left out, the file otherwise whole
  dropped.erase(dropped.begin() + 20);
  c.set_lines(dropped);
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 21);

  // Keys the study does not have: scenario 1 (it has one scenario), draw 5, pilot budget 7.
  const std::vector<std::pair<std::string, std::string>> foreign{
      {"1,", "scenario"}, {"0,5,", "environment"}, {"", "pilot"}};
  for (const auto& [prefix, column] : foreign) {
    auto rows = all;
    std::string& line = rows[9];
    if (column == "pilot") {
      auto cells = line;
      // the sixth cell is the pilot budget
      std::size_t at = 0;
      for (int k = 0; k < 5; ++k) at = cells.find(',', at) + 1;
      line = cells.substr(0, at) + "7" + cells.substr(cells.find(',', at));
    } else {
      line = prefix + line.substr(line.find(',', column == "scenario" ? 0 : line.find(',') + 1) + 1);
    }
    INFO(line);
    c.set_lines(rows);
    e = error_of([&] { io::load_finished_run(c.dir); });
    CHECK(e.line == 10);
    CHECK(e.key == column);
  }
}

TEST_CASE("finished run: values out of range, or measures the study does not take, are refused",
          "[io][finished_run]") {
  Copy c;
  const auto all = c.lines();
  const auto with_cell = [&](std::size_t line_index, int cell, const std::string& value) {
    auto rows = all;
    std::string& line = rows[line_index];
    std::size_t begin = 0;
    for (int k = 0; k < cell; ++k) begin = line.find(',', begin) + 1;
    line = line.substr(0, begin) + value + line.substr(line.find(',', begin));
    c.set_lines(rows);
  };
  with_cell(13, 6, "-0.3");
  auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(std::string(e.what()) == c.runs().string() + ":14: model_kl: must be at least 0, got -0.3");

  with_cell(13, 6, "");  // the study measures model_kl
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 14);
  CHECK(e.key == "model_kl");
  with_cell(13, 7, "0.5");  // and not return_gap
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.key == "return_gap");
  with_cell(3, 10, "yes");
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 4);
  CHECK(e.key == "converged");
  with_cell(3, 9, "-2");
  CHECK(error_of([&] { io::load_finished_run(c.dir); }).key == "iterations");
}

TEST_CASE("finished run: a study.resolved.yaml edited after planning is refused", "[io][finished_run]") {
  Copy c;
  const fs::path resolved = c.dir / "study.resolved.yaml";
  const std::string original = io::read_file(resolved);
  std::string edited = original;
  edited.replace(edited.find("seed: 3"), 7, "seed: 4");
  io::write_file_atomically(resolved, edited);
  auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.file == resolved.string());
  CHECK_THAT(e.message, Catch::Contains("was edited after the run") && Catch::Contains(io::study_hash(original)) &&
                            Catch::Contains(io::study_hash(edited)));
  CHECK_THAT(e.message, Catch::Contains("manifest.json"));

  // Without manifest.json, the journal's header still records the study.
  fs::remove(c.dir / "manifest.json");
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK_THAT(e.message, Catch::Contains("units.journal records study hash " + io::study_hash(original)));

  // A manifest.json without study_hash is not dobudget's.
  io::write_file_atomically(resolved, original);
  io::write_file_atomically(c.dir / "manifest.json", "{\"program\": \"dobudget\"}\n");
  e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.key == "study_hash");
}

TEST_CASE("finished run: a runs.csv far larger than the study's rows is refused before it is read",
          "[io][finished_run]") {
  Copy c;
  std::ofstream(c.runs(), std::ios::binary | std::ios::app) << std::string(study_rows * 2048, 'x');
  const auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.line == 0);
  CHECK_THAT(e.message, Catch::Contains("far more than the study's 48 rows can fill"));
}

TEST_CASE("finished run: a directory where nothing records the planned study hash is refused, edited or not",
          "[io][finished_run]") {
  // The reproduced bug: with manifest.json and units.journal both gone, an edited study.resolved.yaml
  // was accepted (plan and merge always write manifest.json, so its absence is no excuse).
  Copy c;
  const fs::path resolved = c.dir / "study.resolved.yaml";
  std::string edited = io::read_file(resolved);
  edited.replace(edited.find("seed: 3"), 7, "seed: 4");
  fs::remove(c.dir / "manifest.json");
  fs::remove(c.dir / "units.journal");
  for (const bool edit : {false, true}) {
    if (edit) io::write_file_atomically(resolved, edited);
    const auto e = error_of([&] { io::load_finished_run(c.dir); });
    INFO(e.what());
    CHECK(e.file == c.dir.string());
    CHECK_THAT(e.message, Catch::StartsWith("has no manifest.json") &&
                              Catch::Contains("cannot be checked against the study that was planned") &&
                              Catch::Contains("rerun `dobudget plan`") && Catch::Contains("`dobudget merge`"));
  }
  // A journal without a header (format 1) records no hash either.
  io::write_file_atomically(c.dir / "units.journal", "");
  CHECK_THAT(error_of([&] { io::load_finished_run(c.dir); }).message, Catch::StartsWith("has no manifest.json"));
}

TEST_CASE("finished run: a timings.csv far larger than its rows is refused before it is read", "[io][finished_run]") {
  Copy c;
  const fs::path timings = c.dir / "timings.csv";
  std::ofstream(timings, std::ios::binary | std::ios::app) << std::string(study_rows * 2048, 'x');
  const auto e = error_of([&] { io::load_finished_run(c.dir); });
  CHECK(e.file == timings.string());
  CHECK(e.line == 0);
  CHECK_THAT(e.message, Catch::Contains("far more than the 48 rows of runs.csv beside it can fill"));
}

TEST_CASE("finished run: a symbolic link or a device in place of a run file is never followed to a device",
          "[io][finished_run]") {
  // Links are followed for reading (a link to a regular file is the file), but never to a device:
  // /dev/zero as runs.csv or timings.csv would be read without end.
  for (const char* name : {"runs.csv", "timings.csv", "manifest.json", "units.journal", "study.resolved.yaml"}) {
    Copy c;
    fs::remove(c.dir / name);
    fs::create_symlink("/dev/zero", c.dir / name);
    INFO(name);
    const auto e = error_of([&] { io::load_finished_run(c.dir); });
    CHECK(e.file == (c.dir / name).string());
    CHECK_THAT(e.message, Catch::StartsWith("is not a regular file but a device"));
  }
}
