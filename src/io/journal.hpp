// The unit journal of a run directory (units.journal): one line per finished unit, appended and
// flushed as the unit finishes, so that an interrupted `plan` (even by SIGKILL) loses at most the
// units still running. Line format:
//   <unit index> TAB <CRC-32 of the payload, 8 hex digits> TAB <payload> LF
// where the payload is the unit's rows, each a runs.csv line followed by ",<fit_seconds>",
// joined by ';'. A last line without LF, with a CRC mismatch or that does not parse is a torn
// record: it is dropped (truncated away) and the unit is computed again; it is never half-read.
// A damaged record before the last cannot come from an interruption (records are only ever
// appended): it is an error naming the file and the record.
//
// Durability: append() hands the record to the operating system (fflush), which survives the
// process being killed (SIGKILL, a scheduler's pre-emption, an out-of-memory kill) but not a
// crash of the machine itself; no fsync per unit (see bench/bench_journal.cpp for the costs).
//
// One writer at a time: the constructor takes an exclusive advisory lock (flock) on the file and
// refuses a journal that another process holds open, so a run resubmitted while the first one
// still runs cannot interleave records. Where the file system does not support flock, no lock is
// taken.
#pragma once
#include <cstdio>
#include <filesystem>
#include <map>
#include <string>
#include <vector>

#include "core/run_record.hpp"

namespace dobudget::io {

class Journal {
 public:
  // Opens (creating if needed) the journal at `file`, reads every intact record and truncates
  // a torn tail. Throws std::runtime_error if a record other than the last is damaged (the
  // message names the file and the record), or if another process is writing the journal.
  explicit Journal(const std::filesystem::path& file);
  ~Journal();
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  const std::map<std::size_t, std::vector<RunRecord>>& units() const { return units_; }
  bool torn_tail_dropped() const { return torn_; }

  // Appends one finished unit and flushes it to the operating system.
  void append(std::size_t unit_index, const std::vector<RunRecord>& rows);

  // Parses a whole journal text (exposed for merge and tests); throws std::runtime_error on damage
  // before the end, naming `source` (the file, in messages) and the record (1-based line).
  // *intact_bytes receives the length of the intact prefix, *torn whether a torn last record was
  // left out.
  static std::map<std::size_t, std::vector<RunRecord>> parse(const std::string& text, std::size_t* intact_bytes,
                                                             bool* torn,
                                                             const std::string& source = "units.journal");

  // One record (a whole line, with its LF) as append() writes it.
  static std::string record(std::size_t unit_index, const std::vector<RunRecord>& rows);

  // True when a process holds the journal at `file` open for writing (its lock is taken). Reads
  // nothing and changes nothing; false when the file does not exist or locks are not supported.
  static bool in_use(const std::filesystem::path& file);

 private:
  std::map<std::size_t, std::vector<RunRecord>> units_;
  std::FILE* file_ = nullptr;
  bool torn_ = false;
};

}  // namespace dobudget::io
