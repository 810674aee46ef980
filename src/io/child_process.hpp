// Running a helper program (gnuplot) without a shell. The program and its arguments go to
// execv as they are, so no text (a path, a file name, anything derived from a study) is ever
// read by /bin/sh: there is nothing to quote and nothing to inject.
#pragma once
#include <filesystem>
#include <string>
#include <vector>

namespace dobudget::io {

struct ChildResult {
  bool started = false;  // the program could be executed at all
  int exit_code = -1;    // its exit status; -1 when it did not exit normally (killed by a signal)
  std::string output;    // what it wrote to stdout and stderr, together (at most 1 MiB is kept)
};

// Runs `program` (an absolute path or one relative to the current directory; no PATH search) with
// `arguments` in `working_directory`, standard input from /dev/null, and waits for it.
ChildResult run_child(const std::filesystem::path& program, const std::vector<std::string>& arguments,
                      const std::filesystem::path& working_directory);

}  // namespace dobudget::io
