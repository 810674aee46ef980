// dobudget merge: combine the shards of a study into one complete run directory, print the
// results and the answer as `plan` does.
#include <cstdio>

#include "cli/commands.hpp"
#include "io/answer_table.hpp"
#include "io/merge.hpp"
#include "io/text_escape.hpp"
#include "io/summary_table.hpp"

namespace dobudget::cli {

int merge_command(const MergeArgs& args) {
  const std::vector<std::filesystem::path> dirs(args.dirs.begin(), args.dirs.end());
  const std::filesystem::path out(args.out);
  const io::Merge m = io::merge_run_directories(dirs, out);

  std::fprintf(stderr, "dobudget merge: study '%s', %zu units from %zu director%s, written to %s\n",
               io::printable_line(m.study.name).c_str(), m.units, m.inputs.size(), m.inputs.size() == 1 ? "y" : "ies",
               out.string().c_str());
  std::printf("%s", io::format_summary(m.study, m.rows).c_str());
  std::printf("\n%s", io::format_answer_table(m.answers, &m.study).c_str());
  std::printf("\nrun directory: %s (runs.csv, answer.csv, answer.md, manifest.json); %zu units merged from %zu "
              "director%s\n",
              out.string().c_str(), m.units, m.inputs.size(), m.inputs.size() == 1 ? "y" : "ies");
  std::printf("\n%s\n", caution);
  return 0;
}

}  // namespace dobudget::cli
