// libFuzzer target: the journal reader (io::Journal::parse and parse_file) on arbitrary bytes.
// The reader must read the bytes or refuse them with one located InputError. What it reads must
// be consistent: the intact prefix is at most the text; a journal read without a torn tail is read
// whole; the intact prefix alone reads to the same units with nothing torn (what resume does after
// truncating); and each unit's record, written again by Journal::record, reads back to its rows.
#include <cstddef>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "fuzz_finding.hpp"
#include "io/csv.hpp"
#include "io/journal.hpp"
#include "io/runs_table.hpp"

namespace {

using dobudget::RunRecord;
using dobudget::fuzz::finding;

// Rows compared as runs.csv writes them, plus fit_seconds (exact: both are written in shortest
// round-trip form).
std::string text_of(const std::vector<RunRecord>& rows) {
  std::string s;
  for (const RunRecord& r : rows) s += dobudget::io::runs_line(r) + "|" + dobudget::io::csv_number(r.fit_seconds) + "\n";
  return s;
}

void check(const std::string& text, const dobudget::io::Journal::Units& units, std::size_t intact, bool torn) {
  using dobudget::io::Journal;
  if (intact > text.size()) finding("intact prefix longer than the text");
  if (!torn && intact != text.size()) finding("nothing torn, but the text was not read whole");
  for (const auto& [index, rows] : units) {
    std::size_t n = 0;
    bool t = false;
    const auto again = Journal::parse(Journal::record(index, rows), &n, &t);
    if (t || again.size() != 1 || again.begin()->first != index || text_of(again.begin()->second) != text_of(rows))
      finding("the record of unit " + std::to_string(index) + " written again does not read back to its rows");
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace dobudget;
  using io::Journal;
  const std::string text(reinterpret_cast<const char*>(data), size);

  Journal::Units units;
  std::size_t intact = 0;
  bool torn = false;
  if (fuzz::reads([&] { units = Journal::parse(text, &intact, &torn); })) {
    try {
      check(text, units, intact, torn);
      std::size_t n = 0;
      bool t = false;
      const auto prefix = Journal::parse(text.substr(0, intact), &n, &t);
      if (t || n != intact || prefix.size() != units.size()) finding("the intact prefix does not read to the same units");
    } catch (const std::exception& e) {
      finding(std::string("reading back what was read threw: ") + e.what());
    }
  }

  // parse_file with the study hash the header names, if any, so that the records behind it are reached.
  std::string hash = "0123456789abcdef";
  const std::string prefix = "dobudget-journal " + std::to_string(Journal::format_version) + " study ";
  if (text.compare(0, prefix.size(), prefix) == 0) hash = text.substr(prefix.size(), text.find('\n') - prefix.size());
  if (fuzz::reads([&] { units = Journal::parse_file(text, hash, &intact, &torn); })) {
    try {
      check(text, units, intact, torn);
    } catch (const std::exception& e) {
      finding(std::string("reading back what was read threw: ") + e.what());
    }
  }
  return 0;
}
