// dobudget report: figures and a report page from a finished run directory, no simulation
// (io/report.hpp does the work; this file prints and maps errors to exit codes).
#include <cstdio>
#include <string>

#include "cli/commands.hpp"
#include "io/report.hpp"

namespace dobudget::cli {

int report_command(const std::string& dir) {
  io::ReportOutcome out;
  try {
    out = io::write_report(dir);
  } catch (const io::ReportError& e) {
    throw BadInput(e.what());  // not a run directory, no runs.csv, no gnuplot: exit code 2
  }
  std::printf("wrote %s\n", out.page.string().c_str());
  std::printf("  %zu figures (gnuplot terminal %s), each with its .dat data and .gp script in %s\n",
              out.figures.size(), out.terminal.c_str(), out.dir.string().c_str());
  for (const auto& s : out.skipped) std::printf("  left out: %s\n", s.c_str());
  std::printf("\n%s\n", caution);
  return 0;
}

}  // namespace dobudget::cli
