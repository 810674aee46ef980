// Reading RFC 4180 records (csv_records.hpp): Shafranovich, "Common Format and MIME Type for
// Comma-Separated Values (CSV) Files", RFC 4180, 2005, section 2, rules 1-7, and what the reader
// adds (byte-order mark, LF, empty lines); csv_field's quoting reads back.
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "io/csv_records.hpp"
#include "io/input_error.hpp"
#include "temp_dir.hpp"

using dobudget::io::CsvRecords;
using dobudget::test::TempDir;

namespace {

struct Record {
  int line;
  std::vector<std::string> fields;
};

std::vector<Record> records_of(const std::string& text) {
  TempDir dir;
  CsvRecords csv(dir.write("f.csv", text), 1 << 20, {"a", "b"}, "test file");
  std::vector<Record> out;
  std::vector<std::string> f;
  while (csv.next(f)) out.push_back({csv.line(), {f[0], f[1]}});
  return out;
}

}  // namespace

TEST_CASE("RFC 4180 records: quoted line breaks, doubled quotes, CRLF, lines counted", "[csv]") {
  // Rule 6's example, "aaa","b CRLF bb","ccc", in two columns; rule 7's "b""bb".
  const auto r = records_of("a,b\r\n\"aaa\",\"b\r\nbb\"\r\n\"b\"\"bb\",\r\n\r\nx,\"\"\ny,z");
  REQUIRE(r.size() == 4);
  CHECK(r[0].line == 2);
  CHECK(r[0].fields == std::vector<std::string>{"aaa", "b\r\nbb"});
  CHECK(r[1].line == 4);  // the quoted line break counted
  CHECK(r[1].fields == std::vector<std::string>{"b\"bb", ""});
  CHECK(r[2].line == 6);  // the empty line 5 skipped
  CHECK(r[2].fields == std::vector<std::string>{"x", ""});
  CHECK(r[3].line == 7);  // no line end after the last record (rule 2)
  CHECK(r[3].fields == std::vector<std::string>{"y", "z"});
}

TEST_CASE("csv_field quotes what RFC 4180 requires and reads back", "[csv]") {
  using dobudget::io::csv_field;
  CHECK(csv_field("plain") == "plain");
  CHECK(csv_field("a,b") == "\"a,b\"");
  CHECK(csv_field("say \"hi\"") == "\"say \"\"hi\"\"\"");
  CHECK(csv_field("two\nlines") == "\"two\nlines\"");
  const std::vector<std::string> texts{"a,b", "\"", "x\r\ny", " lead", "", "\xC3\xA9"};
  std::string text = "a,b\n";
  for (const auto& t : texts) text += csv_field(t) + "," + csv_field(t + t) + "\n";
  const auto r = records_of(text);
  REQUIRE(r.size() == texts.size());
  for (std::size_t k = 0; k < texts.size(); ++k) CHECK(r[k].fields == std::vector<std::string>{texts[k], texts[k] + texts[k]});
}
