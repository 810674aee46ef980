// dobudget report: figures (gnuplot) and a report page from a finished run directory; see report.hpp.
#include "io/report.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <iterator>
#include <limits>
#include <map>
#include <sstream>
#include <system_error>
#include <tuple>
#include <utility>

#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/base64.hpp"
#include "io/child_process.hpp"
#include "io/finished_run.hpp"
#include "io/methods_text.hpp"
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

std::string terminal_command(const std::string& terminal) {
  if (terminal == "pngcairo") return "set terminal pngcairo size 1000,620 font 'sans,11' noenhanced";
  if (terminal == "png") return "set terminal png size 1000,620 truecolor noenhanced";
  if (terminal == "pdfcairo") return "set terminal pdfcairo size 8in,4.96in font 'sans,10' noenhanced";
  if (terminal == "svg") return "set terminal svg size 1000,620 dynamic font 'sans,11' noenhanced";
  return "set terminal " + terminal + " noenhanced";
}

// Every figure in three formats from one script: drawn into BASE.png (pngcairo, or gnuplot's
// libgd png without cairo), then drawn again with `replot` into BASE.pdf (pdfcairo) and BASE.svg.
std::string first_output(const std::string& png_terminal, const std::string& base) {
  return terminal_command(png_terminal) + "\nset output " + gnuplot_string(base + ".png") + "\n";
}

std::string other_outputs(const std::string& base) {
  std::string s = "unset output\n";
  for (const auto& [terminal, ext] : {std::pair<const char*, const char*>{"pdfcairo", ".pdf"}, {"svg", ".svg"}})
    s += terminal_command(terminal) + "\nset output " + gnuplot_string(base + ext) + "\nreplot\nunset output\n";
  return s;
}

std::vector<std::string> image_files(const std::string& base) { return {base + ".png", base + ".pdf", base + ".svg"}; }

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

std::string measure_script(const FigureText& f, const std::string& terminal, Measure m,
                           const std::optional<double>& target, const std::vector<Series<CellSummary>>& series,
                           const std::vector<Role>& role) {
  std::string s = header(f, fmt::format("{} against pilot episodes", name(m)));
  s += first_output(terminal, f.base);
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
  s += other_outputs(f.base);
  return s;
}

std::string success_script(const FigureText& f, const std::string& terminal, Measure m,
                           double target, double assurance, const std::vector<Series<SuccessCell>>& series,
                           const std::vector<Role>& role) {
  std::string s = header(f, fmt::format("success fraction of {} against pilot episodes", name(m)));
  s += first_output(terminal, f.base);
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
  s += other_outputs(f.base);
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

// Runs gnuplot on `scripts` inside `folder`, several scripts per run (gnuplot reads its file
// arguments in turn and stops at the first error; no shell: child_process.hpp); throws
// std::runtime_error with gnuplot's messages, or when an image is missing or empty afterwards.
// One gnuplot start per script cost about as much as drawing a figure (see DEVELOPERS.md,
// "Measurements"), hence the batches.
void run_gnuplot(const fs::path& gnuplot, const fs::path& folder, const std::vector<std::string>& scripts,
                 const std::vector<std::string>& images) {
  constexpr std::size_t batch = 64;
  for (std::size_t first = 0; first < scripts.size(); first += batch) {
    const std::vector<std::string> some(scripts.begin() + static_cast<std::ptrdiff_t>(first),
                                        scripts.begin() + static_cast<std::ptrdiff_t>(std::min(scripts.size(), first + batch)));
    const ChildResult r = run_child(gnuplot, some, folder);
    if (!r.started || r.exit_code != 0) {
      const std::string why = !r.started          ? std::string("could not be started")
                              : r.exit_code >= 0 ? fmt::format("exited with status {}", r.exit_code)
                                                 : std::string("was stopped by a signal");
      throw std::runtime_error(fmt::format("gnuplot ({}) {} on {}{}{}", gnuplot.string(), why,
                                           some.size() == 1 ? some.front() : some.front() + " ... " + some.back(),
                                           r.output.empty() ? "" : ":\n", tail(r.output, 12)));
    }
  }
  std::error_code ec;
  for (const auto& image : images)
    if (!fs::exists(folder / image, ec) || fs::file_size(folder / image, ec) == 0)
      throw std::runtime_error(fmt::format("gnuplot ({}) made no image {}", gnuplot.string(), image));
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

// ---- needed pilot episodes against the target and against the logged budget ------------------------

// The targets of the figure of needed pilot episodes against the target, as multiples of the
// study's: stricter ones first (what a stricter target costs), then looser ones.
constexpr double kTargetFactors[] = {0.25, 1.0 / 3.0, 0.5, 2.0 / 3.0, 1.0, 1.5, 2.0};

enum class NeededAxis { target, logged };

struct NeededScale {
  double low = 1.0;
  double high = 10.0;
};

// The y range (log scale) holding every finite positive need and interval end and the simulated
// pilot budgets, with a margin.
NeededScale needed_scale(const std::vector<AnswerRow>& rows, const std::vector<int>& pilot_budgets) {
  double lo = std::numeric_limits<double>::infinity(), hi = 0.0;
  auto take = [&](double x) {
    if (std::isfinite(x) && x > 0.0) {
      lo = std::min(lo, x);
      hi = std::max(hi, x);
    }
  };
  for (const auto& r : rows) {
    take(r.needed_pilot);
    take(r.low);
    take(r.high);
  }
  for (int b : pilot_budgets) take(b);
  if (!(hi > 0.0)) return {};
  return {std::max(lo / 1.8, 0.5), hi * 1.8};
}

// A value for the figure: inside the y range (an infinite upper end or a lower end of 0 drawn at
// the edge), NaN (not drawn) for an unknown one.
double clipped(double x, const NeededScale& y) { return std::isnan(x) ? x : std::clamp(x, y.low, y.high); }

// Rows per strategy (in the study's order), each series sorted along the x axis.
std::vector<std::vector<AnswerRow>> needed_series(const std::vector<AnswerRow>& rows, const std::vector<Strategy>& order,
                                                  NeededAxis axis) {
  std::vector<std::vector<AnswerRow>> out;
  for (Strategy st : order) {
    std::vector<AnswerRow> s;
    for (const auto& r : rows)
      if (r.strategy == st) s.push_back(r);
    if (s.empty()) continue;
    std::stable_sort(s.begin(), s.end(), [axis](const AnswerRow& a, const AnswerRow& b) {
      return axis == NeededAxis::target ? a.target < b.target : a.logged < b.logged;
    });
    out.push_back(std::move(s));
  }
  return out;
}

std::string needed_dat(const std::vector<std::vector<AnswerRow>>& series, const NeededScale& y, std::string_view title) {
  std::string s = title_comment(title);
  s += "# One block per strategy (gnuplot: index 0, 1, ...), separated by two blank lines.\n"
       "# needed, low, high: the answer (src/core/answer/answer.hpp; answer.csv's needed_pilot, low, high): inf: the\n"
       "# target cannot be reached; NaN: unknown (not-reached) or no interval. plot_*: what the figure draws: inf and\n"
       "# values outside the figure at its edge, NaN where there is no finite need.\n"
       "# columns: strategy logged target needed low high status plot_needed plot_low plot_high\n";
  for (std::size_t i = 0; i < series.size(); ++i) {
    if (i) s += "\n\n";
    s += fmt::format("# block {}: {}\n", i, name(series[i].front().strategy));
    for (const auto& r : series[i]) {
      const bool finite = std::isfinite(r.needed_pilot);
      const double n = finite ? clipped(r.needed_pilot, y) : std::numeric_limits<double>::quiet_NaN();
      const double lo = !finite ? n : std::isnan(r.low) ? n : clipped(r.low, y);
      const double hi = !finite ? n : std::isnan(r.high) ? n : clipped(r.high, y);
      s += fmt::format("{} {} {} {} {} {} {} {} {} {}\n", name(r.strategy), r.logged, dat_number(r.target),
                       r.needed_pilot == std::numeric_limits<double>::infinity() ? std::string("inf") : dat_number(r.needed_pilot),
                       r.low == std::numeric_limits<double>::infinity() ? std::string("inf") : dat_number(r.low),
                       r.high == std::numeric_limits<double>::infinity() ? std::string("inf") : dat_number(r.high),
                       name(r.status), dat_number(n), dat_number(lo), dat_number(hi));
    }
  }
  return s;
}

bool any_finite_need(const std::vector<AnswerRow>& rows) {
  return std::any_of(rows.begin(), rows.end(), [](const AnswerRow& r) { return std::isfinite(r.needed_pilot); });
}

std::string needed_script(const FigureText& f, const std::string& terminal, Measure m, NeededAxis axis,
                          const std::vector<std::vector<AnswerRow>>& series, const NeededScale& y, double study_target,
                          int largest_pilot, double interval) {
  std::string s = header(f, axis == NeededAxis::target ? fmt::format("pilot episodes needed against the {} target", name(m))
                                                       : "pilot episodes needed against the logged budget");
  s += first_output(terminal, f.base);
  s += "set title " + gnuplot_lines(f.title) + "\n";
  std::vector<double> xs;
  for (const auto& sr : series)
    for (const auto& r : sr) xs.push_back(axis == NeededAxis::target ? r.target : r.logged);
  std::sort(xs.begin(), xs.end());
  xs.erase(std::unique(xs.begin(), xs.end()), xs.end());
  const double x_max = xs.empty() ? 1.0 : xs.back();
  if (axis == NeededAxis::target) {
    s += fmt::format("set xlabel 'target: {} at most (log scale)'\nset logscale x\n", name(m));
    if (!xs.empty()) s += fmt::format("set xrange [{:.6g}:{:.6g}]\n", xs.front() / 1.25, xs.back() * 1.25);
    s += "set xtics (" + join_map(xs, ", ", [](double x) { return fmt::format("'{:g}' {}", x, x); }) + ")\n";
    s += fmt::format("study_target = {}\n", text_number(study_target));
    s += "set arrow 1 from study_target, graph 0 to study_target, graph 1 nohead dt 3 lw 2 lc rgb 'black'\n";
  } else {
    s += "set xlabel 'logged episodes'\n";
    const double span = std::max(x_max, 1.0);
    s += fmt::format("set xrange [{:.6g}:{:.6g}]\n", -0.06 * span, x_max + 0.06 * span);
    s += "set xtics (" + join_map(xs, ", ", [](double x) { return fmt::format("'{:g}' {}", x, x); }) + ")\n";
  }
  s += fmt::format("set ylabel 'pilot episodes needed (log scale)'\nset logscale y\nset yrange [{:.6g}:{:.6g}]\nset format y '%g'\n",
                   y.low, y.high);
  s += common_style();
  s += "set key title " + gnuplot_lines({"point: pilot episodes needed", fmt::format("bar: {:g}% interval", interval * 100.0)}) + "\n";
  s += "data = " + gnuplot_string(f.base + ".dat") + "\n";
  s += fmt::format("largest = {}\n", largest_pilot);
  s += "# columns: 1 strategy, 2 logged, 3 target, 4 needed, 5 low, 6 high, 7 status, 8 plot_needed, 9 plot_low, 10 plot_high\n";
  std::vector<std::string> parts;
  const double n = static_cast<double>(series.size());
  for (std::size_t i = 0; i < series.size(); ++i) {
    // Strategies side by side at the same x, so that their bars do not hide each other.
    const double shift = static_cast<double>(i) - (n - 1.0) / 2.0;
    const std::string x = axis == NeededAxis::target
                              ? fmt::format("($3*{:.6g})", std::exp(0.03 * shift))
                              : fmt::format("($2+{:.6g})", 0.012 * std::max(x_max, 1.0) * shift);
    const Strategy st = series[i].front().strategy;
    const std::string title = axis == NeededAxis::target && st != Strategy::pilot_only
                                  ? fmt::format("{}, {} logged", name(st), series[i].front().logged)
                                  : std::string(name(st));
    parts.push_back(fmt::format("data index {} using {}:8:9:10 with yerrorlines lw 2.5 pt {} ps 1.2 lc rgb '{}' title {}",
                                i, x, point_type(st), colour(st), gnuplot_string(title)));
  }
  parts.push_back("largest with lines dt 3 lw 1.5 lc rgb '#808080' title sprintf('largest simulated pilot budget (%g)', largest)");
  s += "plot " + join(parts, ", \\\n     ") + "\n";
  s += other_outputs(f.base);
  return s;
}

// ---- report.html ----------------------------------------------------------------------------------

// Every text goes through html_text (user text and the program's own alike).
std::string html_table(const std::vector<std::string>& head, const std::vector<std::vector<std::string>>& rows,
                       const std::vector<bool>& right) {
  std::string s = "<table>\n<thead><tr>";
  for (std::size_t i = 0; i < head.size(); ++i)
    s += std::string(i < right.size() && right[i] ? "<th class=\"num\">" : "<th>") + html_text(head[i]) + "</th>";
  s += "</tr></thead>\n<tbody>\n";
  for (const auto& row : rows) {
    s += "<tr>";
    for (std::size_t i = 0; i < row.size(); ++i)
      s += std::string(i < right.size() && right[i] ? "<td class=\"num\">" : "<td>") + html_text(row[i]) + "</td>";
    s += "</tr>\n";
  }
  return s + "</tbody>\n</table>\n";
}

constexpr const char* kHtmlStyle =
    "body{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;line-height:1.45;color:#222}"
    "table{border-collapse:collapse;margin:0.8em 0}th,td{border:1px solid #ccc;padding:0.25em 0.6em}"
    "th{background:#f3f3f3}td.num,th.num{text-align:right}div.figure{margin:1.5em 0}img{max-width:100%;height:auto}"
    "p.caption{font-size:0.92em;color:#444}.caution{border-left:4px solid #D55E00;padding:0.3em 1em;background:#fff6f0}"
    "p.methods{text-align:justify}";

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

std::string png_terminal(const std::vector<std::string>& available) {
  for (const char* t : {"pngcairo", "png"})
    if (std::find(available.begin(), available.end(), t) != available.end()) return t;
  return {};
}

std::vector<std::string> missing_terminals(const std::vector<std::string>& available) {
  auto has = [&](const char* t) { return std::find(available.begin(), available.end(), t) != available.end(); };
  std::vector<std::string> missing;
  if (!has("pngcairo") && !has("png")) missing.push_back("pngcairo");
  if (!has("pdfcairo")) missing.push_back("pdfcairo");
  if (!has("svg")) missing.push_back("svg");
  return missing;
}

// ---- write_report --------------------------------------------------------------------------------

namespace {

// A figure of the page: what the Markdown and HTML pages say about it (plain text; alt holds user
// text and is escaped by each page).
struct PageFigure {
  std::string base;
  std::string alt;
  std::string caption;
};

}  // namespace

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

  // gnuplot and its terminals, before anything is computed or written.
  std::optional<fs::path> gnuplot;
  std::string terminal = "pngcairo";  // for PNG; PDF and SVG always pdfcairo and svg
  if (options.render) {
    gnuplot = find_program(options.gnuplot);
    if (!gnuplot)
      throw ReportError(fmt::format(
          "gnuplot is needed to draw the figures and was not found ('{}'{}): install the Debian package gnuplot-nox "
          "(apt-get install gnuplot-nox), then run `dobudget report` again",
          options.gnuplot, options.gnuplot.find('/') == std::string::npos ? " on PATH" : ""));
    const auto available = gnuplot_terminals(*gnuplot);
    const auto missing = missing_terminals(available);
    if (!missing.empty())
      throw ReportError(fmt::format(
          "gnuplot ({}) has no terminal {}{}, needed for the PNG, PDF and SVG figures: install the Debian package "
          "gnuplot-nox (its Debian 12 build has pngcairo, pdfcairo and svg)",
          gnuplot->string(), join(missing, ", "), available.empty() ? " (it did not answer)" : ""));
    terminal = png_terminal(available);
  }

  const FinishedRun run = load_finished_run(run_dir);  // study hash and every row checked (finished_run.hpp)
  const Study& study = run.study;
  const std::vector<RunRecord>& rows = run.rows;
  const std::vector<AnswerRow> answers = compute_study_answers(study, rows, options.overrides);
  std::vector<std::string> labels;
  for (const auto& sc : study.scenarios) labels.push_back(sc.label);
  const int bootstrap = options.overrides.bootstrap.value_or(AnswerQuery{}.bootstrap);

  // Every figure goes to a temporary folder beside report/, renamed into place at the end.
  TempFolder tmp;
  tmp.path = fs::absolute(run_dir) / (".report.tmp." + std::to_string(::getpid()));
  fs::remove_all(tmp.path);
  fs::create_directories(tmp.path);

  ReportOutcome outcome;
  outcome.dir = run_dir / "report";
  outcome.page = outcome.dir / "report.md";
  outcome.terminal = terminal + ", pdfcairo, svg";

  std::map<Measure, std::vector<CellSummary>> summaries;
  for (Measure m : all_measures) summaries[m] = summarise(rows, m);

  std::string figures_md;
  std::vector<std::string> scripts, images;
  std::vector<std::pair<int, std::vector<PageFigure>>> page_figures;  // per scenario
  std::vector<std::string> page_notes;                                 // figures left out, per scenario (html)
  auto add_figure = [&](int scenario, Measure m, FigureKind kind, const std::string& base, std::string alt,
                        std::string caption) {
    ReportFigure fig;
    fig.scenario = scenario;
    fig.measure = m;
    fig.kind = kind;
    fig.success = kind == FigureKind::success;
    fig.image = base + ".png";
    fig.images = image_files(base);
    fig.script = base + ".gp";
    fig.data = base + ".dat";
    fig.rendered = options.render;
    outcome.figures.push_back(fig);
    scripts.push_back(fig.script);
    images.insert(images.end(), fig.images.begin(), fig.images.end());
    page_figures.back().second.push_back({base, std::move(alt), std::move(caption)});
  };
  auto links_md = [](const std::string& base) {
    return fmt::format("Also as [PDF]({}.pdf) and [SVG]({}.svg). Data: [{}.dat]({}.dat), script: [{}.gp]({}.gp).", base,
                       base, base, base, base, base);
  };

  for (const auto& sc : study.scenarios) {
    const auto& set = sc.settings;
    const int pairs = set.environment.draws * set.replicates;
    const double assurance = options.overrides.assurance.value_or(set.assurance);
    page_figures.push_back({sc.index, {}});
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
        page_notes.push_back(why);
        figures_md += fmt::format("\nNo figure for `{}`: no pair has a {}value of it in this scenario (data: [{}.dat]({}.dat)).\n",
                                  name(m), log_y ? "positive finite " : "finite ", f.base, f.base);
      } else {
        write_file_atomically(tmp.path / (f.base + ".gp"), measure_script(f, terminal, m, target, series, role));
        const std::string caption = fmt::format(
            "{} against pilot episodes: median over the {} (environment draw, replicate) pairs at each simulated "
            "budget (line), 10% to 90% of the pairs (shaded band){}{}. Solid lines: pilot-only{}{}.{}",
            name(m), pairs, log_y ? ", log scale" : "",
            target ? fmt::format(", target {} (dotted black line)", text_number(*target)) : std::string(),
            larger.empty() ? "" : ", ", larger, any_dashed ? " Dashed lines: the other logged budgets (no band)." : "");
        add_figure(sc.index, m, FigureKind::measure, f.base,
                   fmt::format("{} against pilot episodes, {}", name(m), scenario_heading(sc)), caption);
        figures_md += fmt::format("\n![{} against pilot episodes, {}]({}.png)\n\n", name(m), scenario_heading_md(sc), f.base);
        figures_md += fmt::format(
            "`{}` against pilot episodes: median over the {} (environment draw, replicate) pairs at each simulated "
            "budget (line), 10% to 90% of the pairs (shaded band){}{}. Solid lines: pilot-only{}{}.{} {}\n",
            name(m), pairs, log_y ? ", log scale" : "",
            target ? fmt::format(", target {} (dotted black line)", text_number(*target)) : std::string(),
            larger.empty() ? "" : ", ", larger,
            any_dashed ? " Dashed lines: the other logged budgets (no band)." : "", links_md(f.base));
      }

      // The success fraction against pilot episodes.
      if (!target) {
        const std::string why =
            fmt::format("{}, `{}` success fraction and pilot episodes needed: no target", scenario_heading_terminal(sc), name(m));
        outcome.skipped.push_back(why);
        page_notes.push_back(why);
        figures_md += fmt::format(
            "\nNo success-fraction figure and no figures of the pilot episodes needed for `{}`: the study sets no target "
            "for it.\n",
            name(m));
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
        const std::string why = fmt::format("{}, `{}` success fraction: no value", scenario_heading_terminal(sc), name(m));
        outcome.skipped.push_back(why);
        page_notes.push_back(why);
        figures_md += fmt::format("\nNo success-fraction figure for `{}`: no pair has a value of it in this scenario.\n",
                                  name(m));
      } else {
        write_file_atomically(tmp.path / (g.base + ".gp"),
                              success_script(g, terminal, m, *target, assurance, sseries, srole));
        const std::string caption = fmt::format(
            "Fraction of the pairs with {} at most {} at each simulated budget, as simulated (the answer makes it "
            "non-decreasing in the budget, then interpolates in log(budget) where it reaches the assurance); dotted "
            "black line: the assurance {}.",
            name(m), text_number(*target), text_number(assurance));
        add_figure(sc.index, m, FigureKind::success, g.base,
                   fmt::format("fraction of pairs meeting the {} target, {}", name(m), scenario_heading(sc)), caption);
        figures_md += fmt::format("\n![fraction of pairs meeting the {} target, {}]({}.png)\n\n", name(m),
                                  scenario_heading_md(sc), g.base);
        figures_md += fmt::format(
            "Fraction of the pairs with `{}` at most {} at each simulated budget, as simulated (the answer makes it "
            "non-decreasing in the budget, then interpolates in log(budget) where it reaches the assurance); dotted "
            "black line: the assurance {}. {}\n",
            name(m), text_number(*target), text_number(assurance), links_md(g.base));
      }

      // Pilot episodes needed against the target: the answer code on the stored rows at targets
      // around this one (kTargetFactors), each strategy at its largest logged budget.
      std::vector<AnswerRow> query_rows;  // this scenario and measure, at the report's target
      for (const auto& a : answers)
        if (a.scenario == sc.index && a.measure == m) query_rows.push_back(a);
      std::map<Strategy, int> largest_logged;
      for (const auto& a : query_rows) largest_logged[a.strategy] = std::max(largest_logged[a.strategy], a.logged);
      std::vector<AnswerRow> by_target;
      for (double factor : kTargetFactors) {
        const double t = factor == 1.0 ? *target : std::strtod(fmt::format("{:.3g}", *target * factor).c_str(), nullptr);
        Study one = study;
        one.scenarios = {sc};
        one.scenarios.front().settings.targets = {{m, t}};
        AnswerOverrides ov = options.overrides;
        ov.targets = {{m, t}};
        for (const auto& a : compute_study_answers(one, rows, ov))
          if (a.measure == m && a.logged == largest_logged[a.strategy]) by_target.push_back(a);
      }
      const int largest_pilot = set.pilot_budgets.empty()
                                    ? 0
                                    : *std::max_element(set.pilot_budgets.begin(), set.pilot_budgets.end());
      const double interval = query_rows.empty() ? 0.9 : query_rows.front().interval;
      const std::string what_assurance =
          query_rows.empty() || query_rows.front().criterion == Criterion::mean
              ? std::string("the mean criterion")
              : fmt::format("assurance {}", text_number(assurance));
      struct Needed {
        NeededAxis axis;
        FigureKind kind;
        std::vector<AnswerRow>* rows;
        std::string suffix, what;
      };
      for (const Needed& n : {Needed{NeededAxis::target, FigureKind::needed_by_target, &by_target, "-needed-by-target",
                                     fmt::format("pilot episodes needed against the {} target", name(m))},
                              Needed{NeededAxis::logged, FigureKind::needed_by_logged, &query_rows, "-needed-by-logged",
                                     fmt::format("pilot episodes needed against the logged budget ({} at most {})",
                                                 name(m), text_number(*target))}}) {
        FigureText h{fmt::format("scenario-{}-{}{}", sc.index, name(m), n.suffix), {n.what, title_line2}};
        const auto nseries = needed_series(*n.rows, set.strategies, n.axis);
        const NeededScale y = needed_scale(*n.rows, set.pilot_budgets);
        write_file_atomically(tmp.path / (h.base + ".dat"),
                              needed_dat(nseries, y, fmt::format("dobudget report data: {}, study {}, {}", n.what,
                                                                 study.name, scenario_heading(sc))));
        if (!any_finite_need(*n.rows)) {
          const std::string why = fmt::format("{}, `{}` {}: no finite answer to draw", scenario_heading_terminal(sc),
                                              name(m), n.what);
          outcome.skipped.push_back(why);
          page_notes.push_back(why);
          figures_md += fmt::format("\nNo figure of the {}: no strategy reaches a target in the simulated range (data: "
                                    "[{}.dat]({}.dat)).\n",
                                    n.what, h.base, h.base);
          continue;
        }
        write_file_atomically(tmp.path / (h.base + ".gp"),
                              needed_script(h, terminal, m, n.axis, nseries, y, *target, largest_pilot, interval));
        const std::string common = fmt::format(
            "Points: the pilot episodes needed ({}), as in the answer tables, with their {:g}% bootstrap interval (bars; "
            "an infinite upper end or a lower end below the figure is drawn at its edge); a target that cannot be "
            "reached (or an unknown need) has no point. Above the dotted grey line (the largest simulated pilot "
            "budget) the needs are extrapolated. Strategies are set slightly apart sideways so that their bars do not "
            "hide each other.",
            what_assurance, interval * 100.0);
        const std::string caption =
            n.axis == NeededAxis::target
                ? fmt::format("Pilot episodes needed against the target for {} (log scales), recomputed from the "
                              "stored run records for targets from {:g} to {:g} times the report's {} (dotted vertical "
                              "line), without simulating again: what a stricter target costs. Each strategy at its "
                              "largest logged budget. {}",
                              name(m), kTargetFactors[0], kTargetFactors[std::size(kTargetFactors) - 1],
                              text_number(*target), common)
                : fmt::format("Pilot episodes needed against the logged budget, for {} at most {}: the value of the "
                              "logged records for each strategy (pilot-only ignores them). {}",
                              name(m), text_number(*target), common);
        add_figure(sc.index, m, n.kind, h.base, n.what + ", " + scenario_heading(sc), caption);
        figures_md += fmt::format("\n![{}, {}]({}.png)\n\n", n.what, scenario_heading_md(sc), h.base);
        figures_md += markdown_text(caption) + " " + links_md(h.base) + "\n";
      }
    }
  }
  if (options.render) run_gnuplot(*gnuplot, tmp.path, scripts, images);

  // ---- the methods paragraph: plain text, escaped whole for each page (methods_text.hpp).
  const std::vector<std::string> methods = methods_paragraphs({&study, &answers, bootstrap});
  write_file_atomically(tmp.path / "methods.txt", methods_plain_text(methods));

  // ---- report.md. User text (the study name, the run directory's name, swept keys and values,
  // labels) goes in through markdown_text only, never inside a code span.
  const ScenarioSettings& first = study.scenarios.front().settings;
  std::string md = fmt::format("# Report: {}\n\n", markdown_text(study.name));
  fs::path shown = fs::absolute(run_dir).lexically_normal();
  if (shown.filename().empty()) shown = shown.parent_path();
  const std::string made_by = fmt::format(
      "Made by dobudget report (dobudget {}) from the run directory {} ({} run records), without simulating again. {}",
      DOBUDGET_VERSION, shown.filename().string(), rows.size(),
      options.overrides.targets.empty() && !options.overrides.assurance
          ? "Figures and tables use the study's targets and assurance."
          : "Targets or the assurance were given for this report (see Settings).");
  md += fmt::format(
      "Made by `dobudget report` (dobudget {}) from the run directory {} ({} run records), without simulating "
      "again. {}\n",
      DOBUDGET_VERSION, markdown_text(shown.filename().string()), rows.size(),
      options.overrides.targets.empty() && !options.overrides.assurance
          ? "Figures and tables use the study's targets and assurance."
          : "Targets or the assurance were given for this report (see [Settings](#settings)).");

  md += "\n## Methods\n\nA paragraph to paste into a proposal (also as plain text: [methods.txt](methods.txt)).\n";
  for (const auto& p : methods) md += "\n" + markdown_text(p) + "\n";

  md += "\n## Study\n\n";
  md += fmt::format("Study {}, seed {}. ", markdown_text(study.name), study.seed);
  const auto& assignments0 = study.scenarios.front().assignments;
  std::vector<std::string> swept_keys;
  for (const auto& [k, v] : assignments0) swept_keys.push_back(k);
  if (study.scenarios.size() == 1 && assignments0.empty()) {
    md += "One scenario (no sweep).\n";
  } else {
    md += fmt::format("{} scenarios, the cartesian product of the swept values of {}:\n\n", study.scenarios.size(),
                      join_map(swept_keys, ", ", [](const std::string& k) { return markdown_text(k); }));
    md += "| scenario |" + join_map(swept_keys, "", [](const std::string& k) { return " " + markdown_text(k) + " |"; }) + "\n";
    md += "|---:|" + std::string() + join_map(swept_keys, "", [](const std::string&) { return std::string("---|"); }) + "\n";
    for (const auto& sc : study.scenarios)
      md += fmt::format("| {} |", sc.index) +
            join_map(sc.assignments, "", [](const std::pair<std::string, std::string>& a) { return " " + markdown_text(a.second) + " |"; }) +
            "\n";
  }

  md += "\n## Answer\n";
  md += answer_section(format_answer_md(study.name, labels, answers));
  const auto open = std::count_if(rows.begin(), rows.end(), [](const RunRecord& r) { return !r.confirmed; });
  const std::string open_share =
      rows.empty() ? std::string("-")
                   : fmt::format("{:g}%", std::round(1000.0 * static_cast<double>(open) / static_cast<double>(rows.size())) / 10.0);
  md += fmt::format(
      "\nOf the {} run records, {} ({}) come from a fit whose best optimum no second EM start reached "
      "(`confirmed` 0 in runs.csv; fit settings `restarts` and `max_restarts`).\n",
      rows.size(), open, open_share);

  md += "\n## Figures\n\n";
  md += "For each scenario and measure: the measure against the pilot budget for each way of using the data, the "
        "fraction of (environment draw, replicate) pairs that meet the target, and the pilot episodes needed against "
        "the target and against the logged budget. Every figure is here as PNG, PDF and SVG. Each figure's data "
        "(`.dat`) and gnuplot script (`.gp`) sit beside it in this folder: edit the script and run `gnuplot NAME.gp` "
        "here to restyle a figure (it writes all three formats). The `.dat` files are whitespace-separated columns "
        "with `#` comments (pandas: `read_csv(f, sep=r\"\\s+\", comment=\"#\", header=None)`). The same page with "
        "every figure embedded, for a reader without a Markdown viewer: [report.html](report.html).\n";
  if (!options.render)
    md += "\n**The figures were not drawn** (gnuplot was not run): run `gnuplot NAME.gp` in this folder for each "
          "script to draw them.\n";
  md += figures_md;

  std::map<Measure, double> report_targets = first.targets;
  for (const auto& [m, t] : options.overrides.targets) report_targets[m] = t;
  const double report_assurance = options.overrides.assurance.value_or(first.assurance);
  const auto settings = settings_rows(first, report_targets, report_assurance);
  auto is_swept = [&](const std::string& key) {
    return std::find(swept_keys.begin(), swept_keys.end(), key) != swept_keys.end();
  };
  md += "\n## Settings\n\n";
  md += "Every setting, with every default filled in: [study.resolved.yaml](../study.resolved.yaml). The main ones";
  md += study.scenarios.size() > 1 ? " (swept settings vary by scenario, see [Study](#study)):\n\n" : ":\n\n";
  md += "| setting | value |\n|---|---|\n";
  for (const auto& [key, value] : settings)
    // Keys and values here are the program's own text (setting names, numbers), not user text.
    md += fmt::format("| `{}` | {} |\n", key, is_swept(key) ? std::string("swept (see [Study](#study))") : value);

  md += "\n## Caution\n\n";
  md += kCaution;
  md += "\n";
  write_file_atomically(tmp.path / "report.md", md);

  // ---- report.html: stands alone (styles inline, every figure embedded as a data: URI of its SVG,
  // which an <img> shows without running scripts or loading anything); every text through html_text.
  {
    std::string h = "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>" +
                    html_text("Report: " + study.name) + "</title>\n<style>" + kHtmlStyle + "</style>\n</head>\n<body>\n";
    h += "<h1>" + html_text("Report: " + study.name) + "</h1>\n<p>" + html_text(made_by) + "</p>\n";
    h += "<h2 id=\"methods\">Methods</h2>\n";
    for (const auto& p : methods) h += "<p class=\"methods\">" + html_text(p) + "</p>\n";
    h += "<h2 id=\"study\">Study</h2>\n<p>" + html_text(fmt::format("Study {}, seed {}.", study.name, study.seed)) +
         (study.scenarios.size() == 1 && assignments0.empty() ? " One scenario (no sweep).</p>\n" : "</p>\n");
    if (!(study.scenarios.size() == 1 && assignments0.empty())) {
      std::vector<std::string> head{"scenario"};
      head.insert(head.end(), swept_keys.begin(), swept_keys.end());
      std::vector<std::vector<std::string>> body;
      for (const auto& sc : study.scenarios) {
        std::vector<std::string> row{std::to_string(sc.index)};
        for (const auto& a : sc.assignments) row.push_back(a.second);
        body.push_back(row);
      }
      h += html_table(head, body, {true});
    }
    h += "<h2 id=\"answer\">Answer</h2>\n<p>" +
         html_text("Pilot episodes needed, rounded up to whole episodes (answer.csv keeps the unrounded values); see "
                   "answer.md in the run directory for how to read each column.") +
         "</p>\n";
    const ReadableAnswers readable = readable_answers(answers);
    std::vector<std::tuple<int, Measure, double, Criterion>> groups;
    for (const auto& r : readable.rows) {
      const auto key = std::make_tuple(r.scenario, r.measure, r.target, r.criterion);
      if (std::find(groups.begin(), groups.end(), key) == groups.end()) groups.push_back(key);
    }
    for (const auto& key : groups) {
      const auto& sc = study.scenarios.at(static_cast<std::size_t>(std::get<0>(key)));
      std::vector<std::vector<std::string>> body;
      std::string heading;
      for (std::size_t i = 0; i < readable.rows.size(); ++i) {
        const AnswerRow& r = readable.rows[i];
        if (std::make_tuple(r.scenario, r.measure, r.target, r.criterion) != key) continue;
        if (heading.empty())
          heading = fmt::format("{}: {} at most {} ({})", scenario_heading(sc), name(r.measure), text_number(r.target),
                                r.criterion == Criterion::mean ? std::string("mean criterion")
                                                               : fmt::format("assurance {}", text_number(r.assurance)));
        body.push_back({std::string(name(r.strategy)), readable.logged[i], needed_text(r), interval_text(r),
                        std::string(name(r.status)), std::to_string(r.pairs), std::to_string(r.draws)});
      }
      h += "<h3>" + html_text(heading) + "</h3>\n";
      h += html_table({"strategy", "logged", "needed pilot", fmt::format("{:g}% interval", readable.rows.empty() ? 90.0 : readable.rows.front().interval * 100.0),
                       "status", "pairs", "draws"},
                      body, {false, true, true, false, false, true, true});
    }
    if (readable.left_out > 0) h += "<p>" + html_text(std::string(readable_answers_note())) + ".</p>\n";
    h += "<p>" + html_text(fmt::format("Of the {} run records, {} ({}) come from a fit whose best optimum no second EM "
                                       "start reached (confirmed 0 in runs.csv).",
                                       rows.size(), open, open_share)) +
         "</p>\n";
    h += "<h2 id=\"figures\">Figures</h2>\n";
    if (!options.render) h += "<p>" + html_text("The figures were not drawn (gnuplot was not run).") + "</p>\n";
    for (const auto& [scenario, figs] : page_figures) {
      h += "<h3>" + html_text(scenario_heading(study.scenarios.at(static_cast<std::size_t>(scenario)))) + "</h3>\n";
      for (const auto& fig : figs) {
        h += "<div class=\"figure\">\n";
        if (options.render)
          h += "<img alt=\"" + html_text(fig.alt) + "\" src=\"data:image/svg+xml;base64," +
               base64(read_file(tmp.path / (fig.base + ".svg"))) + "\">\n";
        h += "<p class=\"caption\">" + html_text(fig.caption + " Files in report/: " + fig.base + ".png, .pdf, .svg, .dat, .gp.") +
             "</p>\n</div>\n";
      }
    }
    for (const auto& note : page_notes) h += "<p>" + html_text("Left out: " + note) + "</p>\n";
    h += "<h2 id=\"settings\">Settings</h2>\n<p>" +
         html_text("Every setting, with every default filled in, is in study.resolved.yaml in the run directory. The "
                   "main ones:") +
         "</p>\n";
    {
      std::vector<std::vector<std::string>> body;
      for (const auto& [key, value] : settings) body.push_back({key, is_swept(key) ? std::string("swept (see Study)") : value});
      h += html_table({"setting", "value"}, body, {});
    }
    h += "<h2 id=\"caution\">Caution</h2>\n<p class=\"caution\">" + html_text(kCaution) + "</p>\n</body>\n</html>\n";
    write_file_atomically(tmp.path / "report.html", h);
  }

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
