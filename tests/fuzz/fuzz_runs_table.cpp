// libFuzzer target: the run-table reader (io::parse_runs) on arbitrary bytes. The reader must read
// the bytes or refuse them with one located InputError; rows it reads must be written back by
// runs_csv to a text that reads back to the same text (a re-analysed runs.csv is stable).
#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "fuzz_finding.hpp"
#include "io/runs_table.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace dobudget;
  const std::string text(reinterpret_cast<const char*>(data), size);
  std::vector<RunRecord> rows;
  if (!fuzz::reads([&] { rows = io::parse_runs(text, "runs.csv"); })) return 0;
  std::string written, again;
  try {
    written = io::runs_csv(rows);
    again = io::runs_csv(io::parse_runs(written, "written.csv"));
  } catch (const std::exception& e) {
    fuzz::finding(std::string("runs_csv of rows that were read does not read back: ") + e.what());
  }
  if (again != written) fuzz::finding("runs_csv does not read back to itself:\n" + written + "\n---\n" + again);
  // A text that is already canonical reads back to itself byte for byte (with its final LF).
  if (text == written.substr(0, written.size() - 1) + "\n" && written != text) fuzz::finding("canonical runs.csv changed");
  return 0;
}
