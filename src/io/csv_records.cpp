#include "io/csv_records.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <fmt/format.h>

#include <cerrno>
#include <utility>

#include "io/input_error.hpp"
#include "io/regular_file.hpp"
#include "io/text_escape.hpp"
#include "io/yaml_input.hpp"

namespace dobudget::io {
namespace {

constexpr std::size_t chunk_bytes = std::size_t{1} << 20;

// A field as quoted in a message: one printable line, at most 40 bytes shown.
std::string shown(const std::string& s) {
  const std::string line = printable_line(s.size() <= 40 ? s : s.substr(0, 37) + "...");
  return "'" + line + "'";
}

}  // namespace

CsvRecords::CsvRecords(const std::filesystem::path& file, std::uintmax_t max_bytes, std::vector<std::string> columns,
                       std::string what)
    : name_(file.string()), what_(std::move(what)), columns_(std::move(columns)), max_bytes_(max_bytes) {
  struct stat info {};
  try {
    fd_ = open_regular_file(file, O_RDONLY, Links::follow, &info);
  } catch (const InputError& e) {
    throw InputError(name_, 0, "", "cannot read the " + what_ + ": " + e.message);
  }
  if (fd_ < 0)
    throw InputError(name_, 0, "",
                     "cannot read the " + what_ + ": " + (errno == ENOENT ? "no such file" : "cannot be opened for reading"));
  if (static_cast<std::uintmax_t>(info.st_size) > max_bytes_) {
    ::close(fd_);
    fd_ = -1;
    throw InputError(name_, 0, "",
                     fmt::format("the {} is larger than {} MiB, the most dobudget reads (split the records, or keep "
                                 "fewer episodes)",
                                 what_, max_bytes_ >> 20));
  }
  buffer_.resize(chunk_bytes);
  try {
    const std::string header = input::join(columns_, ",");
    // Byte-order marks (The Unicode Standard, version 15.0, section 23.8): UTF-8's is skipped.
    if (fill() && end_ >= 2) {
      const auto b = [&](std::size_t i) { return static_cast<unsigned char>(buffer_[i]); };
      if (end_ >= 3 && b(0) == 0xEF && b(1) == 0xBB && b(2) == 0xBF) pos_ = 3;
      else if ((b(0) == 0xFF && b(1) == 0xFE) || (b(0) == 0xFE && b(1) == 0xFF))
        fail(1, "header", "the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8");
    }
    std::vector<std::string> fields;
    std::size_t count = 0;
    if (!read_record(fields, count))
      fail(1, "header", "the file is empty; expected the header line " + header + " and then one row per step");
    if (count != columns_.size())
      fail(record_line_, "header",
           fmt::format("has {} columns, expected {}: {}", count, columns_.size(), header));
    for (std::size_t k = 0; k < columns_.size(); ++k)
      if (fields[k] != columns_[k])
        fail(record_line_, "header",
             fmt::format("column {} is {}, expected '{}' (the header is {})", k + 1, shown(fields[k]), columns_[k],
                         header));
  } catch (...) {
    ::close(fd_);
    fd_ = -1;
    throw;
  }
}

CsvRecords::~CsvRecords() {
  if (fd_ >= 0) ::close(fd_);
}

void CsvRecords::fail(int line, const std::string& column, const std::string& message) const {
  throw InputError(name_, line, column, message);
}

bool CsvRecords::fill() {
  if (eof_) return false;
  for (;;) {
    const ssize_t n = ::read(fd_, buffer_.data(), buffer_.size());
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) throw InputError(name_, current_line_, "", "cannot read the " + what_ + ": read error");
    if (n == 0) {
      eof_ = true;
      return false;
    }
    read_ += static_cast<std::uintmax_t>(n);
    if (read_ > max_bytes_)
      throw InputError(name_, current_line_, "",
                       fmt::format("the {} grew beyond {} MiB while it was read", what_, max_bytes_ >> 20));
    pos_ = 0;
    end_ = static_cast<std::size_t>(n);
    return true;
  }
}

inline int CsvRecords::get() {
  if (pos_ == end_ && !fill()) return -1;
  return static_cast<unsigned char>(buffer_[pos_++]);
}

std::string CsvRecords::column_name(std::size_t k) const {
  return k < columns_.size() ? columns_[k] : fmt::format("column {}", k + 1);
}

// One record: fields separated by ',' and ended by LF, CRLF or the end of the file (RFC 4180,
// section 2, rules 1-7). `count` receives the number of fields; only the first columns + 1 are
// stored (a record of more is refused by the caller anyway).
bool CsvRecords::read_record(std::vector<std::string>& fields, std::size_t& count) {
  const std::size_t keep = columns_.size() + 1;
  if (fields.size() < keep) fields.resize(keep);
  int c = get();
  // Empty lines are skipped.
  for (;;) {
    if (c == '\n') {
      ++current_line_;
      c = get();
    } else if (c == '\r') {
      const int d = get();
      if (d != '\n') {  // a lone CR starts the record's first field
        if (d >= 0) --pos_;
        break;
      }
      ++current_line_;
      c = get();
    } else {
      break;
    }
  }
  if (c < 0) return false;
  record_line_ = current_line_;
  count = 0;
  for (;;) {
    std::string* field = count < keep ? &fields[count] : nullptr;
    if (field) field->clear();
    auto add = [&](int ch) {
      if (!field) return;
      if (field->size() >= max_field_bytes)
        fail(record_line_, column_name(count),
             fmt::format("is longer than {} bytes (no field of a {} needs that)", max_field_bytes, what_));
      field->push_back(static_cast<char>(ch));
    };
    if (c == '"') {  // quoted field (rule 5-7)
      const int start_line = current_line_;
      for (;;) {
        c = get();
        if (c < 0)
          fail(start_line, column_name(count),
               "a double quote opens this field and none closes it before the end of the file (RFC 4180: a quoted "
               "field ends with a double quote; a double quote inside it is written twice)");
        if (c == '"') {
          c = get();
          if (c == '"') {
            add('"');
            continue;
          }
          break;  // closing quote: c is what follows
        }
        if (c == '\n') ++current_line_;
        add(c);
      }
      if (c == '\r') {
        const int d = get();
        if (d == '\n' || d < 0) c = d;
        else fail(record_line_, column_name(count), "text after the closing double quote of a quoted field");
      }
      if (c != ',' && c != '\n' && c >= 0)
        fail(record_line_, column_name(count),
             "text after the closing double quote of a quoted field (RFC 4180: a quoted field holds the whole field; "
             "a double quote inside it is written twice)");
    } else {  // unquoted field (rule 4)
      for (;;) {
        if (c < 0 || c == ',' || c == '\n') break;
        if (c == '\r') {
          const int d = get();
          if (d == '\n' || d < 0) {
            c = d;
            break;
          }
          if (d >= 0) --pos_;  // a lone CR is part of the field (and refused by the readers as a control)
        }
        if (c == '"')
          fail(record_line_, column_name(count),
               "a double quote inside an unquoted field (RFC 4180: enclose the whole field in double quotes and write "
               "each double quote inside it twice)");
        add(c);
        c = get();
      }
    }
    ++count;
    if (c == ',') {
      c = get();
      continue;
    }
    if (c == '\n') ++current_line_;
    return true;  // c is '\n' or the end of the file
  }
}

bool CsvRecords::next(std::vector<std::string>& fields) {
  std::size_t count = 0;
  if (!read_record(fields, count)) return false;
  const std::size_t n = columns_.size();
  if (count < n)
    fail(record_line_, columns_[count],
         fmt::format("is missing: the row has {} {}, expected {} ({})", count, count == 1 ? "column" : "columns", n,
                     input::join(columns_, ",")));
  if (count > n)
    fail(record_line_, column_name(n),
         fmt::format("is {}: the row has {} columns, expected {} ({})",
                     count == n + 1 ? "one column too many" : "an extra column", count, n, input::join(columns_, ",")));
  return true;
}

std::string csv_field(const std::string& text) {
  const bool plain = text.find_first_of(",\"\r\n") == std::string::npos &&
                     (text.empty() || (text.front() != ' ' && text.back() != ' '));
  if (plain) return text;
  std::string out = "\"";
  for (char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

}  // namespace dobudget::io
