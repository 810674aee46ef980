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
#include "io/answer_table.hpp"
#include "io/base64.hpp"
#include "io/child_process.hpp"
#include "io/methods_text.hpp"
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
  if (have_gnuplot())
    CHECK(out.terminal == io::png_terminal(io::gnuplot_terminals(*io::find_program("gnuplot"))) + ", pdfcairo, svg");
  CHECK(out.skipped.empty());
  // 2 scenarios x 2 measures x (measure, success, needed by target, needed by logged).
  REQUIRE(out.figures.size() == 16);

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

      // The page shows every figure's PNG by relative path and links its PDF, SVG, data and script.
      for (const std::string& b : {base, base + "-success", base + "-needed-by-target", base + "-needed-by-logged"}) {
        INFO(b);
        CHECK(contains(md, "](" + b + ".png)"));
        CHECK(contains(md, "](" + b + ".pdf)"));
        CHECK(contains(md, "](" + b + ".svg)"));
        CHECK(contains(md, "](" + b + ".dat)"));
        CHECK(contains(md, "](" + b + ".gp)"));
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
  CHECK(contains(md, "\n## Methods\n"));
  CHECK(md.find("## Methods") < md.find("## Study"));  // at the top
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

TEST_CASE("report: every figure as PNG, PDF and SVG", "[report][formats]") {
  if (!have_gnuplot()) return;
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  const auto out = io::write_report(dir, options());
  REQUIRE(out.figures.size() == 16);
  for (const auto& f : out.figures) {
    INFO(f.image);
    REQUIRE(f.images.size() == 3);
    CHECK(f.images[0] == f.image);
    // File signatures: PNG (ISO/IEC 15948:2004, sec. 5.2: the 8-byte signature), PDF (ISO 32000-1:2008,
    // sec. 7.5.2: the header "%PDF-" followed by the version), SVG (W3C SVG 1.1, sec. 5.1: an <svg> root).
    CHECK(f.images[0] == f.script.substr(0, f.script.size() - 3) + ".png");
    CHECK(is_png(dir / "report" / f.images[0]));
    CHECK(fs::file_size(dir / "report" / f.images[0]) > 1000);
    CHECK(text_of(dir / "report" / f.images[1]).rfind("%PDF-", 0) == 0);
    CHECK(fs::file_size(dir / "report" / f.images[1]) > 1000);
    CHECK(f.images[2] == f.script.substr(0, f.script.size() - 3) + ".svg");
    CHECK(contains(text_of(dir / "report" / f.images[2]), "<svg"));
    CHECK(contains(text_of(dir / "report" / f.images[2]), "</svg>"));
  }
  // The shapes of the files, read by programs outside the project when they are installed:
  // file(1)'s magic database, and pdfinfo (poppler-utils) for one page.
  if (const auto file = io::find_program("file")) {
    const auto& f = out.figures.front();
    const auto r = io::run_child(*file, {"-b", f.images[0], f.images[1], f.images[2]}, dir / "report");
    REQUIRE(r.exit_code == 0);
    INFO(r.output);
    CHECK(contains(r.output, "PNG image data, 1000 x 620"));
    CHECK(contains(r.output, "PDF document"));
    CHECK(contains(r.output, "SVG"));
  }
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
    io::write_file_atomically(fake, "#!/bin/sh\nif [ \"$1\" = -e ]; then echo pngcairo pdfcairo png svg; exit 0; fi\n"
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
  REQUIRE(out.figures.size() == 16);
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
    if (f.kind == io::FigureKind::measure || f.kind == io::FigureKind::success) CHECK(data_lines(rep / f.data).size() == 27);
  }
  // A newline or CR in the title cannot end the comment line (pandas takes CR as a line break).
  const std::string dat = io::summary_dat({}, "study a\nb\rc");
  CHECK(dat.rfind("# study a b c\n# ", 0) == 0);
}

namespace {

// The answers the report computes (the study's targets unless overridden), for the checks below.
std::vector<AnswerRow> study_answers(const fs::path& dir, const AnswerOverrides& ov = {}) {
  const Study study = io::load_study(dir / "study.resolved.yaml");
  return compute_study_answers(study, io::read_runs(dir / "runs.csv"), ov);
}

// The row of `answers` for this scenario, measure, strategy and logged budget.
const AnswerRow& answer_of(const std::vector<AnswerRow>& answers, int scenario, Measure m, Strategy st, int logged) {
  for (const auto& a : answers)
    if (a.scenario == scenario && a.measure == m && a.strategy == st && a.logged == logged) return a;
  FAIL("no answer row");
  return answers.front();
}

}  // namespace

TEST_CASE("report: the methods paragraph holds the study's numbers and the caution; methods.txt the same text",
          "[report][methods]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  io::write_report(dir, options());
  const std::string txt = text_of(dir / "report" / "methods.txt");
  const std::string md = text_of(dir / "report" / "report.md");
  const auto answers = study_answers(dir);
  INFO(txt);
  // What was simulated (the study: 2 draws, 2 replicates, S 2 A 2 O 2, H 3; a sweep over the privilege).
  CHECK(contains(txt, "simulated 2 worlds (environment draws)"));
  CHECK(contains(txt, "2 replicates of the data in each world: 4 (world, replicate) pairs"));
  CHECK(contains(txt, "2 hidden states, 2 actions and 2 observations, horizon 3 steps"));
  CHECK(contains(txt, "swept logging.privilege over 0, 0.9: 2 scenarios"));
  CHECK(contains(txt, "with privilege swept over 0, 0.9 and temperature 0.2"));
  CHECK(contains(txt, "Pilot episodes chose actions uniformly at random"));
  CHECK(contains(txt, "Logged budgets: 0, 20, 40 episodes; pilot budgets: 5, 10, 20 episodes"));
  // Fitting and criterion.
  CHECK(contains(txt, "2 latent states"));  // fit.latent_states: by default the environment's states
  CHECK(contains(txt, "pseudo-count of 0.1"));
  CHECK(contains(txt, "from 1 to 10 starts of at most 20 iterations"));
  CHECK(contains(txt, "at most 0.05 in at least 80% of the pairs"));
  CHECK(contains(txt, "at most 0.3 in at least 80% of the pairs"));
  CHECK(contains(txt, "90% two-stage percentile bootstrap intervals (1000 resamples"));
  // The answer of every strategy at the largest logged budget, with its interval, in each scenario,
  // as answer.csv's rows give them (the tables' rounding: io::needed_text, io::interval_text).
  for (int sc = 0; sc < 2; ++sc)
    for (Measure m : {Measure::model_kl, Measure::return_gap})
      for (Strategy st : {Strategy::pooled, Strategy::regime_aware}) {
        const AnswerRow& a = answer_of(answers, sc, m, st, 40);
        const std::string expected = fmt::format("{} needs {}", name(st), io::needed_text(a));
        INFO(expected);
        CHECK(contains(txt, expected));
        if (a.status != AnswerStatus::unreachable) CHECK(contains(txt, "90% interval " + io::interval_text(a)));
      }
  CHECK(contains(txt, "in scenario 1 (logging.privilege=0.9), with 40 logged episodes"));
  CHECK(contains(txt, "Worst case over the scenarios"));
  CHECK(contains(txt, "pilot-only, which ignores the logged episodes, needs"));
  // The caution closes the text.
  CHECK(contains(txt, "\n" + std::string(io::methods_caution()) + "\n"));
  CHECK(contains(txt, "no substitute for a qualified statistician, for ethics review, or for the regulations"));
  // Plain text: one line per paragraph, a blank line between them; the same paragraphs in report.md
  // (escaped: markdown_text) under "## Methods".
  const Study study = io::load_study(dir / "study.resolved.yaml");
  const auto methods = io::methods_paragraphs({&study, &answers, 1000});
  CHECK(txt == io::methods_plain_text(methods));
  REQUIRE(methods.size() == 6);
  for (const auto& p : methods) CHECK(contains(md, "\n" + io::markdown_text(p) + "\n"));
  CHECK(contains(md, "](methods.txt)"));
}

TEST_CASE("report: pilot episodes needed against the target and the logged budget, from the stored rows",
          "[report][needed]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  // --target and --assurance as in `answer`: the figures centre on the given target.
  io::ReportOptions o = options();
  o.overrides.targets[Measure::model_kl] = 0.08;
  o.overrides.assurance = 0.75;
  const auto out = io::write_report(dir, o);
  const fs::path rep = dir / "report";
  const auto answers = study_answers(dir, o.overrides);
  const Study study = io::load_study(dir / "study.resolved.yaml");
  const auto rows = io::read_runs(dir / "runs.csv");
  for (int sc = 0; sc < 2; ++sc)
    for (Measure m : {Measure::model_kl, Measure::return_gap}) {
      const double target = m == Measure::model_kl ? 0.08 : 0.3;
      const std::string base = fmt::format("scenario-{}-{}", sc, name(m));
      INFO(base);
      // Against the logged budget: one block per strategy, one line per logged budget, the
      // answer rows at the report's target and assurance.
      const auto by_logged = data_lines(rep / (base + "-needed-by-logged.dat"));
      REQUIRE(by_logged.size() == 3 * 3);
      for (const auto& w : by_logged) {
        REQUIRE(w.size() == 10);
        const AnswerRow& a = answer_of(answers, sc, m, *parse_strategy(w[0]), std::stoi(w[1]));
        CHECK(a.assurance == 0.75);
        CHECK(same_number(w[2], target));
        if (std::isinf(a.needed_pilot)) CHECK(w[3] == "inf");
        else CHECK(same_number(w[3], a.needed_pilot));
        CHECK(w[6] == name(a.status));
      }
      // Against the target: 7 targets from 1/4 to 2 times the report's, each strategy at logged 40;
      // at 1 times, the very answer of the tables. Each point recomputed here by the answer code
      // with that target (compute_study_answers), from the same stored rows.
      const auto by_target = data_lines(rep / (base + "-needed-by-target.dat"));
      REQUIRE(by_target.size() == 3 * 7);
      for (const auto& w : by_target) {
        CHECK(w[1] == "40");
        const double t = std::strtod(w[2].c_str(), nullptr);
        AnswerOverrides ov = o.overrides;
        ov.targets[m] = t;
        const auto at_t = compute_study_answers(study, rows, ov);
        const AnswerRow& a = answer_of(at_t, sc, m, *parse_strategy(w[0]), 40);
        if (std::isinf(a.needed_pilot)) CHECK(w[3] == "inf");
        else CHECK(same_number(w[3], a.needed_pilot));
        CHECK(w[6] == name(a.status));
      }
      std::vector<double> targets;
      for (const auto& w : by_target) targets.push_back(std::strtod(w[2].c_str(), nullptr));
      CHECK(std::count(targets.begin(), targets.end(), target) == 3);  // the report's own target, exactly
      CHECK(*std::min_element(targets.begin(), targets.end()) == Approx(target / 4));
      CHECK(*std::max_element(targets.begin(), targets.end()) == Approx(target * 2));
      // The scripts: log scales, the report's target as the vertical line.
      const std::string gp = text_of(rep / (base + "-needed-by-target.gp"));
      CHECK(contains(gp, "set logscale x"));
      CHECK(contains(gp, "set logscale y"));
      CHECK(contains(gp, fmt::format("study_target = {}", target)));
      CHECK(contains(gp, "yerrorlines"));
      CHECK(contains(text_of(rep / (base + "-needed-by-logged.gp")), "set xlabel 'logged episodes'"));
    }
  (void)out;
}

TEST_CASE("report: report.html stands alone, embeds every figure and escapes a hostile name", "[report][html]") {
  TempDir tmp;
  const fs::path dir = copy_run(tmp.path() / "run");
  // (The study reader refuses bidirectional controls in names; html_text's own test covers them.)
  const std::string hostile = "<script>alert('x')</script> & \"Q\" dlrow <img src=http://e/x.png> ]]> &amp; \\";
  Study study = io::load_study(dir / "study.resolved.yaml");
  study.name = hostile;
  write_study_files(dir, study);
  const auto out = io::write_report(dir, options());
  const std::string html = text_of(dir / "report" / "report.html");
  // No external reference of any kind: nothing loaded from elsewhere, no stylesheet, no script.
  CHECK_FALSE(contains(html, "src=\"http"));
  CHECK_FALSE(contains(html, "src='http"));
  CHECK_FALSE(contains(html, "href=\"http"));
  CHECK_FALSE(contains(html, "<link"));
  CHECK_FALSE(contains(html, "<script"));
  CHECK_FALSE(contains(html, "url("));
  CHECK_FALSE(contains(html, "@import"));
  // The name only escaped (html_text: the bidi override replaced, & < > " ' as references).
  CHECK(contains(html, "<h1>Report: " + io::html_text(hostile) + "</h1>"));
  CHECK(contains(html, "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;Q&quot; dlrow &lt;img src=http://e/x.png&gt; ]]&gt; &amp;amp; \\"));
  CHECK_FALSE(contains(html, "<img src=http"));
  // Every figure embedded: its SVG, base64 in a data: URI.
  REQUIRE(out.figures.size() == 16);
  if (have_gnuplot())
    for (const auto& f : out.figures) {
      INFO(f.image);
      CHECK(contains(html, "src=\"data:image/svg+xml;base64," + io::base64(text_of(dir / "report" / f.images[2])) + "\""));
    }
  // The methods paragraphs and the caution are on the page.
  CHECK(contains(html, "<h2 id=\"methods\">Methods</h2>"));
  CHECK(contains(html, io::html_text(io::methods_caution())));
  // Read by an HTML parser outside the project (libxml2's, xmllint --html): one h1 holding the name as
  // written (after printable_line), no script, link, iframe or object element, one img per figure,
  // each src a data: URI.
  if (const auto xmllint = io::find_program("xmllint")) {
    auto xpath = [&](const std::string& expression) {
      const auto r = io::run_child(*xmllint, {"--html", "--xpath", expression, (dir / "report" / "report.html").string()},
                                   tmp.path());
      REQUIRE(r.started);
      // xmllint prints the result and a line feed
      return !r.output.empty() && r.output.back() == '\n' ? r.output.substr(0, r.output.size() - 1) : r.output;
    };
    CHECK(xpath("count(//h1)") == "1");
    CHECK(xpath("string(//h1)") == "Report: " + io::printable_line(hostile));
    CHECK(xpath("count(//script|//link|//iframe|//object|//embed|//base)") == "0");
    if (have_gnuplot()) {
      CHECK(xpath("count(//img)") == std::to_string(out.figures.size()));
      CHECK(xpath("count(//img[starts-with(@src, 'data:image/svg+xml;base64,')])") == std::to_string(out.figures.size()));
    }
    CHECK(xpath("count(//*[@href])") == "0");
  } else {
    WARN("xmllint is not installed (Debian: libxml2-utils): report.html is checked as text only");
  }
}
