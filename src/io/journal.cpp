#include "io/journal.hpp"

#include <boost/crc.hpp>
#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cstring>
#include <new>
#include <stdexcept>

#include "io/csv.hpp"
#include "io/input_error.hpp"
#include "io/regular_file.hpp"
#include "io/runs_table.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {
namespace {

constexpr std::string_view header_word = "dobudget-journal ";

// CRC-32 of "<index field> TAB <payload>": the whole record but its checksum field.
std::uint32_t record_crc(std::string_view index, std::string_view payload) {
  boost::crc_32_type crc;
  crc.process_bytes(index.data(), index.size());
  crc.process_byte('\t');
  crc.process_bytes(payload.data(), payload.size());
  return crc.checksum();
}

std::string payload(const std::vector<RunRecord>& rows) {
  std::string p;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (i > 0) p += ';';
    const std::string line = runs_line(rows[i]);
    // ';' separates rows and LF records: a row holding either could not be read back.
    if (line.find_first_of(";\n") != std::string::npos)
      throw std::logic_error("a runs.csv row holds ';' or a line break, which units.journal cannot store: " + line);
    p += line + "," + csv_number(rows[i].fit_seconds);
  }
  return p;
}

// The rows of a payload; throws (InputError or std::runtime_error) on anything malformed. Views
// into the text, no copies (rank 0 of an MPI run decodes every row a worker sends). Nothing is
// reserved ahead: the vector grows with the rows that parse, so a hostile record of many ';'
// costs no more memory than the rows it really holds.
std::vector<RunRecord> parse_payload(std::string_view p) {
  std::vector<RunRecord> rows;
  std::size_t start = 0;
  while (start <= p.size()) {
    std::size_t end = p.find(';', start);
    if (end == std::string_view::npos) end = p.size();
    const std::string_view row = p.substr(start, end - start);
    const std::size_t comma = row.rfind(',');
    if (comma == std::string_view::npos) throw std::runtime_error("malformed row");
    RunRecord r = parse_runs_line(row.substr(0, comma));
    const char* first = row.data() + comma + 1;
    const char* last = row.data() + row.size();
    const auto parsed = std::from_chars(first, last, r.fit_seconds);
    if (first == last || parsed.ec != std::errc() || parsed.ptr != last) throw std::runtime_error("malformed fit_seconds");
    rows.push_back(std::move(r));
    start = end + 1;
  }
  return rows;
}

// The checksum field: exactly 8 lowercase hex digits, as record() writes it ("{:08x}").
bool crc_field_matches(std::string_view field, std::uint32_t crc) {
  if (field.size() != 8) return false;
  std::uint32_t x = 0;
  for (char c : field) {
    const int d = c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
    if (d < 0) return false;
    x = x << 4 | static_cast<std::uint32_t>(d);
  }
  return x == crc;
}

// The unit index field: decimal digits only.
std::size_t parse_index(std::string_view s) {
  std::size_t i = 0;
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), i);
  if (s.empty() || s[0] == '-' || ec != std::errc() || end != s.data() + s.size())
    throw std::runtime_error("malformed unit index");
  return i;
}

// One record without its LF: "<index> TAB <CRC-32> TAB <payload>". Sets *index and returns the
// rows; throws (InputError or std::runtime_error) when it is damaged. The CRC is checked first, so
// nothing of a damaged record is decoded.
std::vector<RunRecord> decode_record(std::string_view rec, std::size_t* index) {
  const std::size_t t1 = rec.find('\t');
  const std::size_t t2 = t1 == std::string_view::npos ? t1 : rec.find('\t', t1 + 1);
  if (t1 == std::string_view::npos || t2 == std::string_view::npos) throw std::runtime_error("missing fields");
  const std::string_view body = rec.substr(t2 + 1);
  if (!crc_field_matches(rec.substr(t1 + 1, t2 - t1 - 1), record_crc(rec.substr(0, t1), body)))
    throw std::runtime_error("checksum mismatch");
  *index = parse_index(rec.substr(0, t1));
  return parse_payload(body);
}

// What a parse error says about the record: "checksum mismatch", "model_kl: must be at least 0, ...".
std::string reason(const std::exception& e) {
  if (const auto* ie = dynamic_cast<const InputError*>(&e))
    return ie->key.empty() ? ie->message : ie->key + ": " + ie->message;
  return e.what();
}

// The length of the header line (with its LF) when `text` starts with one, else 0.
std::size_t header_length(const std::string& text) {
  if (text.compare(0, header_word.size(), header_word) != 0) return 0;
  const std::size_t nl = text.find('\n');
  return nl == std::string::npos ? 0 : nl + 1;
}

}  // namespace

std::string Journal::header(const std::string& study_hash) {
  return fmt::format("{}{} study {}\n", header_word, format_version, study_hash);
}

std::string Journal::record(std::size_t unit_index, const std::vector<RunRecord>& rows) {
  const std::string index = std::to_string(unit_index);
  const std::string body = payload(rows);
  return fmt::format("{}\t{:08x}\t{}\n", index, record_crc(index, body), body);
}

Journal::Units Journal::parse(const std::string& text, std::size_t* intact_bytes, bool* torn, const std::string& source,
                              const RecordCheck& check) {
  Units units;
  std::map<std::size_t, int> line_of;  // unit index -> the line that recorded it
  *torn = false;
  std::size_t pos = header_length(text);
  int line = pos > 0 ? 1 : 0;
  const bool header_begun = header_word.compare(0, std::min(text.size(), header_word.size()), text, 0,
                                                std::min(text.size(), header_word.size())) == 0;
  if (pos == 0 && !text.empty() && header_begun && text.find('\n') == std::string::npos) {
    // Only the beginning of a header line, without its LF: torn while the journal was created.
    *torn = true;
    *intact_bytes = 0;
    return units;
  }
  while (pos < text.size()) {
    ++line;
    const std::size_t nl = text.find('\n', pos);
    const bool last = nl == std::string::npos || nl + 1 == text.size();
    std::size_t index = 0;
    std::vector<RunRecord> rows;
    try {
      if (nl == std::string::npos) throw std::runtime_error("no end of line");
      rows = decode_record(std::string_view(text.data() + pos, nl - pos), &index);
    } catch (const std::bad_alloc&) {
      throw;  // out of memory is not a damaged record: never truncated away as a torn tail
    } catch (const std::exception& e) {
      if (!last)
        throw InputError(source, line, "",
                         fmt::format("damaged record ({}); records are only ever appended, so an interruption can "
                                     "tear only the last one: this file was altered, or the disk is failing",
                                     reason(e)));
      *torn = true;
      break;
    }
    // An intact record: it must be new, and its unit's.
    if (const auto seen = line_of.find(index); seen != line_of.end())
      throw InputError(source, line, "",
                       fmt::format("unit {} is recorded twice (lines {} and {}); a unit is only ever recorded once, "
                                   "so this file was altered",
                                   index, seen->second, line));
    if (check) {
      const std::string problem = check(index, rows);
      if (!problem.empty())
        throw InputError(source, line, "", fmt::format("the record of unit {} does not belong to it: {}", index, problem));
    }
    line_of[index] = line;
    units[index] = std::move(rows);
    pos = nl + 1;
  }
  *intact_bytes = pos;
  return units;
}

Journal::Units Journal::parse_file(const std::string& text, const std::string& study_hash, std::size_t* intact_bytes,
                                   bool* torn, const std::string& source, const RecordCheck& check) {
  *intact_bytes = 0;
  *torn = false;
  if (text.empty()) return {};
  const std::string expected = header(study_hash);
  const std::size_t nl = text.find('\n');
  if (nl == std::string::npos && expected.compare(0, text.size(), text) == 0) {
    *torn = true;  // the header itself was torn: nothing was recorded yet
    return {};
  }
  const std::string first = text.substr(0, nl == std::string::npos ? text.size() : nl + 1);
  if (first != expected) {
    const std::string shown = first.substr(0, std::min<std::size_t>(first.find('\n'), 60));
    if (first.compare(0, header_word.size(), header_word) != 0)
      throw InputError(source, 1, "",
                       fmt::format("has no journal header (expected '{}'): it was written by an older dobudget, or it "
                                   "is not a dobudget journal; use a fresh --out directory",
                                   expected.substr(0, expected.size() - 1)));
    const std::string version_prefix = fmt::format("{}{} study ", header_word, format_version);
    if (first.compare(0, version_prefix.size(), version_prefix) != 0)
      throw InputError(source, 1, "",
                       fmt::format("is a journal of another format ('{}'; this dobudget reads format {}); use the "
                                   "dobudget that wrote it, or a fresh --out directory",
                                   shown, format_version));
    throw InputError(source, 1, "",
                     fmt::format("belongs to another study (its header names study hash {}, this study has hash {}); "
                                 "use a fresh --out directory",
                                 shown.substr(version_prefix.size()), study_hash));
  }
  return parse(text, intact_bytes, torn, source, check);
}

namespace {

// Opens `file` for reading and appending (creating it if needed) and takes its exclusive lock, the
// pattern of a lock file that others may remove: after the lock is taken, the path must still name
// the file locked (else it was removed or replaced meanwhile, and we open again). Only a regular
// file, never through a symbolic link (open_regular_file, Links::refuse): a link or a pipe named
// units.journal is refused (InputError naming it), so records go nowhere but into the directory,
// and nothing blocks. *created: this call created the file. Returns the descriptor; throws when
// another process holds the lock.
int open_locked(const std::filesystem::path& file, bool* created) {
  for (int attempt = 0; attempt < 100; ++attempt) {
    *created = true;
    int fd = open_regular_file(file, O_RDWR | O_APPEND | O_CREAT | O_EXCL, Links::refuse);
    if (fd < 0 && errno == EEXIST) {
      *created = false;
      fd = open_regular_file(file, O_RDWR | O_APPEND, Links::refuse);
    }
    if (fd < 0) {
      if (errno == ENOENT) continue;  // removed between the two opens
      throw std::runtime_error("cannot open " + file.string() + " for appending");
    }
    if (::flock(fd, LOCK_EX | LOCK_NB) != 0 && errno == EWOULDBLOCK) {
      ::close(fd);
      throw std::runtime_error(file.parent_path().string() + " is being written by another dobudget process (" +
                               file.string() +
                               " is locked: a run on the same directory is still going); wait for it to finish, or "
                               "stop it, then run again");
    }
    struct stat held {}, named {};
    if (::fstat(fd, &held) == 0 && ::lstat(file.c_str(), &named) == 0 && held.st_dev == named.st_dev &&
        held.st_ino == named.st_ino)
      return fd;
    ::close(fd);  // the file we locked is no longer the journal: try again
  }
  throw std::runtime_error("cannot lock " + file.string() + ": it keeps being removed or replaced");
}

}  // namespace

Journal::Journal(const std::filesystem::path& file, const std::string& study_hash,
                 const std::function<void()>& while_locked, const RecordCheck& check) {
  bool created = false;
  const int fd = open_locked(file, &created);
  file_ = ::fdopen(fd, "ab");
  if (file_ == nullptr) {
    ::close(fd);
    throw std::runtime_error("cannot open " + file.string() + " for appending");
  }
  // Unbuffered: a failed write leaves nothing in a stdio buffer that fclose could write later.
  std::setvbuf(file_, nullptr, _IONBF, 0);
  try {
    if (while_locked) while_locked();
    const std::string text = read_descriptor(fd, file);  // what was locked, not a second lookup of the name
    std::size_t intact = 0;
    try {
      units_ = parse_file(text, study_hash, &intact, &torn_, file.string(), check);
    } catch (const InputError& e) {
      throw InputError(e.file, e.line, e.key,
                       e.line > 1 ? e.message + ". Delete that line to have its unit computed again, or use a fresh "
                                                "--out directory"
                                  : e.message);
    }
    if (intact < text.size() && ::ftruncate(fd, static_cast<off_t>(intact)) != 0)
      throw std::runtime_error("cannot truncate the torn record off " + file.string());
    size_ = intact;
    if (intact == 0) {
      const std::string h = header(study_hash);
      if (std::fwrite(h.data(), 1, h.size(), file_) != h.size() || std::fflush(file_) != 0)
        throw std::runtime_error("cannot write " + file.string());
      size_ = h.size();
    }
  } catch (...) {
    // Leave nothing behind: a journal this call created and nothing was written to is removed
    // (still under the lock; a process waiting for it finds the path gone and opens afresh).
    std::error_code ec;
    struct stat held {};
    if (created && ::fstat(fd, &held) == 0 && held.st_size == 0) std::filesystem::remove(file, ec);
    std::fclose(file_);
    file_ = nullptr;
    throw;
  }
}

Journal::~Journal() {
  if (file_ != nullptr) std::fclose(file_);  // also releases the lock
}

bool Journal::in_use(const std::filesystem::path& file) {
  // A regular file only (a pipe would block open(2)): InputError for anything else.
  const int fd = open_regular_file(file, O_RDONLY, Links::follow);
  if (fd < 0) return false;
  bool busy = false;
  if (::flock(fd, LOCK_SH | LOCK_NB) != 0) busy = errno == EWOULDBLOCK;
  ::close(fd);  // releases the shared lock if it was taken
  return busy;
}

// One write of `text` (the stream is unbuffered: one write(2), retried by stdio on a partial
// write) and one flush to the operating system. After a failure (disk full, a file size limit) the
// journal is cut back to its last whole record, when ftruncate allows, and refuses every later
// append: otherwise a later, shorter record could land after a partial one, which resume would
// refuse as an altered journal. Left as the last line, a partial record is a torn tail.
void Journal::write_flushed(std::string_view text) {
  if (broken_)
    throw std::runtime_error("units.journal: an earlier append failed, so no more records are written (" + broken_why_ +
                             ")");
  if (std::fwrite(text.data(), 1, text.size(), file_) != text.size() || std::fflush(file_) != 0) {
    const int error = errno;
    broken_ = true;
    std::clearerr(file_);
    const bool cut = ::ftruncate(::fileno(file_), static_cast<off_t>(size_)) == 0;
    broken_why_ = fmt::format("writing a record failed: {}; {}", std::strerror(error),
                              cut ? "the journal was cut back to its last whole record"
                                  : "its last record may be partial and is dropped on resume");
    throw std::runtime_error("cannot append to units.journal: " + broken_why_);
  }
  size_ += text.size();
}

void Journal::append(std::size_t unit_index, const std::vector<RunRecord>& rows) {
  write_flushed(record(unit_index, rows));
  units_[unit_index] = rows;
}

void Journal::append(std::size_t unit_index, std::vector<RunRecord>&& rows) {
  write_flushed(record(unit_index, rows));
  units_[unit_index] = std::move(rows);
}

Journal::Batch Journal::parse_batch(std::string text, const std::string& source, const RecordCheck& check) {
  Batch batch;
  std::map<std::size_t, int> line_of;  // unit index -> the record of the batch that holds it
  std::size_t pos = 0;
  int line = 0;
  if (text.empty()) throw InputError(source, 0, "", "holds no unit record");
  while (pos < text.size()) {
    ++line;
    const std::size_t nl = text.find('\n', pos);
    const std::string_view rec(text.data() + pos, (nl == std::string::npos ? text.size() : nl) - pos);
    std::size_t index = 0;
    std::vector<RunRecord> rows;
    try {
      if (nl == std::string::npos) throw std::runtime_error("no end of line");
      rows = decode_record(rec, &index);
    } catch (const std::bad_alloc&) {
      throw;  // out of memory, not a damaged record
    } catch (const std::exception& e) {
      // The unit as the damaged record's index field reads (it may be the damaged part).
      const std::string_view field = rec.substr(0, std::min(rec.find('\t'), std::size_t{20}));
      throw InputError(source, line, "",
                       fmt::format("unit '{}': damaged record ({}); nothing of this batch is recorded",
                                   printable_line(field), reason(e)));
    }
    if (const auto seen = line_of.find(index); seen != line_of.end())
      throw InputError(source, line, "",
                       fmt::format("unit {}: recorded twice in one batch (records {} and {}); nothing of this batch "
                                   "is recorded",
                                   index, seen->second, line));
    if (check) {
      const std::string problem = check(index, rows);
      if (!problem.empty())
        throw InputError(source, line, "",
                         fmt::format("unit {}: the record does not belong to it: {}; nothing of this batch is recorded",
                                     index, problem));
    }
    line_of.emplace(index, line);
    batch.units.emplace_back(index, std::move(rows));
    pos = nl + 1;
  }
  batch.text = std::move(text);
  return batch;
}

void Journal::append_batch(Batch&& batch) {
  write_flushed(batch.text);
  for (auto& [index, rows] : batch.units) units_[index] = std::move(rows);
}

}  // namespace dobudget::io
