// dobudget report: figures, data, scripts and the report page of a run directory, src/io/report.hpp.
// The run directory is made here: a small study (two scenarios, both measures) is run unit by unit
// through the core (run_unit) and written with the io library, as `dobudget plan` would.
// Without gnuplot the page, data and scripts are still checked (render = false) and a WARN says
// that the images were not.
#include <catch2/catch.hpp>

#include "temp_dir.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <tuple>
#include <vector>

#include <fmt/format.h>

#include "core/answer/success_curve.hpp"
#include "core/answer/summary.hpp"
#include "core/running/unit.hpp"
#include "io/atomic_file.hpp"
#include "io/child_process.hpp"
#include "io/report.hpp"
#include "io/run_directory.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"
#include "io/text_escape.hpp"

namespace fs = std::filesystem;
using namespace dobudget;

namespace {

using dobudget::test::TempDir;

const char* const study_text = R"(name: report-test
seed: 7
environment: { states: 2, actions: 2, observations: 2, horizon: 3, draws: 2, dynamics_concentration: 0.5, observation_noise: 0.2 }
budgets: { logged: [0, 20, 40], pilot: [5, 10, 20] }
replicates: 2
strategies: [pilot-only, pooled, regime-aware]
measures: [model_kl, return_gap]
fit: { restarts: 1, max_iterations: 20 }
evaluation: { trajectories: 50 }
planner: { belief_points: 20, rollouts: 50 }
targets: { model_kl: 0.05, return_gap: 0.3 }
sweep:
  logging.privilege: [0.0, 0.9]
)";

// study.resolved.yaml of `study` in run directory `d`, and the manifest.json that records its study
// hash (as plan writes them: a finished run is only trusted against that hash, finished_run.hpp).
void write_study_files(const fs::path& d, const Study& study) {
  const std::string resolved = io::resolved_yaml(study);
  io::write_file_atomically(d / "study.resolved.yaml", resolved);
  io::PlanOptions opt;
  opt.out = d;
  io::PlanOutcome outcome;
  outcome.units_total = outcome.units_done = enumerate_units(study).size();
  outcome.complete = true;
  io::write_manifest(d, study, resolved, opt, outcome);
}

// A finished run directory of the study above, made once; tests copy it.
const fs::path& run_directory() {
  static TempDir holder;
  static const fs::path dir = [] {
    const fs::path d = holder.path() / "run";
    fs::create_directories(d);
    const Study study = io::parse_study(study_text, holder.path() / "study.yaml");
    write_study_files(d, study);
    std::vector<RunRecord> rows;
    int last_scenario = -1, last_draw = -1;
    DrawContext context;
    for (const UnitId& u : enumerate_units(study)) {
      if (u.scenario != last_scenario || u.draw != last_draw) {
        context = make_draw_context(study, u.scenario, u.draw);
        last_scenario = u.scenario;
        last_draw = u.draw;
      }
      auto unit_rows = run_unit(study, u, context);
      rows.insert(rows.end(), unit_rows.begin(), unit_rows.end());
    }
    io::write_run_tables(d, rows);
    return d;
  }();
  return dir;
}

fs::path copy_run(const fs::path& to) {
  fs::copy(run_directory(), to, fs::copy_options::recursive);
  return to;
}

bool have_gnuplot() {
  static const bool have = [] {
    const bool found = io::find_program("gnuplot").has_value();
    if (!found) WARN("gnuplot is not installed (Debian: gnuplot-nox): the figures themselves are not checked");
    return found;
  }();
  return have;
}

io::ReportOptions options() {
  io::ReportOptions o;
  o.render = have_gnuplot();
  return o;
}

std::string text_of(const fs::path& p) { return io::read_file(p); }

bool contains(const std::string& hay, const std::string& needle) { return hay.find(needle) != std::string::npos; }

std::vector<std::vector<std::string>> data_lines(const fs::path& dat) {
  std::vector<std::vector<std::string>> out;
  std::istringstream in(text_of(dat));
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line.front() == '#') continue;
    std::istringstream words(line);
    std::vector<std::string> w;
    std::string x;
    while (words >> x) w.push_back(x);
    out.push_back(w);
  }
  return out;
}

// The .dat number as written: shortest round-trip, "NaN" for anything not finite.
bool same_number(const std::string& text, double expected) {
  if (!std::isfinite(expected)) return text == "NaN";
  return std::strtod(text.c_str(), nullptr) == expected;
}

bool is_png(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  char sig[8] = {};
  in.read(sig, 8);
  return in && std::string(sig, 8) == std::string("\x89PNG\r\n\x1a\n", 8);
}

bool leftovers(const fs::path& dir) {
  for (const auto& e : fs::directory_iterator(dir)) {
    const std::string n = e.path().filename().string();
    if (n.rfind(".report.", 0) == 0) return true;
  }
  return false;
}

}  // namespace

TEST_CASE("report: page, data, scripts and figures of a run directory", "[report]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  const auto out = io::write_report(dir, options());
  const fs::path rep = dir / "report";
  REQUIRE(fs::is_directory(rep));
  CHECK_FALSE(leftovers(dir));
  CHECK(out.page == rep / "report.md");
  if (have_gnuplot()) CHECK(out.terminal == io::choose_terminal(io::gnuplot_terminals(*io::find_program("gnuplot"))));
  CHECK(out.skipped.empty());
  // 2 scenarios x 2 measures x (measure, success).
  REQUIRE(out.figures.size() == 8);

  const Study study = io::load_study(dir / "study.resolved.yaml");
  const auto rows = io::read_runs(dir / "runs.csv");
  const std::string md = text_of(rep / "report.md");

  for (int sc = 0; sc < 2; ++sc) {
    for (Measure m : {Measure::model_kl, Measure::return_gap}) {
      const std::string base = "scenario-" + std::to_string(sc) + "-" + std::string(name(m));
      INFO(base);
      for (const std::string& f : {base + ".dat", base + ".gp", base + "-success.dat", base + "-success.gp"})
        CHECK(fs::is_regular_file(rep / f));

      // The .dat rows are summarise()'s cells of this scenario, in order.
      std::vector<CellSummary> cells;
      for (const auto& c : summarise(rows, m))
        if (c.scenario == sc) cells.push_back(c);
      REQUIRE(cells.size() == 3 * 3 * 3);  // strategies x logged x pilot
      const auto lines = data_lines(rep / (base + ".dat"));
      REQUIRE(lines.size() == cells.size());
      for (std::size_t i = 0; i < cells.size(); ++i) {
        const auto& c = cells[i];
        const auto& w = lines[i];
        REQUIRE(w.size() == 9);
        CHECK(w[0] == name(c.strategy));
        CHECK(w[1] == std::to_string(c.logged));
        CHECK(w[2] == std::to_string(c.pilot));
        CHECK(w[3] == std::to_string(c.count));
        CHECK(same_number(w[4], c.mean));
        CHECK(same_number(w[5], c.sd));
        CHECK(same_number(w[6], c.median));
        CHECK(same_number(w[7], c.q10));
        CHECK(same_number(w[8], c.q90));
      }
      // Blocks: one per (strategy, logged), separated by two blank lines (gnuplot `index`).
      CHECK(contains(text_of(rep / (base + ".dat")), "\n\n\n# block 8: regime-aware, logged 40\n"));

      // The success .dat rows are success_curve()'s cells at the study's target.
      const double target = study.scenarios[static_cast<std::size_t>(sc)].settings.targets.at(m);
      const auto success = success_curve(rows, sc, m, target);
      const auto slines = data_lines(rep / (base + "-success.dat"));
      REQUIRE(slines.size() == success.size());
      for (std::size_t i = 0; i < success.size(); ++i) {
        REQUIRE(slines[i].size() == 6);
        CHECK(slines[i][0] == name(success[i].strategy));
        CHECK(slines[i][2] == std::to_string(success[i].pilot));
        CHECK(slines[i][3] == std::to_string(success[i].pairs));
        CHECK(slines[i][4] == std::to_string(success[i].successes));
        CHECK(same_number(slines[i][5], success[i].fraction));
      }

      // Scripts: relative data and image names, the target / assurance line, log scales.
      const std::string gp = text_of(rep / (base + ".gp"));
      CHECK(contains(gp, "data = '" + base + ".dat'"));
      CHECK(contains(gp, "set logscale x"));
      CHECK(contains(gp, "set logscale y") == (m == Measure::model_kl));
      CHECK(contains(gp, fmt::format("target = {}", target)));
      CHECK(contains(gp, "filledcurves"));
      CHECK(contains(gp, "dt 2"));  // logged 20: dashed
      CHECK(contains(text_of(rep / (base + "-success.gp")), "assurance = 0.8"));

      // The page links both images by relative path, and their data and scripts.
      const std::string ext = out.terminal == "svg" ? ".svg" : ".png";
      CHECK(contains(md, "](" + base + ext + ")"));
      CHECK(contains(md, "](" + base + "-success" + ext + ")"));
      CHECK(contains(md, "](" + base + ".dat)"));
      CHECK(contains(md, "](" + base + ".gp)"));
      if (have_gnuplot()) {
        CHECK(fs::file_size(rep / (base + ext)) > 1000);
        CHECK(fs::file_size(rep / (base + "-success" + ext)) > 1000);
        if (ext == ".png") CHECK(is_png(rep / (base + ext)));
      }
    }
  }

  CHECK(contains(md, "# Report: report\\-test"));  // user text, escaped (markdown_text)
  CHECK(contains(md, "This is a simulation under stated assumptions (the synthetic family or the given model, the "
                     "logging model, the pilot policy); it is no substitute for a qualified statistician, for ethics "
                     "review, or for local regulations on trials."));
  CHECK(contains(md, "](../study.resolved.yaml)"));
  CHECK(contains(md, "| scenario | logging\\.privilege |"));
  CHECK(contains(md, "| 1 | 0\\.9 |"));
  CHECK(contains(md, "### Scenario 1: logging\\.privilege=0\\.9"));  // answer tables, one level down
  CHECK(contains(md, "#### model_kl at most 0.05 (assurance 80%)"));
  CHECK(contains(md, "| regime-aware | 40 |"));
  CHECK(contains(md, "| `logging.privilege` | swept"));
  CHECK(contains(md, "| `budgets.pilot` | 5, 10, 20 |"));
  CHECK_FALSE(contains(md, "\n# Pilot episodes needed"));  // format_answer_md's own title is left out
}

TEST_CASE("report: a second run replaces the report; scripts redraw from report/", "[report]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  io::write_report(dir, options());
  io::write_file_atomically(dir / "report" / "stale.txt", "from an older report");
  const auto out = io::write_report(dir, options());
  CHECK_FALSE(fs::exists(dir / "report" / "stale.txt"));
  CHECK_FALSE(leftovers(dir));
  if (!have_gnuplot()) return;
  // A user restyles a figure: run its script again from report/.
  const auto& f = out.figures.front();
  fs::remove(dir / "report" / f.image);
  REQUIRE(io::run_child(*io::find_program("gnuplot"), {f.script}, dir / "report").exit_code == 0);
  CHECK(fs::file_size(dir / "report" / f.image) > 1000);
}

TEST_CASE("report: paths with spaces, quotes and dollars are passed to gnuplot safely", "[report]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "it's a \"run\" $HOME `x`");
  const auto out = io::write_report(dir, options());
  CHECK(fs::is_regular_file(dir / "report" / "report.md"));
  if (have_gnuplot())
    for (const auto& f : out.figures) CHECK(fs::is_regular_file(dir / "report" / f.image));
}

TEST_CASE("report: the svg terminal when asked for", "[report]") {
  if (!have_gnuplot()) return;
  const auto terms = io::gnuplot_terminals(*io::find_program("gnuplot"));
  if (std::find(terms.begin(), terms.end(), "svg") == terms.end()) {
    WARN("this gnuplot has no svg terminal: not checked");
    return;
  }
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  io::ReportOptions o;
  o.terminal = "svg";
  const auto out = io::write_report(dir, o);
  CHECK(out.terminal == "svg");
  CHECK(fs::is_regular_file(dir / "report" / "scenario-0-model_kl.svg"));
  CHECK(contains(text_of(dir / "report" / "scenario-0-model_kl.svg"), "<svg"));
  CHECK(contains(text_of(dir / "report" / "report.md"), "](scenario-0-model_kl.svg)"));
}

TEST_CASE("report: terminal preference", "[report]") {
  CHECK(io::choose_terminal({"dumb", "svg", "png", "pngcairo"}) == "pngcairo");
  CHECK(io::choose_terminal({"svg", "png"}) == "png");
  CHECK(io::choose_terminal({"dumb", "svg"}) == "svg");
  CHECK(io::choose_terminal({"dumb"}).empty());
}

TEST_CASE("report: errors name the problem and leave no half-written report", "[report]") {
  TempDir tmp;
  auto message = [](const fs::path& dir, const io::ReportOptions& o) -> std::string {
    try {
      io::write_report(dir, o);
    } catch (const io::ReportError& e) {
      return e.what();
    }
    return "(no error)";
  };

  CHECK(contains(message(tmp.path() / "nowhere", options()), "does not exist"));

  fs::create_directories(tmp.path() / "empty");
  CHECK(contains(message(tmp.path() / "empty", options()), "not a dobudget run directory"));
  CHECK_FALSE(fs::exists(tmp.path() / "empty" / "report"));

  const fs::path unfinished = copy_run(tmp.path() / "unfinished");
  fs::remove(unfinished / "runs.csv");
  const std::string m = message(unfinished, options());
  CHECK(contains(m, "no runs.csv"));
  CHECK(contains(m, "finish the run"));
  CHECK(contains(m, "merge"));
  CHECK_FALSE(fs::exists(unfinished / "report"));

  const fs::path run = copy_run(tmp.path() / "run");
  io::ReportOptions no_gnuplot;
  no_gnuplot.gnuplot = (tmp.path() / "no-such-gnuplot").string();
  const std::string g = message(run, no_gnuplot);
  CHECK(contains(g, "gnuplot"));
  CHECK(contains(g, "gnuplot-nox"));
  CHECK_FALSE(fs::exists(run / "report"));
  CHECK_FALSE(leftovers(run));
  no_gnuplot.gnuplot = "dobudget-no-such-program";
  CHECK(contains(message(run, no_gnuplot), "on PATH"));

  // A failure after an earlier report leaves that report as it was.
  io::write_report(run, options());
  const std::string before = text_of(run / "report" / "report.md");
  no_gnuplot.gnuplot = (tmp.path() / "no-such-gnuplot").string();
  message(run, no_gnuplot);
  CHECK(text_of(run / "report" / "report.md") == before);
  if (have_gnuplot()) {
    // gnuplot failing midway (a script it rejects): an executable that fails after the terminal query.
    const fs::path fake = tmp.path() / "fake-gnuplot";
    io::write_file_atomically(fake, "#!/bin/sh\nif [ \"$1\" = -e ]; then echo pngcairo png svg; exit 0; fi\n"
                                    "echo 'line 1: simulated failure' >&2; exit 1\n");
    fs::permissions(fake, fs::perms::owner_all);
    io::ReportOptions o;
    o.gnuplot = fake.string();
    bool threw = false;
    try {
      io::write_report(run, o);
    } catch (const std::runtime_error& e) {
      threw = true;
      CHECK(contains(e.what(), "simulated failure"));
    }
    CHECK(threw);
    CHECK(text_of(run / "report" / "report.md") == before);
    CHECK_FALSE(leftovers(run));
  }
}

namespace {

bool any_file_named(const fs::path& root, const std::string& name) {
  std::error_code ec;
  for (auto it = fs::recursive_directory_iterator(root, ec); !ec && it != fs::recursive_directory_iterator(); it.increment(ec))
    if (it->path().filename() == name) return true;
  return false;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) out.push_back(line);
  return out;
}

}  // namespace

TEST_CASE("report: a hostile study name runs nothing and is shown only escaped", "[report]") {
  // The reproduced bug: a name with `backquotes` went into a double-quoted gnuplot title, and
  // gnuplot ran the command (it created PWNED); Markdown took line breaks, links and HTML raw.
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  // (The study reader refuses line breaks in names; summary_dat below and the answer.md test
  // check that one in a title stays on its line.)
  const std::string hostile = "x`touch PWNED`y @x 'q' \"d\" back\\slash line2](http://e)<script> a@b.com";
  Study study = io::load_study(dir / "study.resolved.yaml");
  study.name = hostile;
  write_study_files(dir, study);  // the study as planned: its manifest.json records its hash
  REQUIRE(io::load_study(dir / "study.resolved.yaml").name == hostile);
  const bool pwned_before = fs::exists(fs::current_path() / "PWNED");

  const auto out = io::write_report(dir, options());
  const fs::path rep = dir / "report";

  // Nothing ran: no PWNED in the run directory (gnuplot runs inside it) nor where the test runs.
  CHECK_FALSE(any_file_named(tmp.path(), "PWNED"));
  CHECK(fs::exists(fs::current_path() / "PWNED") == pwned_before);

  // The report renders: every figure is drawn.
  REQUIRE(out.figures.size() == 8);
  if (have_gnuplot())
    for (const auto& f : out.figures) {
      INFO(f.image);
      CHECK(fs::file_size(rep / f.image) > 1000);
    }

  // report.md: the name only escaped (markdown_text), the heading on one line; no link, no tag,
  // no raw backquote around the command.
  const std::string md = text_of(rep / "report.md");
  const std::string escaped =
      "x\\`touch PWNED\\`y @\xE2\x81\xA0x 'q' \"d\" back\\\\slash line2\\]\\(http\\://e\\)&lt;script&gt; a@\xE2\x81\xA0" "b\\.com";
  CHECK(md.rfind("# Report: " + escaped + "\n\nMade by `dobudget report`", 0) == 0);
  CHECK(contains(md, "Study " + escaped + ", seed 7."));
  CHECK_FALSE(contains(md, "](http://e)"));
  CHECK_FALSE(contains(md, "<script>"));
  CHECK_FALSE(contains(md, "`touch PWNED`"));
  // Rendered by a CommonMark (GFM) renderer when one is installed: one h1, no link to http://e, no
  // HTML tag from the name.
  if (io::find_program("cmark-gfm")) {
    const auto rendered = io::run_child(*io::find_program("cmark-gfm"),
                                        {"-e", "table", "-e", "autolink", "-e", "strikethrough", (rep / "report.md").string()},
                                        tmp.path());
    REQUIRE(rendered.exit_code == 0);
    const std::string html = rendered.output;
    CHECK_FALSE(contains(html, "<script"));
    CHECK_FALSE(contains(html, "href=\"http://e"));
    CHECK_FALSE(contains(html, "mailto:"));  // GFM e-mail autolinks (GFM 0.29, sec. 6.9)
    // The heading shows the name as written (with an invisible word joiner after each '@'),
    // HTML-escaped by the renderer.
    const std::string h1 = "<h1>Report: x`touch PWNED`y @\xE2\x81\xA0x 'q' &quot;d&quot; back\\slash line2](http://e)&lt;script&gt; a@\xE2\x81\xA0" "b.com</h1>\n";
    REQUIRE(html.find("<h1>") != std::string::npos);
    CHECK(html.find("<h1>", html.find("<h1>") + 1) == std::string::npos);
    CHECK(html.rfind(h1, 0) == 0);
  } else {
    WARN("cmark-gfm is not installed (Debian: cmark-gfm): report.md is checked as text only");
  }

  // The scripts: outside single quotes and comments, the only double-quoted strings are the
  // constants "\n" and "'"; the title is one command line holding the name in single-quoted pieces.
  for (const auto& f : out.figures) {
    INFO(f.script);
    for (const auto& line : lines_of(text_of(rep / f.script))) {
      INFO(line);
      bool quoted = false;
      for (std::size_t i = 0; i < line.size(); ++i) {
        if (quoted) {
          quoted = line[i] != '\'';
        } else if (line[i] == '\'') {
          quoted = true;
        } else if (line[i] == '#') {
          break;
        } else if (line[i] == '"') {
          const bool constant = line.compare(i, 4, "\"\\n\"") == 0 || line.compare(i, 3, "\"'\"") == 0;
          CHECK(constant);
          i += line.compare(i, 4, "\"\\n\"") == 0 ? 3 : 2;
        }
      }
      CHECK_FALSE(quoted);
    }
    bool title_seen = false;
    for (const auto& line : lines_of(text_of(rep / f.script)))
      if (line.rfind("set title ", 0) == 0) {
        title_seen = true;
        CHECK(contains(line, "'study x`touch PWNED`y @x '.\"'\".'q'.\"'\".' \"d\" back\\slash line2](http://e)<script>"));
      }
    CHECK(title_seen);
  }

  // The .dat files: the title comment is one line (the newline flattened); the data rows are intact.
  for (const auto& f : out.figures) {
    INFO(f.data);
    const auto lines = lines_of(text_of(rep / f.data));
    REQUIRE_FALSE(lines.empty());
    CHECK(lines[0].rfind("# dobudget report data:", 0) == 0);
    CHECK(contains(lines[0], "back\\slash line2](http://e)<script>"));
    for (const auto& line : lines) CHECK((line.empty() || line.front() == '#' || std::isalpha(static_cast<unsigned char>(line.front()))));
    CHECK(data_lines(rep / f.data).size() == 27);
  }
  // A newline or CR in the title cannot end the comment line (pandas takes CR as a line break).
  const std::string dat = io::summary_dat({}, "study a\nb\rc");
  CHECK(dat.rfind("# study a b c\n# ", 0) == 0);
}
