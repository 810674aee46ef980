// The unit journal of a run directory (units.journal): one line per finished unit, appended and
// flushed as the unit finishes, so that an interrupted `plan` (even by SIGKILL) loses at most the
// units still running. The first line names the format and the study the journal belongs to:
//   dobudget-journal 2 study <study hash, 16 hex digits> LF
// then one record per line:
//   <unit index> TAB <CRC-32 of "<unit index> TAB <payload>", 8 hex digits> TAB <payload> LF
// where the payload is the unit's rows, each a runs.csv line followed by ",<fit_seconds>",
// joined by ';'. The checksum covers the whole record, index included, so one flipped bit
// anywhere in a line is caught (CRC-32 detects every burst error up to 32 bits; Peterson and
// Brown 1961, "Cyclic codes for error detection").
//
// A last line without LF, with a CRC mismatch or that does not parse is a torn record: it is
// dropped (truncated away) and the unit is computed again; it is never half-read. A damaged record
// before the last cannot come from an interruption (records are only ever appended): it is an
// error naming the file and the line. A journal without the header line (format 1, or not a
// journal), of another format version or naming another study is refused. A record that parses
// but fails the caller's check (rows that are not its unit's) or repeats a unit is refused too.
//
// Durability: append() hands the record to the operating system (fflush), append_batch() a
// whole batch of records with one write and one fflush; either survives the
// process being killed (SIGKILL, a scheduler's pre-emption, an out-of-memory kill) but not a
// crash of the machine itself; no fsync per unit (see bench/bench_journal.cpp for the costs).
//
// One writer at a time: the constructor takes an exclusive advisory lock (flock) on the file and
// refuses a journal that another process holds open, so a run resubmitted while the first one
// still runs cannot interleave records. The run directory claims itself while holding this lock
// (run_directory.hpp), so two runs racing for a new directory cannot both claim it. Where the
// file system does not support flock, no lock is taken.
#pragma once
#include <cstdio>
#include <filesystem>
#include <functional>
#include <map>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/running/run_record.hpp"

namespace dobudget::io {

class Journal {
 public:
  using Units = std::map<std::size_t, std::vector<RunRecord>>;
  // Checks one parsed record: returns an empty string when the rows belong to unit `index`, else
  // what is wrong (e.g. "unit 9 does not exist").
  using RecordCheck = std::function<std::string(std::size_t index, const std::vector<RunRecord>& rows)>;

  inline static constexpr int format_version = 2;

  // Opens (creating if needed) the journal at `file` of the study with hash `study_hash` and takes
  // its lock; then runs `while_locked` (when given), reads every intact record (each passed to
  // `check`, when given), truncates a torn tail and writes the header line to an empty journal.
  // Throws std::runtime_error if another process is writing the journal, InputError (file, line)
  // for a missing or foreign header, a damaged record other than the last, or a record that fails
  // `check`, and InputError naming the file when it is a symbolic link or not a regular file (a
  // pipe, a device: regular_file.hpp), so that no record is written outside the run directory and
  // nothing blocks; whatever `while_locked` throws is passed on. Nothing is changed when it throws.
  Journal(const std::filesystem::path& file, const std::string& study_hash,
          const std::function<void()>& while_locked = {}, const RecordCheck& check = {});
  ~Journal();
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  const Units& units() const { return units_; }
  bool torn_tail_dropped() const { return torn_; }

  // Appends one finished unit and flushes it to the operating system. Throws std::runtime_error
  // when the write fails; the journal is then cut back to its last whole record (when ftruncate
  // allows) and every later append throws too, so no record ever follows a partial one.
  void append(std::size_t unit_index, const std::vector<RunRecord>& rows);
  void append(std::size_t unit_index, std::vector<RunRecord>&& rows);  // the same, keeping `rows` without a copy

  // Units finished by another process that arrive as records already encoded by record() (an MPI
  // worker's RESULT message): the text as received, checked and decoded once by parse_batch.
  struct Batch {
    std::string text;  // whole records, each byte for byte as record() writes it
    std::vector<std::pair<std::size_t, std::vector<RunRecord>>> units;  // in the order of `text`
  };

  // Checks and decodes `text`, which must be one or more whole records and nothing else: each
  // intact (its CRC-32 matches, it ends with LF), parsing, passing `check` (when given) and of a
  // unit not already in the batch. Throws InputError naming `source` and the 1-based record, on
  // the first that is not: "MPI result from rank 3:2: unit '17': damaged record (checksum
  // mismatch); nothing of this batch is recorded" (a damaged record's unit as its index field
  // reads), "...: unit 17: the record does not belong to it: ...". It writes nothing. Decodes every
  // record exactly once.
  static Batch parse_batch(std::string text, const std::string& source, const RecordCheck& check = {});

  // Appends a whole batch with one write and one flush to the operating system: its text
  // verbatim, so the journal holds the same bytes as append() of each unit in turn. Then keeps its
  // rows (moved, not copied). A crash mid-write can tear only the batch's last record written,
  // which is dropped on resume like any torn tail. Throws std::runtime_error when the write fails,
  // and then refuses later appends as append() does.
  void append_batch(Batch&& batch);

  // The header line (with its LF) of a journal of the study with hash `study_hash`.
  static std::string header(const std::string& study_hash);

  // Parses records (exposed for merge, MPI messages and tests); a header line first, if any, is
  // skipped without checking its study. Throws InputError on damage before the end, naming
  // `source` (the file, in messages) and the 1-based line; also for a unit recorded twice and a
  // record failing `check`. *intact_bytes receives the length of the intact prefix, *torn whether
  // a torn last record was left out.
  static Units parse(const std::string& text, std::size_t* intact_bytes, bool* torn,
                     const std::string& source = "units.journal", const RecordCheck& check = {});

  // A whole journal file: its header must name format 2 and `study_hash` (InputError at line 1
  // otherwise), then parse(). An empty text, or a header torn before its LF, has no records
  // (*intact_bytes = 0, and *torn is set for a torn header).
  static Units parse_file(const std::string& text, const std::string& study_hash, std::size_t* intact_bytes,
                          bool* torn, const std::string& source = "units.journal", const RecordCheck& check = {});

  // One record (a whole line, with its LF) as append() writes it.
  static std::string record(std::size_t unit_index, const std::vector<RunRecord>& rows);

  // True when a process holds the journal at `file` open for writing (its lock is taken). Reads
  // nothing and changes nothing; false when the file does not exist or locks are not supported.
  // InputError naming the file when it is not a regular file (a pipe would block the open).
  static bool in_use(const std::filesystem::path& file);

 private:
  void write_flushed(std::string_view text);

  Units units_;
  std::FILE* file_ = nullptr;
  bool torn_ = false;
  std::size_t size_ = 0;     // bytes of whole records (and the header) in the file
  bool broken_ = false;      // a write failed: no more appends
  std::string broken_why_;   // what failed, for the refusals that follow
};

}  // namespace dobudget::io
