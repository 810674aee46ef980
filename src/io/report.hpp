// `dobudget report DIR` (docs/run-directory.md, "report/"): figures and a report page from a finished run
// directory, with no simulation.
//
// It reads DIR/study.resolved.yaml and DIR/runs.csv, computes the answers (compute_study_answers,
// with the study's targets and assurance unless overridden) and writes DIR/report/:
//
//   report.md                          the page: the methods paragraph (methods_text.hpp), study,
//                                      scenarios and their swept values, the answer tables, the
//                                      figures, a link to ../study.resolved.yaml and the caution.
//                                      Plain Markdown; images (PNG) by relative path.
//   methods.txt                        the methods paragraph as plain text, to paste into a proposal.
//   report.html                        the same page for a reader without a Markdown viewer; it stands
//                                      alone: styles inline, every figure embedded as a data: URI of its
//                                      SVG (base64.hpp) in an <img> (no script runs, nothing is loaded),
//                                      no external reference; all text through html_text.
//   scenario-<i>-<measure>.dat         the per-cell summary of the measure (summarise(), summary.hpp)
//   scenario-<i>-<measure>.gp          gnuplot script drawing it into .png, .pdf and .svg ...
//   scenario-<i>-<measure>.{png,pdf,svg}  ... : x = pilot episodes (log scale), y = the measure (log
//                                      scale for model_kl); the median of each strategy at each
//                                      logged budget with its q10-q90 band shaded; the target as a
//                                      horizontal line.
//   scenario-<i>-<measure>-success.*   the raw success fraction (success_curve.hpp) against pilot
//                                      episodes, with the assurance as a horizontal line. This and the
//                                      two below only for measures that have a target in that scenario.
//   scenario-<i>-<measure>-needed-by-target.*  pilot episodes needed (with the bootstrap interval)
//                                      against the target, recomputed by the answer code
//                                      (compute_study_answers) from the stored rows at 1/4 to 2 times
//                                      the report's target, each strategy at its largest logged budget.
//   scenario-<i>-<measure>-needed-by-logged.*  pilot episodes needed against the logged budget, for
//                                      each strategy, at the report's target (the answer tables' rows).
//
// Which lines a figure draws (every cell is in the .dat file all the same): pilot-only once, at
// the smallest logged budget where it has records (it ignores logged data), and every other
// strategy at its largest logged budget, as solid lines with bands; the other strategies at the
// other logged budgets as dashed lines without band, except logged 0 when pilot-only is drawn
// (there every strategy is the pilot-only fit). A figure without any drawable value (e.g.
// return_gap missing everywhere) is left out and the page says so.
//
// .dat files: whitespace-separated columns, '#' comments, one block per (strategy, logged) in the
// order of the runs, blocks separated by two blank lines (gnuplot `index`; pandas:
// read_csv(f, sep=r"\s+", comment="#", header=None)). Numbers are the shortest text that reads back
// to the same double; a non-finite statistic (no value, or an infinite one) is written "NaN".
// The .gp scripts use paths relative to report/: `cd DIR/report && gnuplot scenario-0-model_kl.gp`
// redraws a figure after editing its script.
//
// User text (the study name, scenario labels, swept keys and values, the run directory's name) is
// hostile: it reaches the scripts only as gnuplot single-quoted strings (gnuplot_string,
// gnuplot_lines: a two-line title is 'line one'."\n".'line two', never user text inside double
// quotes, where gnuplot would run `backquoted` commands), the .dat title comment only on one line
// (printable_line), report.md only through markdown_text, and the terminal only
// through printable_line; see text_escape.hpp.
//
// gnuplot runs as a child process, without a shell (child_process.hpp), on up to 64 scripts per
// run. Each script draws its figure three times: PNG (pngcairo, or png when gnuplot has no cairo),
// PDF (pdfcairo) and SVG (svg); a gnuplot without pdfcairo or svg is refused, naming gnuplot-nox.
// Everything is written to a temporary folder DIR/.report.tmp.<pid> and renamed to DIR/report at
// the end (an older report/ is replaced only then), so a failed run leaves no half-written
// report/ and leaves an earlier report as it was.
#pragma once
#include <filesystem>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/measures/measure.hpp"
#include "core/answer/success_curve.hpp"
#include "core/answer/summary.hpp"

namespace dobudget::io {

// Input the user must fix (not a run directory, runs.csv missing, gnuplot missing): the command
// line reports it with exit code 2.
struct ReportError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

struct ReportOptions {
  std::string gnuplot = "gnuplot";  // a program name searched on PATH, or a path to it
  bool render = true;               // false: write data, scripts and report.md but do not run gnuplot
  AnswerOverrides overrides;        // targets and assurance for the answers and the figures
};

enum class FigureKind { measure, success, needed_by_target, needed_by_logged };

struct ReportFigure {
  int scenario = 0;
  Measure measure = Measure::model_kl;
  FigureKind kind = FigureKind::measure;
  bool success = false;      // kind == success
  std::string image;         // file names inside report/: the PNG (the one report.md shows)
  std::vector<std::string> images;  // .png, .pdf, .svg
  std::string script;
  std::string data;
  bool rendered = false;     // the image was made (render == true)
};

struct ReportOutcome {
  std::filesystem::path dir;   // DIR/report
  std::filesystem::path page;  // DIR/report/report.md
  std::string terminal;        // the gnuplot terminals used, e.g. "pngcairo, pdfcairo, svg"
  std::vector<ReportFigure> figures;
  std::vector<std::string> skipped;  // figures left out, with the reason
};

// Writes DIR/report/ as described above. Throws ReportError for a directory that is not a run
// directory, a missing runs.csv, a missing gnuplot (naming the Debian package) or a gnuplot without
// a usable terminal; io::InputError for a malformed study.resolved.yaml; std::runtime_error when
// gnuplot fails on a script (its messages included) or a file cannot be written.
ReportOutcome write_report(const std::filesystem::path& run_dir, const ReportOptions& options = {});

// ---- pieces, exposed for tests --------------------------------------------------------------

// The text of a .dat file for the cells of one scenario and measure (as summarise() gives them).
// `title` goes into the header comment, on one line (printable_line: a line break or control
// character in it cannot end the comment).
std::string summary_dat(const std::vector<CellSummary>& cells, std::string_view title);
// The same for success fractions: columns strategy logged pilot pairs successes fraction.
std::string success_dat(const std::vector<SuccessCell>& cells, std::string_view title);

// The program as run: a name without '/' is searched on PATH; a path must be an executable file.
std::optional<std::filesystem::path> find_program(const std::string& program);

// Terminals the gnuplot has (GPVAL_TERMINALS); the PNG terminal among them (pngcairo, else png;
// empty when none); and the terminals the report needs that are missing (pngcairo standing for
// either PNG terminal, pdfcairo, svg).
std::vector<std::string> gnuplot_terminals(const std::filesystem::path& gnuplot);
std::string png_terminal(const std::vector<std::string>& available);
std::vector<std::string> missing_terminals(const std::vector<std::string>& available);

}  // namespace dobudget::io
