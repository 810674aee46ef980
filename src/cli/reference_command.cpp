// dobudget reference study-file: print a reference page generated from the program's own tables
// (a hidden command: it writes the committed docs/study-file.md, which a test compares with it).
#include <cstdio>

#include "cli/commands.hpp"
#include "io/study_reference.hpp"

namespace dobudget::cli {

int reference_command(const std::string& page) {
  if (page != "study-file") throw BadInput("reference: unknown page '" + page + "'; expected one of: study-file");
  std::fputs(io::study_file_reference().c_str(), stdout);
  return 0;
}

}  // namespace dobudget::cli
