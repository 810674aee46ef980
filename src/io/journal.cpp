#include "io/journal.hpp"

#include <boost/crc.hpp>
#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <stdexcept>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "io/runs_table.hpp"

namespace dobudget::io {
namespace {

std::uint32_t crc32(std::string_view s) {
  boost::crc_32_type crc;
  crc.process_bytes(s.data(), s.size());
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

std::vector<RunRecord> parse_payload(const std::string& p) {
  std::vector<RunRecord> rows;
  std::size_t start = 0;
  while (start <= p.size()) {
    std::size_t end = p.find(';', start);
    if (end == std::string::npos) end = p.size();
    const std::string row = p.substr(start, end - start);
    const std::size_t comma = row.rfind(',');
    if (comma == std::string::npos) throw std::runtime_error("malformed row");
    RunRecord r = parse_runs_line(row.substr(0, comma));
    const char* first = row.data() + comma + 1;
    const char* last = row.data() + row.size();
    const auto parsed = std::from_chars(first, last, r.fit_seconds);
    if (first == last || parsed.ec != std::errc() || parsed.ptr != last) throw std::runtime_error("malformed fit_seconds");
    rows.push_back(r);
    start = end + 1;
  }
  return rows;
}

// The unit index field: decimal digits only (the checksum covers the payload, not the index).
std::size_t parse_index(std::string_view s) {
  std::size_t i = 0;
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), i);
  if (s.empty() || ec != std::errc() || end != s.data() + s.size()) throw std::runtime_error("malformed unit index");
  return i;
}

}  // namespace

std::string Journal::record(std::size_t unit_index, const std::vector<RunRecord>& rows) {
  const std::string body = payload(rows);
  return fmt::format("{}\t{:08x}\t{}\n", unit_index, crc32(body), body);
}

std::map<std::size_t, std::vector<RunRecord>> Journal::parse(const std::string& text, std::size_t* intact_bytes,
                                                             bool* torn, const std::string& source) {
  std::map<std::size_t, std::vector<RunRecord>> units;
  std::size_t pos = 0;
  *torn = false;
  int line = 0;
  while (pos < text.size()) {
    ++line;
    const std::size_t nl = text.find('\n', pos);
    const bool last = nl == std::string::npos || nl + 1 == text.size();
    try {
      if (nl == std::string::npos) throw std::runtime_error("no end of line");
      const std::string_view rec(text.data() + pos, nl - pos);
      const std::size_t t1 = rec.find('\t');
      const std::size_t t2 = t1 == std::string_view::npos ? t1 : rec.find('\t', t1 + 1);
      if (t1 == std::string_view::npos || t2 == std::string_view::npos) throw std::runtime_error("missing fields");
      const std::string body(rec.substr(t2 + 1));
      if (fmt::format("{:08x}", crc32(body)) != rec.substr(t1 + 1, t2 - t1 - 1))
        throw std::runtime_error("checksum mismatch");
      const std::size_t index = parse_index(rec.substr(0, t1));
      units[index] = parse_payload(body);
    } catch (const std::exception& e) {
      if (!last)
        throw std::runtime_error(fmt::format(
            "{}: record {} (line {}) is damaged ({}); records are only ever appended, so an interruption can tear "
            "only the last one: this file was altered, or the disk is failing",
            source, line, line, e.what()));
      *torn = true;
      break;
    }
    pos = nl + 1;
  }
  *intact_bytes = pos;
  return units;
}

Journal::Journal(const std::filesystem::path& file) {
  file_ = std::fopen(file.c_str(), "ab");
  if (file_ == nullptr) throw std::runtime_error("cannot open " + file.string() + " for appending");
  try {
    if (::flock(::fileno(file_), LOCK_EX | LOCK_NB) != 0 && errno == EWOULDBLOCK)
      throw std::runtime_error(file.string() +
                               " is being written by another dobudget process (a run on the same directory is still "
                               "going); wait for it to finish, or stop it, then run again");
    const std::string text = read_file(file);
    std::size_t intact = 0;
    try {
      units_ = parse(text, &intact, &torn_, file.string());
    } catch (const std::runtime_error& e) {
      throw std::runtime_error(std::string(e.what()) +
                               ". Delete that line to have its unit computed again, or use a fresh --out directory");
    }
    if (intact < text.size()) std::filesystem::resize_file(file, intact);
  } catch (...) {
    std::fclose(file_);
    file_ = nullptr;
    throw;
  }
}

Journal::~Journal() {
  if (file_ != nullptr) std::fclose(file_);  // also releases the lock
}

bool Journal::in_use(const std::filesystem::path& file) {
  const int fd = ::open(file.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  bool busy = false;
  if (::flock(fd, LOCK_SH | LOCK_NB) != 0) busy = errno == EWOULDBLOCK;
  ::close(fd);  // releases the shared lock if it was taken
  return busy;
}

void Journal::append(std::size_t unit_index, const std::vector<RunRecord>& rows) {
  const std::string rec = record(unit_index, rows);
  if (std::fwrite(rec.data(), 1, rec.size(), file_) != rec.size() || std::fflush(file_) != 0)
    throw std::runtime_error("cannot append to units.journal");
  units_[unit_index] = rows;
}

}  // namespace dobudget::io
