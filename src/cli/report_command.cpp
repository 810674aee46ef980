// dobudget report: figures and a report page from a finished run directory, no simulation
// (io/report.hpp does the work; this file reads the options, prints and maps errors to exit codes).
#include <cstdio>
#include <string>

#include "cli/commands.hpp"
#include "io/report.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {

int report_command(const ReportArgs& args) {
  // --target and --assurance exactly as `answer` reads them, refused before anything is read.
  AnswerArgs answer_args;
  answer_args.dir = args.dir;
  answer_args.targets = args.targets;
  answer_args.assurance = args.assurance;
  io::ReportOptions options;
  options.overrides = answer_overrides(answer_args);
  if (!options.overrides.targets.empty()) {
    const std::filesystem::path resolved = std::filesystem::path(args.dir) / "study.resolved.yaml";
    if (std::filesystem::exists(resolved)) check_targets_measured(io::load_study(resolved), options.overrides);
  }
  io::ReportOutcome out;
  try {
    out = io::write_report(args.dir, options);
  } catch (const io::ReportError& e) {
    throw BadInput(e.what());  // not a run directory, no runs.csv, no gnuplot: exit code 2
  }
  std::printf("wrote %s, %s and %s\n", out.page.string().c_str(), (out.dir / "report.html").string().c_str(),
              (out.dir / "methods.txt").string().c_str());
  std::printf("  %zu figures, each as PNG, PDF and SVG (gnuplot terminals %s), with its .dat data and .gp script in %s\n",
              out.figures.size(), out.terminal.c_str(), out.dir.string().c_str());
  for (const auto& s : out.skipped) std::printf("  left out: %s\n", s.c_str());
  std::printf("\n%s\n", caution);
  return 0;
}

}  // namespace dobudget::cli
