// dobudget report: figures (gnuplot) and a report page from a finished run directory; see report.hpp.
#include "io/report.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <sstream>
#include <system_error>
#include <utility>

#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/child_process.hpp"
#include "io/finished_run.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

namespace fs = std::filesystem;

namespace {

constexpr const char* kCaution =
    "This is a simulation under stated assumptions (the synthetic family or the given model, the logging model, "
    "the pilot policy); it is no substitute for a qualified statistician, for ethics review, or for local "
    "regulations on trials.";

// ---- numbers and quoting --------------------------------------------------------------------------

std::string dat_number(double x) { return std::isfinite(x) ? fmt::format("{}", x) : std::string("NaN"); }

std::string text_number(double x) { return fmt::format("{}", x); }

std::string join(const std::vector<std::string>& items, std::string_view sep) {
  std::string s;
  for (std::size_t i = 0; i < items.size(); ++i) {
    if (i) s += sep;
    s += items[i];
  }
  return s;
}

template <class T, class F>
std::string join_map(const std::vector<T>& items, std::string_view sep, F f) {
  std::vector<std::string> v;
  for (const auto& x : items) v.push_back(f(x));
  return join(v, sep);
}

// ---- series: one (strategy, logged) line of a figure ---------------------------------------------

template <class Cell>
struct Series {
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  std::vector<Cell> cells;  // ascending pilot
};

template <class Cell>
std::vector<Series<Cell>> group_series(const std::vector<Cell>& cells) {
  std::vector<Series<Cell>> out;
  for (const auto& c : cells) {
    auto it = std::find_if(out.begin(), out.end(),
                           [&](const Series<Cell>& s) { return s.strategy == c.strategy && s.logged == c.logged; });
    if (it == out.end()) {
      out.push_back({c.strategy, c.logged, {}});
      it = std::prev(out.end());
    }
    it->cells.push_back(c);
  }
  for (auto& s : out)
    std::stable_sort(s.cells.begin(), s.cells.end(), [](const Cell& a, const Cell& b) { return a.pilot < b.pilot; });
  return out;
}

enum class Role { main, other, hidden };  // solid with band, dashed, not drawn

template <class Cell>
std::vector<Role> roles(const std::vector<Series<Cell>>& series) {
  std::map<Strategy, int> smallest, largest;
  for (const auto& s : series) {
    auto [lo, new_lo] = smallest.emplace(s.strategy, s.logged);
    if (!new_lo) lo->second = std::min(lo->second, s.logged);
    auto [hi, new_hi] = largest.emplace(s.strategy, s.logged);
    if (!new_hi) hi->second = std::max(hi->second, s.logged);
  }
  const bool has_pilot_only = smallest.count(Strategy::pilot_only) > 0;
  std::vector<Role> out;
  for (const auto& s : series) {
    if (s.strategy == Strategy::pilot_only) out.push_back(s.logged == smallest[s.strategy] ? Role::main : Role::hidden);
    else if (s.logged == largest[s.strategy]) out.push_back(Role::main);
    else if (s.logged == 0 && has_pilot_only) out.push_back(Role::hidden);
    else out.push_back(Role::other);
  }
  return out;
}

const char* colour(Strategy s) {  // Okabe-Ito palette (colour-blind safe) and a dark grey
  switch (s) {
    case Strategy::pilot_only: return "#505050";
    case Strategy::pooled: return "#D55E00";
    case Strategy::regime_aware: return "#0072B2";
  }
  return "#000000";
}

int point_type(Strategy s) {
  switch (s) {
    case Strategy::pilot_only: return 7;   // filled circle
    case Strategy::pooled: return 5;       // filled square
    case Strategy::regime_aware: return 9; // filled triangle
  }
  return 1;
}

template <class Cell>
std::string series_title(const Series<Cell>& s) {
  if (s.strategy == Strategy::pilot_only) return "pilot-only";
  return fmt::format("{}, {} logged", name(s.strategy), s.logged);
}

// ---- .dat files ----------------------------------------------------------------------------------

template <class Cell, class Line>
std::string blocks(const std::vector<Cell>& cells, Line line) {
  std::string s;
  const auto series = group_series(cells);
  for (std::size_t i = 0; i < series.size(); ++i) {
    if (i) s += "\n\n";
    s += fmt::format("# block {}: {}, logged {}\n", i, name(series[i].strategy), series[i].logged);
    for (const auto& c : series[i].cells) s += line(c) + "\n";
  }
  return s;
}

// The title comment of a .dat file: one line whatever the title holds (user text: printable_line).
std::string title_comment(std::string_view text) { return "# " + printable_line(text) + "\n"; }

// ---- gnuplot --------------------------------------------------------------------------------------

std::string terminal_line(const std::string& terminal, const std::string& output) {
  std::string t;
  if (terminal == "pngcairo") t = "set terminal pngcairo size 1000,620 font 'sans,11' noenhanced";
  else if (terminal == "png") t = "set terminal png size 1000,620 truecolor noenhanced";
  else if (terminal == "svg") t = "set terminal svg size 1000,620 dynamic font 'sans,11' noenhanced";
  else t = "set terminal " + terminal + " noenhanced";
  return t + "\nset output " + gnuplot_string(output) + "\n";
}

std::string image_extension(const std::string& terminal) {
  if (terminal == "svg") return ".svg";
  if (terminal == "pngcairo" || terminal == "png") return ".png";
  return "." + terminal;
}

template <class Cell>
std::string x_axis(const std::vector<Series<Cell>>& series) {
  std::vector<int> budgets;
  for (const auto& s : series)
    for (const auto& c : s.cells) budgets.push_back(c.pilot);
  std::sort(budgets.begin(), budgets.end());
  budgets.erase(std::unique(budgets.begin(), budgets.end()), budgets.end());
  std::string s = "set xlabel 'pilot episodes (log scale)'\nset logscale x\n";
  if (!budgets.empty()) {
    s += fmt::format("set xrange [{:.4g}:{:.4g}]\n", std::max(budgets.front(), 1) / 1.3, budgets.back() * 1.3);
    s += "set xtics (" + join_map(budgets, ", ", [](int b) { return fmt::format("'{}' {}", b, b); }) + ")\n";
  }
  return s;
}

struct FigureText {
  std::string base;   // file name without extension
  std::vector<std::string> title;  // its lines, user text as is (gnuplot_lines quotes them)
};

std::string header(const FigureText& f, const std::string& what) {
  return fmt::format(
      "# dobudget report: {}\n"
      "# Data: {}.dat (one block per strategy and logged budget: gnuplot `index`; see its header).\n"
      "# Redraw after editing, from this folder:  gnuplot {}.gp\n"
      "reset\n",
      what, f.base, f.base);
}

std::string common_style() {
  return "set grid xtics ytics mytics lc rgb '#d0d0d0' lw 1 dt 1\n"
         "set border lw 1.2\n"
         "set key outside right top vertical Left reverse spacing 1.3 samplen 3\n";
}

// The plot terms of the lines: dashed ones (other logged budgets) first so that the solid ones are
// drawn over them, then the solid ones; the dashed ones get their legend entries after the solid
// ones (through `NaN` terms, which draw nothing).
template <class Cell>
void line_parts(std::vector<std::string>& parts, const std::vector<Series<Cell>>& series, const std::vector<Role>& role,
                const char* columns) {
  constexpr const char* dashed = "with linespoints dt 2 lw 1.5 pt {} ps 0.8 lc rgb '{}'";
  constexpr const char* solid = "with linespoints lw 2.5 pt {} ps 1.2 lc rgb '{}'";
  for (std::size_t i = 0; i < series.size(); ++i)
    if (role[i] == Role::other)
      parts.push_back(fmt::format("data index {} using {} ", i, columns) +
                      fmt::format(fmt::runtime(dashed), point_type(series[i].strategy), colour(series[i].strategy)) +
                      " notitle");
  for (std::size_t i = 0; i < series.size(); ++i)
    if (role[i] == Role::main)
      parts.push_back(fmt::format("data index {} using {} ", i, columns) +
                      fmt::format(fmt::runtime(solid), point_type(series[i].strategy), colour(series[i].strategy)) +
                      " title " + gnuplot_string(series_title(series[i])));
  for (std::size_t i = 0; i < series.size(); ++i)
    if (role[i] == Role::other)
      parts.push_back("NaN " + fmt::format(fmt::runtime(dashed), point_type(series[i].strategy), colour(series[i].strategy)) +
                      " title " + gnuplot_string(series_title(series[i])));
}

std::string measure_script(const FigureText& f, const std::string& terminal, const std::string& image, Measure m,
                           const std::optional<double>& target, const std::vector<Series<CellSummary>>& series,
                           const std::vector<Role>& role) {
  std::string s = header(f, fmt::format("{} against pilot episodes", name(m)));
  s += terminal_line(terminal, image);
  s += "set title " + gnuplot_lines(f.title) + "\n";
  s += x_axis(series);
  if (m == Measure::model_kl) {
    s += "set ylabel 'model_kl (nats per observation, log scale)'\nset logscale y\nset format y '%g'\n";
  } else {
    s += "set ylabel 'return_gap (normalised: 0 = plans as well as the true model)'\n";
  }
  s += common_style();
  s += "set key title " + gnuplot_lines({"line: median over pairs", "band: 10% to 90% of pairs"}) + "\n";
  s += "set style fill transparent solid 0.15 noborder\n";
  s += "data = " + gnuplot_string(f.base + ".dat") + "\n";
  if (target) s += "target = " + text_number(*target) + "\n";
  s += "# columns: 1 strategy, 2 logged, 3 pilot, 4 count, 5 mean, 6 sd, 7 median, 8 q10, 9 q90\n";
  std::vector<std::string> parts;
  for (std::size_t i = 0; i < series.size(); ++i)  // bands first, so that every line is drawn over them
    if (role[i] == Role::main)
      parts.push_back(fmt::format("data index {} using 3:8:9 with filledcurves lc rgb '{}' notitle", i,
                                  colour(series[i].strategy)));
  line_parts(parts, series, role, "3:7");
  if (target)
    parts.push_back("target with lines dt 3 lw 2 lc rgb 'black' title sprintf('target %g', target)");
  s += "plot " + join(parts, ", \\\n     ") + "\n";
  s += "unset output\n";
  return s;
}

std::string success_script(const FigureText& f, const std::string& terminal, const std::string& image, Measure m,
                           double target, double assurance, const std::vector<Series<SuccessCell>>& series,
                           const std::vector<Role>& role) {
  std::string s = header(f, fmt::format("success fraction of {} against pilot episodes", name(m)));
  s += terminal_line(terminal, image);
  s += "set title " + gnuplot_lines(f.title) + "\n";
  s += x_axis(series);
  s += "target = " + text_number(target) + "\n";
  s += "assurance = " + text_number(assurance) + "\n";
  s += fmt::format("set ylabel sprintf('fraction of pairs with {} <= %g', target)\n", name(m));
  s += "set yrange [-0.03:1.03]\nset ytics 0.1\n";
  s += common_style();
  s += "set key title 'raw fraction per budget'\n";
  s += "data = " + gnuplot_string(f.base + ".dat") + "\n";
  s += "# columns: 1 strategy, 2 logged, 3 pilot, 4 pairs, 5 successes, 6 fraction\n";
  std::vector<std::string> parts;
  line_parts(parts, series, role, "3:6");
  parts.push_back("assurance with lines dt 3 lw 2 lc rgb 'black' title sprintf('assurance %g', assurance)");
  s += "plot " + join(parts, ", \\\n     ") + "\n";
  s += "unset output\n";
  return s;
}

// The last lines of a program's messages, each made printable (gnuplot echoes script lines, which
// can hold user text).
std::string tail(const std::string& text, std::size_t max_lines) {
  std::vector<std::string> lines;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line))
    if (!line.empty()) lines.push_back(printable_line(line));
  if (lines.size() > max_lines) lines.erase(lines.begin(), lines.end() - static_cast<std::ptrdiff_t>(max_lines));
  return join(lines, "\n");
}

// Runs gnuplot on `script` inside `folder` (no shell: child_process.hpp); throws std::runtime_error
// with gnuplot's messages.
void run_gnuplot(const fs::path& gnuplot, const fs::path& folder, const std::string& script, const std::string& image) {
  const ChildResult r = run_child(gnuplot, {script}, folder);
  if (!r.started || r.exit_code != 0) {
    const std::string why = !r.started          ? std::string("could not be started")
                            : r.exit_code >= 0 ? fmt::format("exited with status {}", r.exit_code)
                                               : std::string("was stopped by a signal");
    throw std::runtime_error(fmt::format("gnuplot ({}) {} on {}{}{}", gnuplot.string(), why, script,
                                         r.output.empty() ? "" : ":\n", tail(r.output, 12)));
  }
  std::error_code ec;
  if (!fs::exists(folder / image, ec) || fs::file_size(folder / image, ec) == 0)
    throw std::runtime_error(fmt::format("gnuplot ({}) made no image from {}{}{}", gnuplot.string(), script,
                                         r.output.empty() ? "" : ":\n", tail(r.output, 12)));
}

// ---- the page ------------------------------------------------------------------------------------

std::string list_text(const std::vector<int>& v) {
  return join_map(v, ", ", [](int x) { return std::to_string(x); });
}

// (key, value) rows of the settings table, for one scenario's settings.
std::vector<std::pair<std::string, std::string>> settings_rows(const ScenarioSettings& s,
                                                               const std::map<Measure, double>& targets,
                                                               double assurance) {
  std::vector<std::pair<std::string, std::string>> r;
  const auto& e = s.environment;
  if (e.given) {
    const auto& m = e.given->model;
    r.emplace_back("environment.model",
                   fmt::format("given model: {} states, {} actions, {} observations", m.states, m.actions, m.observations));
  } else if (e.records) {  // plausible worlds from the team's records (issue 9); the file name is user text
    const RecordsSettings& rs = *e.records;
    r.emplace_back("environment.data",
                   fmt::format("records {}: {} logged, {} pilot episodes (pilot ones count as already run)",
                               markdown_text(std::filesystem::path(rs.data).filename().string()), rs.logged_episodes,
                               rs.pilot_episodes));
    r.emplace_back("environment.latent_states",
                   rs.latent_states > 0 ? std::to_string(rs.latent_states) : fmt::format("auto (chose {})", rs.chosen_latent_states));
    r.emplace_back("environment.prior_concentration", text_number(rs.concentration));
    r.emplace_back("environment.actions", std::to_string(e.family.actions));
    r.emplace_back("environment.observations", std::to_string(e.family.observations));
  } else {
    r.emplace_back("environment.states", std::to_string(e.family.states));
    r.emplace_back("environment.actions", std::to_string(e.family.actions));
    r.emplace_back("environment.observations", std::to_string(e.family.observations));
    r.emplace_back("environment.dynamics_concentration", text_number(e.family.dynamics_concentration));
    r.emplace_back("environment.observation_noise", text_number(e.family.observation_noise));
  }
  r.emplace_back("environment.horizon", std::to_string(e.horizon));
  r.emplace_back("environment.discount", text_number(e.discount));
  r.emplace_back("environment.draws", std::to_string(e.draws));
  r.emplace_back("logging.privilege", text_number(s.logging.privilege));
  r.emplace_back("logging.temperature", text_number(s.logging.temperature));
  r.emplace_back("logging.q_discount", text_number(s.logging.q_discount));
  r.emplace_back("pilot.policy", "uniform");
  r.emplace_back("budgets.logged", list_text(s.logged_budgets));
  r.emplace_back("budgets.pilot", list_text(s.pilot_budgets));
  r.emplace_back("replicates", std::to_string(s.replicates));
  r.emplace_back("strategies", join_map(s.strategies, ", ", [](Strategy x) { return std::string(name(x)); }));
  r.emplace_back("measures", join_map(s.measures, ", ", [](Measure x) { return std::string(name(x)); }));
  r.emplace_back("fit.latent_states", std::to_string(s.fit.latent_states));
  r.emplace_back("fit.restarts", std::to_string(s.fit.restarts));
  r.emplace_back("fit.max_restarts", std::to_string(s.fit.max_restarts));
  r.emplace_back("fit.max_iterations", std::to_string(s.fit.max_iterations));
  r.emplace_back("fit.tolerance", text_number(s.fit.tolerance));
  r.emplace_back("fit.prior", text_number(s.fit.prior));
  r.emplace_back("evaluation.trajectories", std::to_string(s.evaluation.trajectories));
  if (std::find(s.measures.begin(), s.measures.end(), Measure::return_gap) != s.measures.end()) {
    r.emplace_back("planner.belief_points", std::to_string(s.planner.belief_points));
    r.emplace_back("planner.exact_histories", std::to_string(s.planner.exact_histories));
    r.emplace_back("planner.rollouts", std::to_string(s.planner.rollouts));
  }
  for (Measure m : s.measures) {
    const std::string key = "targets." + std::string(name(m));
    const auto t = targets.find(m);
    const auto st = s.targets.find(m);
    if (t == targets.end()) {
      r.emplace_back(key, "none (no success fraction, no answer)");
      continue;
    }
    std::string v = text_number(t->second);
    if (st == s.targets.end() || st->second != t->second)
      v += st == s.targets.end() ? " (given for this report; the study has none)"
                                 : fmt::format(" (given for this report; the study says {})", text_number(st->second));
    r.emplace_back(key, v);
  }
  std::string a = text_number(assurance);
  if (assurance != s.assurance) a += fmt::format(" (given for this report; the study says {})", text_number(s.assurance));
  r.emplace_back("assurance", a);
  return r;
}

// format_answer_md's tables, nested under the report's "## Answer": its title line and its caution
// (the report has its own) are left out and every heading goes one level down.
std::string answer_section(const std::string& answer_md) {
  std::string body = answer_md;
  if (body.rfind("# ", 0) == 0) {
    const auto nl = body.find('\n');
    body = nl == std::string::npos ? std::string() : body.substr(nl + 1);
  }
  if (const auto c = body.find("\n## Caution"); c != std::string::npos) body.erase(c + 1);
  std::string out;
  std::istringstream in(body);
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty() && line.front() == '#') line = "#" + line;
    out += line + "\n";
  }
  while (out.size() > 1 && out[out.size() - 1] == '\n' && out[out.size() - 2] == '\n') out.pop_back();
  return out;
}

// "Scenario 1: logging.privilege=0.9": as is (for the .dat comments, which flatten it), for the
// terminal, and for the page (the label is user text: printable_line / markdown_text).
std::string scenario_heading(const Scenario& sc) {
  return sc.label.empty() ? fmt::format("Scenario {}", sc.index) : fmt::format("Scenario {}: {}", sc.index, sc.label);
}
std::string scenario_heading_terminal(const Scenario& sc) { return printable_line(scenario_heading(sc)); }
std::string scenario_heading_md(const Scenario& sc) {
  return sc.label.empty() ? fmt::format("Scenario {}", sc.index)
                          : fmt::format("Scenario {}: {}", sc.index, markdown_text(sc.label));
}

struct TempFolder {
  fs::path path;
  bool keep = false;
  ~TempFolder() {
    if (keep || path.empty()) return;
    std::error_code ec;
    fs::remove_all(path, ec);
  }
};

template <class Cell, class Ok>
bool drawable(const std::vector<Series<Cell>>& series, const std::vector<Role>& role, Ok ok) {
  for (std::size_t i = 0; i < series.size(); ++i)
    if (role[i] != Role::hidden)
      for (const auto& c : series[i].cells)
        if (ok(c)) return true;
  return false;
}

}  // namespace

// ---- public pieces -------------------------------------------------------------------------------

std::string summary_dat(const std::vector<CellSummary>& cells, std::string_view title) {
  std::string s = title_comment(title);
  s += "# One block per strategy and logged budget (gnuplot: index 0, 1, ...), separated by two blank lines.\n"
       "# Statistics over (environment draw, replicate) pairs, as summarise() computes them (src/core/answer/summary.hpp):\n"
       "# count = pairs with a value, sd = sample standard deviation, quantiles of type 7 (Hyndman and Fan).\n"
       "# NaN: no value, or not finite (an infinite measure).\n"
       "# columns: strategy logged pilot count mean sd median q10 q90\n";
  s += blocks(cells, [](const CellSummary& c) {
    return fmt::format("{} {} {} {} {} {} {} {} {}", name(c.strategy), c.logged, c.pilot, c.count, dat_number(c.mean),
                       dat_number(c.sd), dat_number(c.median), dat_number(c.q10), dat_number(c.q90));
  });
  return s;
}

std::string success_dat(const std::vector<SuccessCell>& cells, std::string_view title) {
  std::string s = title_comment(title);
  s += "# One block per strategy and logged budget (gnuplot: index 0, 1, ...), separated by two blank lines.\n"
       "# Raw success fraction (src/core/answer/success_curve.hpp): of the pairs with a value, those at most the target;\n"
       "# the answer makes it non-decreasing in the budget before interpolating. NaN: no pair has a value.\n"
       "# columns: strategy logged pilot pairs successes fraction\n";
  s += blocks(cells, [](const SuccessCell& c) {
    return fmt::format("{} {} {} {} {} {}", name(c.strategy), c.logged, c.pilot, c.pairs, c.successes,
                       dat_number(c.fraction));
  });
  return s;
}

std::optional<fs::path> find_program(const std::string& program) {
  auto runnable = [](const fs::path& p) {
    std::error_code ec;
    return fs::is_regular_file(p, ec) && ::access(p.c_str(), X_OK) == 0;
  };
  if (program.empty()) return std::nullopt;
  if (program.find('/') != std::string::npos) {
    if (runnable(program)) return fs::absolute(program);
    return std::nullopt;
  }
  const char* path = std::getenv("PATH");
  const std::string dirs = path != nullptr ? path : "/usr/local/bin:/usr/bin:/bin";
  std::size_t start = 0;
  while (start <= dirs.size()) {
    const std::size_t end = std::min(dirs.find(':', start), dirs.size());
    const std::string d = dirs.substr(start, end - start);
    const fs::path candidate = fs::path(d.empty() ? "." : d) / program;
    if (runnable(candidate)) return fs::absolute(candidate);
    start = end + 1;
  }
  return std::nullopt;
}

std::vector<std::string> gnuplot_terminals(const fs::path& gnuplot) {
  std::vector<std::string> out;
  const ChildResult r = run_child(gnuplot, {"-e", "set print '-'; print GPVAL_TERMINALS"}, fs::current_path());
  if (!r.started || r.exit_code != 0) return out;
  std::istringstream in(r.output);
  std::string word;
  while (in >> word) out.push_back(word);
  return out;
}

std::string choose_terminal(const std::vector<std::string>& available) {
  for (const char* t : {"pngcairo", "png", "svg"})
    if (std::find(available.begin(), available.end(), t) != available.end()) return t;
  return {};
}

// ---- write_report --------------------------------------------------------------------------------

ReportOutcome write_report(const fs::path& run_dir, const ReportOptions& options) {
  const std::string dir_text = run_dir.string();
  std::error_code ec;
  if (!fs::exists(run_dir, ec)) throw ReportError(dir_text + " does not exist");
  if (!fs::is_directory(run_dir, ec)) throw ReportError(dir_text + " is not a directory (expected a dobudget run directory)");
  if (!fs::exists(run_dir / "study.resolved.yaml", ec))
    throw ReportError(dir_text + " is not a dobudget run directory (no study.resolved.yaml)");
  if (!fs::exists(run_dir / "runs.csv", ec))
    throw ReportError(dir_text +
                      " has no runs.csv yet: finish the run (run `dobudget plan` again on it to resume) or, for a "
                      "sharded run, merge the shards with `dobudget merge` first");

  // gnuplot and its terminal, before anything is computed or written.
  std::optional<fs::path> gnuplot;
  std::string terminal = options.terminal;
  if (options.render) {
    gnuplot = find_program(options.gnuplot);
    if (!gnuplot)
      throw ReportError(fmt::format(
          "gnuplot is needed to draw the figures and was not found ('{}'{}): install the Debian package gnuplot-nox "
          "(apt-get install gnuplot-nox), then run `dobudget report` again",
          options.gnuplot, options.gnuplot.find('/') == std::string::npos ? " on PATH" : ""));
    const auto available = gnuplot_terminals(*gnuplot);
    if (terminal.empty()) {
      terminal = choose_terminal(available);
      if (terminal.empty())
        throw ReportError(fmt::format(
            "gnuplot ({}) offers none of the terminals pngcairo, png or svg{}: install the Debian package gnuplot-nox",
            gnuplot->string(), available.empty() ? " (it did not answer)" : ""));
    } else if (std::find(available.begin(), available.end(), terminal) == available.end()) {
      throw ReportError(fmt::format("gnuplot ({}) has no terminal '{}'", gnuplot->string(), terminal));
    }
  } else if (terminal.empty()) {
    terminal = "pngcairo";
  }

  const FinishedRun run = load_finished_run(run_dir);  // study hash and every row checked (finished_run.hpp)
  const Study& study = run.study;
  const std::vector<RunRecord>& rows = run.rows;
  const std::vector<AnswerRow> answers = compute_study_answers(study, rows, options.overrides);
  std::vector<std::string> labels;
  for (const auto& sc : study.scenarios) labels.push_back(sc.label);

  // Every figure goes to a temporary folder beside report/, renamed into place at the end.
  TempFolder tmp;
  tmp.path = fs::absolute(run_dir) / (".report.tmp." + std::to_string(::getpid()));
  fs::remove_all(tmp.path);
  fs::create_directories(tmp.path);

  ReportOutcome outcome;
  outcome.dir = run_dir / "report";
  outcome.page = outcome.dir / "report.md";
  outcome.terminal = terminal;
  const std::string ext = image_extension(terminal);

  std::map<Measure, std::vector<CellSummary>> summaries;
  for (Measure m : all_measures) summaries[m] = summarise(rows, m);

  std::string figures_md;
  for (const auto& sc : study.scenarios) {
    const auto& set = sc.settings;
    const int pairs = set.environment.draws * set.replicates;
    const double assurance = options.overrides.assurance.value_or(set.assurance);
    figures_md += "\n### " + scenario_heading_md(sc) + "\n";
    for (Measure m : set.measures) {
      std::optional<double> target;
      if (auto t = options.overrides.targets.find(m); t != options.overrides.targets.end()) target = t->second;
      else if (auto u = set.targets.find(m); u != set.targets.end()) target = u->second;

      std::vector<CellSummary> cells;
      for (const auto& c : summaries[m])
        if (c.scenario == sc.index) cells.push_back(c);
      // The second title line holds user text: gnuplot_lines() quotes it (never between double quotes).
      const std::string title_line2 = sc.label.empty() ? fmt::format("study {}", study.name)
                                                       : fmt::format("study {}, scenario {}: {}", study.name, sc.index, sc.label);
      figures_md += fmt::format("\n#### `{}`\n", name(m));

      // The measure against pilot episodes.
      FigureText f{fmt::format("scenario-{}-{}", sc.index, name(m)),
                   {fmt::format("{} against pilot episodes", name(m)), title_line2}};
      const auto series = group_series(cells);
      const auto role = roles(series);
      const bool log_y = m == Measure::model_kl;
      const bool can_draw = drawable(series, role, [&](const CellSummary& c) {
        return std::isfinite(c.median) && (!log_y || c.median > 0.0);
      });
      write_file_atomically(tmp.path / (f.base + ".dat"),
                            summary_dat(cells, fmt::format("dobudget report data: {} over (environment draw, replicate) "
                                                           "pairs, study {}, {}",
                                                           name(m), study.name, scenario_heading(sc))));
      std::string larger;  // "pooled and regime-aware with 1000 logged episodes"
      {
        std::vector<std::string> parts;
        for (std::size_t i = 0; i < series.size(); ++i)
          if (role[i] == Role::main && series[i].strategy != Strategy::pilot_only)
            parts.push_back(fmt::format("{} with {} logged episodes", name(series[i].strategy), series[i].logged));
        larger = join(parts, ", ");
      }
      const bool any_dashed = std::find(role.begin(), role.end(), Role::other) != role.end();
      if (!can_draw) {
        const std::string why = fmt::format("{}, `{}`: no {}value to draw", scenario_heading_terminal(sc), name(m),
                                            log_y ? "positive finite " : "finite ");
        outcome.skipped.push_back(why);
        figures_md += fmt::format("\nNo figure for `{}`: no pair has a {}value of it in this scenario (data: [{}.dat]({}.dat)).\n",
                                  name(m), log_y ? "positive finite " : "finite ", f.base, f.base);
      } else {
        const std::string image = f.base + ext;
        write_file_atomically(tmp.path / (f.base + ".gp"),
                              measure_script(f, terminal, image, m, target, series, role));
        if (options.render) run_gnuplot(*gnuplot, tmp.path, f.base + ".gp", image);
        outcome.figures.push_back({sc.index, m, false, image, f.base + ".gp", f.base + ".dat", options.render});
        figures_md += fmt::format("\n![{} against pilot episodes, {}]({})\n\n", name(m), scenario_heading_md(sc), image);
        figures_md += fmt::format(
            "`{}` against pilot episodes: median over the {} (environment draw, replicate) pairs at each simulated "
            "budget (line), 10% to 90% of the pairs (shaded band){}{}. Solid lines: pilot-only{}{}.{} "
            "Data: [{}.dat]({}.dat), script: [{}.gp]({}.gp).\n",
            name(m), pairs, log_y ? ", log scale" : "",
            target ? fmt::format(", target {} (dotted black line)", text_number(*target)) : std::string(),
            larger.empty() ? "" : ", ", larger,
            any_dashed ? " Dashed lines: the other logged budgets (no band)." : "", f.base, f.base, f.base, f.base);
      }

      // The success fraction against pilot episodes.
      if (!target) {
        outcome.skipped.push_back(
            fmt::format("{}, `{}` success fraction: no target", scenario_heading_terminal(sc), name(m)));
        figures_md += fmt::format("\nNo success-fraction figure for `{}`: the study sets no target for it.\n", name(m));
        continue;
      }
      const auto success = success_curve(rows, sc.index, m, *target);
      FigureText g{fmt::format("scenario-{}-{}-success", sc.index, name(m)),
                   {fmt::format("fraction of pairs with {} <= {} against pilot episodes", name(m), text_number(*target)),
                    title_line2}};
      const auto sseries = group_series(success);
      const auto srole = roles(sseries);
      write_file_atomically(tmp.path / (g.base + ".dat"),
                            success_dat(success, fmt::format("dobudget report data: fraction of (environment draw, "
                                                             "replicate) pairs with {} <= {}, study {}, {}",
                                                             name(m), text_number(*target), study.name,
                                                             scenario_heading(sc))));
      if (!drawable(sseries, srole, [](const SuccessCell& c) { return std::isfinite(c.fraction); })) {
        outcome.skipped.push_back(
            fmt::format("{}, `{}` success fraction: no value", scenario_heading_terminal(sc), name(m)));
        figures_md += fmt::format("\nNo success-fraction figure for `{}`: no pair has a value of it in this scenario.\n",
                                  name(m));
        continue;
      }
      const std::string image = g.base + ext;
      write_file_atomically(tmp.path / (g.base + ".gp"),
                            success_script(g, terminal, image, m, *target, assurance, sseries, srole));
      if (options.render) run_gnuplot(*gnuplot, tmp.path, g.base + ".gp", image);
      outcome.figures.push_back({sc.index, m, true, image, g.base + ".gp", g.base + ".dat", options.render});
      figures_md += fmt::format("\n![fraction of pairs meeting the {} target, {}]({})\n\n", name(m),
                                scenario_heading_md(sc), image);
      figures_md += fmt::format(
          "Fraction of the pairs with `{}` at most {} at each simulated budget, as simulated (the answer makes it "
          "non-decreasing in the budget, then interpolates in log(budget) where it reaches the assurance); dotted "
          "black line: the assurance {}. Data: [{}.dat]({}.dat), script: [{}.gp]({}.gp).\n",
          name(m), text_number(*target), text_number(assurance), g.base, g.base, g.base, g.base);
    }
  }

  // ---- report.md. User text (the study name, the run directory's name, swept keys and values,
  // labels) goes in through markdown_text only, never inside a code span.
  const ScenarioSettings& first = study.scenarios.front().settings;
  std::string md = fmt::format("# Report: {}\n\n", markdown_text(study.name));
  fs::path shown = fs::absolute(run_dir).lexically_normal();
  if (shown.filename().empty()) shown = shown.parent_path();
  md += fmt::format(
      "Made by `dobudget report` (dobudget {}) from the run directory {} ({} run records), without simulating "
      "again. {}\n",
      DOBUDGET_VERSION, markdown_text(shown.filename().string()), rows.size(),
      options.overrides.targets.empty() && !options.overrides.assurance
          ? "Figures and tables use the study's targets and assurance."
          : "Targets or the assurance were given for this report (see [Settings](#settings)).");

  md += "\n## Study\n\n";
  md += fmt::format("Study {}, seed {}. ", markdown_text(study.name), study.seed);
  const auto& assignments0 = study.scenarios.front().assignments;
  if (study.scenarios.size() == 1 && assignments0.empty()) {
    md += "One scenario (no sweep).\n";
  } else {
    std::vector<std::string> keys;
    for (const auto& [k, v] : assignments0) keys.push_back(k);
    md += fmt::format("{} scenarios, the cartesian product of the swept values of {}:\n\n", study.scenarios.size(),
                      join_map(keys, ", ", [](const std::string& k) { return markdown_text(k); }));
    md += "| scenario |" + join_map(keys, "", [](const std::string& k) { return " " + markdown_text(k) + " |"; }) + "\n";
    md += "|---:|" + std::string() + join_map(keys, "", [](const std::string&) { return std::string("---|"); }) + "\n";
    for (const auto& sc : study.scenarios)
      md += fmt::format("| {} |", sc.index) +
            join_map(sc.assignments, "", [](const std::pair<std::string, std::string>& a) { return " " + markdown_text(a.second) + " |"; }) +
            "\n";
  }

  md += "\n## Answer\n";
  md += answer_section(format_answer_md(study.name, labels, answers));
  {
    const auto open = std::count_if(rows.begin(), rows.end(), [](const RunRecord& r) { return !r.confirmed; });
    md += fmt::format(
        "\nOf the {} run records, {} ({}) come from a fit whose best optimum no second EM start reached "
        "(`confirmed` 0 in runs.csv; fit settings `restarts` and `max_restarts`).\n",
        rows.size(), open,
        rows.empty() ? std::string("-")
                     : fmt::format("{:g}%", std::round(1000.0 * static_cast<double>(open) / static_cast<double>(rows.size())) / 10.0));
  }

  md += "\n## Figures\n\n";
  md += "For each scenario and measure: the measure against the pilot budget for each way of using the data, and "
        "the fraction of (environment draw, replicate) pairs that meet the target. Each figure's data (`.dat`) and "
        "gnuplot script (`.gp`) sit beside it in this folder: edit the script and run `gnuplot NAME.gp` here to "
        "restyle a figure. The `.dat` files are whitespace-separated columns with `#` comments (pandas: "
        "`read_csv(f, sep=r\"\\s+\", comment=\"#\", header=None)`).\n";
  if (!options.render)
    md += "\n**The figures were not drawn** (gnuplot was not run): run `gnuplot NAME.gp` in this folder for each "
          "script to draw them.\n";
  md += figures_md;

  md += "\n## Settings\n\n";
  md += "Every setting, with every default filled in: [study.resolved.yaml](../study.resolved.yaml). The main ones";
  md += study.scenarios.size() > 1 ? " (swept settings vary by scenario, see [Study](#study)):\n\n" : ":\n\n";
  {
    std::map<Measure, double> targets = first.targets;
    for (const auto& [m, t] : options.overrides.targets) targets[m] = t;
    const double assurance = options.overrides.assurance.value_or(first.assurance);
    md += "| setting | value |\n|---|---|\n";
    for (const auto& [key, value] : settings_rows(first, targets, assurance)) {
      const bool swept = std::any_of(assignments0.begin(), assignments0.end(),
                                     [&k = key](const auto& a) { return a.first == k; });  // clang 14: no capture of a structured binding
      // Keys and values here are the program's own text (setting names, numbers), not user text.
      md += fmt::format("| `{}` | {} |\n", key, swept ? std::string("swept (see [Study](#study))") : value);
    }
  }

  md += "\n## Caution\n\n";
  md += kCaution;
  md += "\n";
  write_file_atomically(tmp.path / "report.md", md);

  // Into place: an older report/ is moved aside, the new one renamed in, the old one removed.
  const fs::path final_dir = run_dir / "report";
  const fs::path old_dir = run_dir / (".report.old." + std::to_string(::getpid()));
  fs::remove_all(old_dir);
  const bool had_old = fs::exists(fs::symlink_status(final_dir));
  if (had_old) fs::rename(final_dir, old_dir);
  try {
    fs::rename(tmp.path, final_dir);
  } catch (...) {
    if (had_old) fs::rename(old_dir, final_dir, ec);
    throw;
  }
  tmp.keep = true;
  if (had_old) fs::remove_all(old_dir, ec);
  return outcome;
}

}  // namespace dobudget::io
