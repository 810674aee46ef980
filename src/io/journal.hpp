// The unit journal of a run directory (units.journal): one line per finished unit, appended and
// flushed as the unit finishes, so that an interrupted `plan` (even by SIGKILL) loses at most the
// units still running. Line format:
//   <unit index> TAB <CRC-32 of the payload, 8 hex digits> TAB <payload> LF
// where the payload is the unit's rows, each a runs.csv line followed by ",<fit_seconds>",
// joined by ';'. A last line without LF, with a CRC mismatch or that does not parse is a torn
// record: it is dropped (truncated away) and the unit is computed again; it is never half-read.
#pragma once
#include <cstdio>
#include <filesystem>
#include <map>
#include <vector>

#include "core/run_record.hpp"

namespace dobudget::io {

class Journal {
 public:
  // Opens (creating if needed) the journal at `file`, reads every intact record and truncates
  // a torn tail. Throws std::runtime_error if a record other than the last is damaged.
  explicit Journal(const std::filesystem::path& file);
  ~Journal();
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  const std::map<std::size_t, std::vector<RunRecord>>& units() const { return units_; }
  bool torn_tail_dropped() const { return torn_; }

  // Appends one finished unit and flushes it to the operating system.
  void append(std::size_t unit_index, const std::vector<RunRecord>& rows);

  // Parses a whole journal text (exposed for merge and tests); throws on damage before the end.
  static std::map<std::size_t, std::vector<RunRecord>> parse(const std::string& text, std::size_t* intact_bytes,
                                                             bool* torn);

 private:
  std::map<std::size_t, std::vector<RunRecord>> units_;
  std::FILE* file_ = nullptr;
  bool torn_ = false;
};

}  // namespace dobudget::io
