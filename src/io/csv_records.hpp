// Reading a CSV file of fixed columns, record by record, as RFC 4180 defines the format
// (Shafranovich, "Common Format and MIME Type for Comma-Separated Values (CSV) Files", RFC 4180,
// 2005, section 2): fields separated by commas; a field may be enclosed in double quotes, and then
// may hold commas, line breaks and double quotes (each written as two: "a ""b""" is a "b");
// records end with CRLF (LF alone is accepted too, as every spreadsheet writes it on Unix).
// Beyond RFC 4180, for files that people and programs really write:
//   * a UTF-8 byte-order mark (EF BB BF) at the start is skipped; a UTF-16 one is refused by name;
//   * empty lines (nothing between two line ends) are skipped;
//   * a double quote inside an unquoted field, text after a closing quote and a quote left open at
//     the end of the file are refused (RFC 4180 allows none of them), with the line.
// The file is read in chunks of 1 MiB (never whole), from a regular file only (regular_file.hpp),
// and refused when it holds more than `max_bytes` (checked before reading, and again while reading,
// in case it grows). Every field is bounded (max_field_bytes) before it can grow.
// Every problem is an InputError "FILE:LINE: COLUMN: problem" (input_error.hpp), LINE the 1-based
// line where the record starts.
#pragma once
#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

namespace dobudget::io {

class CsvRecords {
 public:
  // The longest field: 4096 bytes (the readers bound their own columns further).
  static constexpr std::size_t max_field_bytes = 4096;

  // Opens `file` and reads its header, which must be exactly `columns` (after unquoting).
  // `what` names the file in messages ("episodes file"). Throws InputError when the file cannot
  // be read, is too large, is empty or its header is not `columns`.
  CsvRecords(const std::filesystem::path& file, std::uintmax_t max_bytes, std::vector<std::string> columns,
             std::string what);
  ~CsvRecords();
  CsvRecords(const CsvRecords&) = delete;
  CsvRecords& operator=(const CsvRecords&) = delete;

  // The next record, exactly columns().size() fields, into the first columns().size() entries of
  // `fields` (which may hold one more, unused: the strings are reused); false at the end of the
  // file. A record of fewer or more fields is refused: "LINE: regime: is missing (...)",
  // "LINE: column 6: is one column too many (...)".
  bool next(std::vector<std::string>& fields);

  int line() const { return record_line_; }  // where the last record read starts (1: the header)
  const std::string& file() const { return name_; }
  const std::vector<std::string>& columns() const { return columns_; }

  [[noreturn]] void fail(int line, const std::string& column, const std::string& message) const;

 private:
  int get();  // the next byte, or -1 at the end of the file
  bool fill();
  // Reads one record into fields (any number of them, at most columns + 1 kept); false at the end.
  bool read_record(std::vector<std::string>& fields, std::size_t& count);
  std::string column_name(std::size_t k) const;

  std::string name_, what_;
  std::vector<std::string> columns_;
  std::uintmax_t max_bytes_ = 0, read_ = 0;
  int fd_ = -1;
  std::vector<char> buffer_;
  std::size_t pos_ = 0, end_ = 0;
  bool eof_ = false;
  int current_line_ = 1, record_line_ = 0;
};

// `text` as one field of a CSV file: as it is when it holds no comma, double quote, CR or LF (and
// does not start or end with a space), otherwise enclosed in double quotes with each double quote
// doubled (RFC 4180, section 2, rules 6 and 7).
std::string csv_field(const std::string& text);

}  // namespace dobudget::io
