// The unit journal (io/journal.hpp): records read back bit for bit, a torn last record is dropped
// (never half-read) and the file truncated to its intact prefix, a damaged record before the last
// is an error naming the file and the line, one flipped bit anywhere in a record or the header is
// caught, a journal of another study (or without a header) is refused, a record that is not its
// unit's or repeats a unit is refused, and one writer at a time. A batch (an MPI worker's records,
// appended with one write) holds the same bytes as its records appended one by one, and a
// garbled record in it is refused before anything of the batch is written.
#include <boost/crc.hpp>
#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <csignal>

#include <bit>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>

#include "input_error_of.hpp"
#include "io/journal.hpp"

namespace fs = std::filesystem;
using dobudget::RunRecord;
using dobudget::Strategy;
using dobudget::io::Journal;
using dobudget::test::error_of;

namespace {

const std::string hash = "0123456789abcdef";  // the study hash the journals below belong to

struct TempDir {
  fs::path path;
  explicit TempDir(const std::string& name) {
    path = fs::temp_directory_path() / ("dobudget-test-journal-" + name + "-" + std::to_string(::getpid()));
    fs::remove_all(path);
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
};

std::string slurp(const fs::path& f) {
  std::ifstream in(f, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

void write(const fs::path& f, const std::string& text) { std::ofstream(f, std::ios::binary) << text; }

std::uint64_t bits(double x) { return std::bit_cast<std::uint64_t>(x); }

// Rows of one unit with awkward doubles: values with no short decimal form, extremes, negative
// zero, infinity, missing values (each within its column's range: runs_table.hpp).
std::vector<RunRecord> unit_rows(int replicate) {
  const std::vector<double> values{0.1,
                                   1.0 / 3.0,
                                   std::nextafter(1.0, 2.0),
                                   2.2250738585072014e-308,  // smallest normal
                                   1.7976931348623157e308,
                                   -0.0,
                                   -1234.5678901234567,
                                   6.02214076e23,
                                   std::numeric_limits<double>::infinity()};
  std::vector<RunRecord> rows;
  int k = 0;
  for (Strategy st : {Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware})
    for (int logged : {0, 1000})
      for (int pilot : {10, 30, 100}) {
        RunRecord r;
        r.scenario = 1;
        r.environment = 2;
        r.replicate = replicate;
        r.strategy = st;
        r.logged = logged;
        r.pilot = pilot;
        const double v = values[static_cast<std::size_t>(k) % values.size()];
        r.model_kl = std::signbit(v) && v != 0.0 ? -v : v;  // >= 0, -0.0 and +inf included
        const double g = -values[static_cast<std::size_t>(k + 3) % values.size()];
        if (k % 4 != 3) r.return_gap = std::isfinite(g) ? g : 0.5;  // finite
        r.loglik = -values[static_cast<std::size_t>(k + 5) % values.size()] * 1000.0;
        r.iterations = k * 7;
        r.converged = k % 3 != 0;
        if (k % 5 == 1) r.note = "no room for planning";
        r.fit_seconds = 1.0 / (k + 3.0);
        rows.push_back(r);
        ++k;
      }
  return rows;
}

void require_same(const std::vector<RunRecord>& a, const std::vector<RunRecord>& b) {
  REQUIRE(a.size() == b.size());
  for (std::size_t i = 0; i < a.size(); ++i) {
    INFO("row " << i);
    CHECK(a[i].scenario == b[i].scenario);
    CHECK(a[i].environment == b[i].environment);
    CHECK(a[i].replicate == b[i].replicate);
    CHECK(a[i].strategy == b[i].strategy);
    CHECK(a[i].logged == b[i].logged);
    CHECK(a[i].pilot == b[i].pilot);
    REQUIRE(a[i].model_kl.has_value() == b[i].model_kl.has_value());
    if (a[i].model_kl) CHECK(bits(*a[i].model_kl) == bits(*b[i].model_kl));
    REQUIRE(a[i].return_gap.has_value() == b[i].return_gap.has_value());
    if (a[i].return_gap) CHECK(bits(*a[i].return_gap) == bits(*b[i].return_gap));
    CHECK(bits(a[i].loglik) == bits(b[i].loglik));
    CHECK(a[i].iterations == b[i].iterations);
    CHECK(a[i].converged == b[i].converged);
    CHECK(a[i].note == b[i].note);
    CHECK(bits(a[i].fit_seconds) == bits(b[i].fit_seconds));
  }
}

// A check as plan_study makes it: unit i is replicate i of (scenario 1, environment 2).
std::string replicate_check(std::size_t index, const std::vector<RunRecord>& rows) {
  if (index > 9) return "the study has units 0 to 9 only";
  for (const auto& r : rows)
    if (r.replicate != static_cast<int>(index)) return "it holds a row of replicate " + std::to_string(r.replicate);
  return {};
}

}  // namespace

TEST_CASE("journal: records read back bit for bit, after a header naming the study", "[io][journal]") {
  TempDir d("roundtrip");
  const fs::path file = d.path / "units.journal";
  {
    Journal j(file, hash);
    CHECK(j.units().empty());
    CHECK_FALSE(j.torn_tail_dropped());
    j.append(4, unit_rows(0));
    j.append(0, unit_rows(1));
    j.append(17, unit_rows(2));
  }
  const std::string text = slurp(file);
  CHECK(std::count(text.begin(), text.end(), '\n') == 4);
  CHECK(Journal::header(hash) == "dobudget-journal 2 study 0123456789abcdef\n");
  CHECK(text.rfind(Journal::header(hash) + Journal::record(4, unit_rows(0)), 0) == 0);  // append writes record() as is

  Journal j(file, hash);
  CHECK_FALSE(j.torn_tail_dropped());
  REQUIRE(j.units().size() == 3);
  require_same(j.units().at(4), unit_rows(0));
  require_same(j.units().at(0), unit_rows(1));
  require_same(j.units().at(17), unit_rows(2));
  CHECK(slurp(file) == text);  // reading changes nothing

  std::size_t intact = 0;
  bool torn = true;
  CHECK(Journal::parse_file(text, hash, &intact, &torn).size() == 3);
  CHECK(intact == text.size());
  CHECK_FALSE(torn);
  CHECK(Journal::parse(text, &intact, &torn).size() == 3);  // records only: the header is skipped
}

TEST_CASE("journal: a torn last record is dropped, truncated away, and never half-read", "[io][journal]") {
  TempDir d("torn");
  const fs::path file = d.path / "units.journal";
  const std::string two = Journal::header(hash) + Journal::record(0, unit_rows(0)) + Journal::record(1, unit_rows(1));
  const std::string third = Journal::record(2, unit_rows(2));

  // Every prefix of the third record (no end of line yet), and the whole of it with its CRC
  // corrupted, leaves exactly the first two units.
  std::vector<std::string> tails;
  for (std::size_t cut : {std::size_t{1}, std::size_t{2}, third.find('\t') + 3, third.size() / 2, third.size() - 1})
    tails.push_back(third.substr(0, cut));
  std::string bad_crc = third;
  bad_crc[third.find('\t') + 1] = bad_crc[third.find('\t') + 1] == 'f' ? '0' : 'f';
  tails.push_back(bad_crc);
  tails.push_back("2\tnot a record\n");
  for (const std::string& tail : tails) {
    INFO("tail: " << tail.substr(0, 60));
    std::size_t intact = 0;
    bool torn = false;
    const auto parsed = Journal::parse_file(two + tail, hash, &intact, &torn);
    CHECK(torn);
    CHECK(intact == two.size());
    CHECK(parsed.size() == 2);
    CHECK(parsed.count(2) == 0);

    write(file, two + tail);
    {
      Journal j(file, hash);
      CHECK(j.torn_tail_dropped());
      CHECK(j.units().size() == 2);
      CHECK(slurp(file) == two);  // truncated to the intact prefix
      j.append(2, unit_rows(2));  // the unit computed again
    }
    Journal again(file, hash);
    CHECK_FALSE(again.torn_tail_dropped());
    REQUIRE(again.units().size() == 3);
    require_same(again.units().at(2), unit_rows(2));
  }
}

TEST_CASE("journal: a damaged record before the last is an error naming the file and the line", "[io][journal]") {
  TempDir d("damaged");
  const fs::path file = d.path / "units.journal";
  const std::string h = Journal::header(hash), r0 = Journal::record(0, unit_rows(0)),
                    r1 = Journal::record(1, unit_rows(1)), r2 = Journal::record(2, unit_rows(2));
  std::string damaged = r1;
  damaged[damaged.size() / 2] = damaged[damaged.size() / 2] == '7' ? '8' : '7';  // a changed digit: CRC mismatch
  const std::string text = h + r0 + damaged + r2;

  std::size_t intact = 0;
  bool torn = false;
  const auto e = error_of([&] { Journal::parse_file(text, hash, &intact, &torn, "runs/x/units.journal"); });
  CHECK(e.file == "runs/x/units.journal");
  CHECK(e.line == 3);  // the header is line 1
  CHECK_THAT(e.what(), Catch::StartsWith("runs/x/units.journal:3: damaged record (checksum mismatch)"));
  CHECK(error_of([&] { Journal::parse_file(h + r0 + "x\t00000000\t\n" + r2, hash, &intact, &torn); }).line == 3);
  CHECK(error_of([&] { Journal::parse_file(h + r0 + "\n" + r2, hash, &intact, &torn); }).line == 3);  // an empty line

  write(file, text);
  CHECK_THROWS_WITH(Journal(file, hash), Catch::Contains(file.string() + ":3: damaged record"));
  CHECK(slurp(file) == text);  // nothing truncated or appended
}

TEST_CASE("journal: one flipped bit anywhere in a record, its unit index included, is caught", "[io][journal]") {
  // The reproduced bug: the checksum covered only the payload, so a flipped bit in the unit index
  // moved a unit's rows to another unit undetected. CRC-32 detects every single-bit error
  // (Peterson and Brown 1961, "Cyclic codes for error detection").
  const std::string h = Journal::header(hash), r0 = Journal::record(0, unit_rows(0)),
                    r1 = Journal::record(1, unit_rows(1)), r2 = Journal::record(2, unit_rows(2)),
                    r3 = Journal::record(3, unit_rows(3));
  std::size_t intact = 0;
  bool torn = false;

  std::string index_flipped = r1;
  index_flipped[0] ^= 0x02;  // '1' -> '3': a valid index, the unit of the record after next
  CHECK(index_flipped.substr(0, 2) == "3\t");
  const auto e = error_of([&] { Journal::parse_file(h + r0 + index_flipped + r2 + r3, hash, &intact, &torn); });
  CHECK(e.line == 3);
  CHECK_THAT(e.message, Catch::Contains("checksum mismatch"));

  // Every bit of every byte of the second record (index, checksum, payload, end of line): refused
  // at its line, never read as some other record.
  std::size_t flips = 0;
  for (std::size_t byte = 0; byte < r1.size(); ++byte)
    for (int bit = 0; bit < 8; ++bit) {
      std::string flipped = r1;
      flipped[byte] = static_cast<char>(flipped[byte] ^ (1 << bit));
      INFO("byte " << byte << " bit " << bit);
      const auto err = error_of([&] { Journal::parse_file(h + r0 + flipped + r2 + r3, hash, &intact, &torn); });
      CHECK(err.line == 3);
      ++flips;
    }
  CHECK(flips == 8 * r1.size());

  // Every bit of the last record: dropped as torn, the other units intact.
  for (std::size_t byte = 0; byte + 1 < r3.size(); ++byte)
    for (int bit = 0; bit < 8; ++bit) {
      std::string flipped = r3;
      flipped[byte] = static_cast<char>(flipped[byte] ^ (1 << bit));
      INFO("last record, byte " << byte << " bit " << bit);
      const auto units = Journal::parse_file(h + r0 + r1 + r2 + flipped, hash, &intact, &torn);
      CHECK(torn);
      CHECK(units.size() == 3);
      CHECK(units.count(3) == 0);
    }

  // Every bit of the header: a journal of no known study or format, refused at line 1.
  for (std::size_t byte = 0; byte + 1 < h.size(); ++byte)
    for (int bit = 0; bit < 8; ++bit) {
      std::string flipped = h;
      flipped[byte] = static_cast<char>(flipped[byte] ^ (1 << bit));
      if (flipped.find('\n') + 1 != flipped.size()) continue;  // a new LF: the header is cut, also refused below
      INFO("header byte " << byte << " bit " << bit);
      CHECK(error_of([&] { Journal::parse_file(flipped + r0 + r1, hash, &intact, &torn); }).line == 1);
    }
}

TEST_CASE("journal: a journal of another study, of another format or without a header is refused", "[io][journal]") {
  TempDir d("foreign");
  const fs::path file = d.path / "units.journal";
  const std::string records = Journal::record(0, unit_rows(0)) + Journal::record(1, unit_rows(1));
  std::size_t intact = 0;
  bool torn = false;

  const auto other = error_of([&] {
    Journal::parse_file(Journal::header("fedcba9876543210") + records, hash, &intact, &torn, "units.journal");
  });
  CHECK(other.line == 1);
  CHECK_THAT(other.message, Catch::Contains("belongs to another study") && Catch::Contains("fedcba9876543210") &&
                                Catch::Contains(hash));
  const auto old = error_of([&] { Journal::parse_file(records, hash, &intact, &torn); });  // format 1: no header
  CHECK(old.line == 1);
  CHECK_THAT(old.message, Catch::Contains("has no journal header"));
  const auto version = error_of([&] { Journal::parse_file("dobudget-journal 3 study " + hash + "\n", hash, &intact, &torn); });
  CHECK_THAT(version.message, Catch::Contains("another format"));

  // The constructor refuses it too, and changes nothing.
  const std::string foreign = Journal::header("fedcba9876543210") + records;
  write(file, foreign);
  CHECK_THROWS_WITH(Journal(file, hash), Catch::Contains(file.string() + ":1: belongs to another study"));
  CHECK(slurp(file) == foreign);

  // A header torn before its end of line (killed while creating the journal) is written again.
  write(file, Journal::header(hash).substr(0, 10));
  {
    Journal j(file, hash);
    CHECK(j.torn_tail_dropped());
    CHECK(j.units().empty());
  }
  CHECK(slurp(file) == Journal::header(hash));
}

TEST_CASE("journal: a record whose rows are not its unit's, or that repeats a unit, is refused", "[io][journal]") {
  TempDir d("foreign-record");
  const fs::path file = d.path / "units.journal";
  const std::string h = Journal::header(hash);
  std::size_t intact = 0;
  bool torn = false;

  // Unit 2's record holding the rows of replicate 3 (intact checksum: written so, not damaged).
  const std::string swapped = h + Journal::record(1, unit_rows(1)) + Journal::record(2, unit_rows(3));
  CHECK(Journal::parse_file(swapped, hash, &intact, &torn).size() == 2);  // no check: it parses
  const auto e = error_of([&] { Journal::parse_file(swapped, hash, &intact, &torn, "units.journal", replicate_check); });
  CHECK(e.line == 3);  // refused even as the last record: it is intact, not torn
  CHECK_THAT(e.message, Catch::Contains("the record of unit 2 does not belong to it: it holds a row of replicate 3"));
  const std::string beyond = h + Journal::record(12, unit_rows(12));
  CHECK_THAT(error_of([&] { Journal::parse_file(beyond, hash, &intact, &torn, "units.journal", replicate_check); }).message,
             Catch::Contains("units 0 to 9 only"));

  const std::string twice = h + Journal::record(1, unit_rows(1)) + Journal::record(2, unit_rows(2)) +
                            Journal::record(1, unit_rows(1));
  const auto dup = error_of([&] { Journal::parse_file(twice, hash, &intact, &torn); });
  CHECK(dup.line == 4);
  CHECK_THAT(dup.message, Catch::Contains("unit 1 is recorded twice (lines 2 and 4)"));

  write(file, swapped);
  CHECK_THROWS_WITH(Journal(file, hash, {}, replicate_check),
                    Catch::Contains(file.string() + ":3: the record of unit 2") &&
                        Catch::Contains("Delete that line to have its unit computed again"));
  CHECK(slurp(file) == swapped);
}

TEST_CASE("journal: a batch appended with one write holds the same bytes as its records appended one by one",
          "[io][journal][batch]") {
  // What rank 0 of an MPI run does with a worker's RESULT (src/mpi/mpi_executor.cpp): the records
  // as the worker encoded them (Journal::record), checked and decoded once, written verbatim.
  TempDir d("batch");
  const fs::path one_by_one = d.path / "one-by-one.journal", batched = d.path / "batched.journal";
  {
    Journal j(one_by_one, hash);
    j.append(4, unit_rows(0));
    j.append(0, unit_rows(1));
    j.append(17, unit_rows(2));
    j.append(5, unit_rows(3));
  }
  {
    Journal j(batched, hash);
    Journal::Batch first = Journal::parse_batch(Journal::record(4, unit_rows(0)), "MPI result from rank 2");
    Journal::Batch rest = Journal::parse_batch(
        Journal::record(0, unit_rows(1)) + Journal::record(17, unit_rows(2)) + Journal::record(5, unit_rows(3)),
        "MPI result from rank 3");
    REQUIRE(rest.units.size() == 3);  // decoded in the order of the text
    CHECK(rest.units[0].first == 0);
    CHECK(rest.units[1].first == 17);
    CHECK(rest.units[2].first == 5);
    require_same(rest.units[1].second, unit_rows(2));
    j.append_batch(std::move(first));
    j.append_batch(std::move(rest));
    REQUIRE(j.units().size() == 4);  // kept as append() keeps them
    require_same(j.units().at(4), unit_rows(0));
    require_same(j.units().at(5), unit_rows(3));
  }
  const std::string text = slurp(batched);
  CHECK(text == slurp(one_by_one));  // byte for byte
  Journal j(batched, hash);          // and it reads back bit for bit
  REQUIRE(j.units().size() == 4);
  require_same(j.units().at(0), unit_rows(1));
  require_same(j.units().at(17), unit_rows(2));
}

TEST_CASE("journal: after a failed write (a file size limit) the journal is cut back and refuses every later append",
          "[io][journal]") {
  // A full disk, simulated in a child process: RLIMIT_FSIZE a little above the journal's size
  // (SIGXFSZ ignored, so write(2) fails with EFBIG after writing what fits). A record too long
  // for the room left fails part-way; a short one that would still fit must then be refused too.
  TempDir d("write-fails");
  const fs::path file = d.path / "units.journal";
  const std::string big = Journal::record(1, unit_rows(1));
  const std::string small = Journal::record(2, {});  // a few bytes: fits in what is left
  REQUIRE(big.size() > 200);
  REQUIRE(small.size() < 40);
  const pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    int code = 0;
    try {
      Journal j(file, hash);
      j.append(0, unit_rows(0));
      std::signal(SIGXFSZ, SIG_IGN);
      const rlimit limit{static_cast<rlim_t>(fs::file_size(file) + 100), static_cast<rlim_t>(fs::file_size(file) + 100)};
      if (::setrlimit(RLIMIT_FSIZE, &limit) != 0) ::_exit(10);
      try {
        j.append(1, unit_rows(1));
        code = 11;  // the write should have failed
      } catch (const std::runtime_error&) {
      }
      try {
        j.append_batch(Journal::Batch{small, {}});
        code = code ? code : 12;  // refused: an earlier append failed
      } catch (const std::runtime_error& e) {
        if (std::string(e.what()).find("an earlier append failed") == std::string::npos) code = code ? code : 13;
      }
    } catch (...) {
      code = 14;
    }
    ::_exit(code);
  }
  int status = 0;
  REQUIRE(::waitpid(child, &status, 0) == child);
  REQUIRE(WIFEXITED(status));
  CHECK(WEXITSTATUS(status) == 0);  // 11: the write did not fail; 12: a later append was accepted
  CHECK(slurp(file) == Journal::header(hash) + Journal::record(0, unit_rows(0)));  // cut back to the whole record
  Journal j(file, hash);  // and it resumes: unit 0 only, nothing torn
  CHECK(j.units().size() == 1);
  CHECK_FALSE(j.torn_tail_dropped());
}

TEST_CASE("journal: a record of many ';' costs no memory ahead of its rows", "[io][journal]") {
#ifdef __SANITIZE_ADDRESS__
  SUCCEED("skipped under AddressSanitizer, whose shadow memory needs more address space than the limit below");
#else
  // A record with an intact checksum whose payload is 20 million ';' (20 MB): reserving a row per
  // ';' before any row parses would ask for gigabytes. In a child process limited to its present
  // address space plus 512 MB, the record must be refused for what it is (a malformed row), not
  // for want of memory.
  const std::string payload(20'000'000, ';');
  boost::crc_32_type crc;
  crc.process_bytes("0\t", 2);
  crc.process_bytes(payload.data(), payload.size());
  const std::string text = Journal::header(hash) + fmt::format("0\t{:08x}\t", crc.checksum()) + payload + "\n" +
                           Journal::record(1, unit_rows(1));
  const pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    std::ifstream statm("/proc/self/statm");
    std::size_t pages = 0;
    statm >> pages;
    const rlim_t room = static_cast<rlim_t>(pages) * static_cast<rlim_t>(::sysconf(_SC_PAGESIZE)) + (rlim_t{512} << 20);
    const rlimit limit{room, room};
    if (!statm || ::setrlimit(RLIMIT_AS, &limit) != 0) ::_exit(10);
    int code = 11;  // accepted
    try {
      std::size_t intact = 0;
      bool torn = false;
      Journal::parse(text, &intact, &torn);
    } catch (const dobudget::io::InputError& e) {
      code = e.line == 2 && e.message.find("damaged record (malformed row)") != std::string::npos ? 0 : 12;
    } catch (const std::bad_alloc&) {
      code = 13;
    } catch (...) {
      code = 14;
    }
    ::_exit(code);
  }
  int status = 0;
  REQUIRE(::waitpid(child, &status, 0) == child);
  REQUIRE(WIFEXITED(status));
  CHECK(WEXITSTATUS(status) == 0);  // 12: refused for another reason (bad_alloc read as damage); 13: bad_alloc
#endif
}

TEST_CASE("journal: a garbled record in a batch is refused naming the sender and the unit, and nothing of the batch "
          "is written",
          "[io][journal][batch]") {
  TempDir d("batch-garbled");
  const fs::path file = d.path / "units.journal";
  const std::string r0 = Journal::record(0, unit_rows(0)), r1 = Journal::record(1, unit_rows(1)),
                    r2 = Journal::record(2, unit_rows(2));
  const std::string source = "MPI result from rank 3";
  // As rank 0 does it: check and decode the whole message, then append it.
  const auto receive = [&](const std::string& text) {
    Journal j(file, hash);
    j.append_batch(Journal::parse_batch(text, source, replicate_check));
  };

  std::string garbled = r1;
  garbled[garbled.size() - 3] ^= 0x01;  // a digit of the last row's fit_seconds
  const auto e = error_of([&] { receive(r0 + garbled + r2); });
  CHECK(e.file == source);
  CHECK(e.line == 2);  // the second record of the message
  CHECK_THAT(e.what(), Catch::StartsWith("MPI result from rank 3:2: unit '1': damaged record (checksum mismatch)"));
  CHECK_THAT(e.message, Catch::Contains("nothing of this batch is recorded"));
  CHECK(slurp(file) == Journal::header(hash));  // not even the intact first record

  // CRC-32 catches every single-bit error (Peterson and Brown 1961, "Cyclic codes for error
  // detection"): every bit of every byte of the middle record, and of the last one (a batch has
  // no torn tail to drop: a record cut short is refused too), refused, nothing written.
  for (int which : {1, 2}) {
    const std::string& rec = which == 1 ? r1 : r2;
    for (std::size_t byte = 0; byte < rec.size(); ++byte)
      for (int bit = 0; bit < 8; ++bit) {
        std::string flipped = rec;
        flipped[byte] = static_cast<char>(flipped[byte] ^ (1 << bit));
        INFO("record " << which << ", byte " << byte << " bit " << bit);
        const std::string text = which == 1 ? r0 + flipped + r2 : r0 + r1 + flipped;
        const auto err = error_of([&] { Journal::parse_batch(text, source, replicate_check); });
        CHECK(err.file == source);
        CHECK(err.line == which + 1);
      }
  }
  const auto cut = error_of([&] { receive(r0 + r1 + r2.substr(0, r2.size() - 1)); });
  CHECK(cut.line == 3);
  CHECK_THAT(cut.message, Catch::Contains("unit '2': damaged record (no end of line)"));

  // Intact records that are not their unit's, or repeat a unit, or nothing at all: refused alike.
  const auto foreign = error_of([&] { receive(r0 + Journal::record(2, unit_rows(3))); });
  CHECK(foreign.line == 2);
  CHECK_THAT(foreign.message,
             Catch::Contains("unit 2: the record does not belong to it: it holds a row of replicate 3"));
  const auto twice = error_of([&] { receive(r0 + r1 + r0); });
  CHECK(twice.line == 3);
  CHECK_THAT(twice.message, Catch::Contains("unit 0: recorded twice in one batch (records 1 and 3)"));
  CHECK(error_of([&] { receive(""); }).file == source);
  CHECK(slurp(file) == Journal::header(hash));
}

TEST_CASE("journal: the claim runs under the lock, and a journal created for a refused claim is removed",
          "[io][journal]") {
  TempDir d("claim");
  const fs::path file = d.path / "units.journal";
  bool ran = false;
  {
    Journal j(file, hash, [&] {
      ran = true;
      CHECK(Journal::in_use(file));  // the lock is held while the claim runs
    });
  }
  CHECK(ran);
  CHECK(slurp(file) == Journal::header(hash));

  fs::remove(file);
  CHECK_THROWS_WITH(Journal(file, hash, [] { throw std::runtime_error("claim refused"); }), "claim refused");
  CHECK_FALSE(fs::exists(file));  // nothing left behind

  write(file, Journal::header(hash));
  CHECK_THROWS_WITH(Journal(file, hash, [] { throw std::runtime_error("claim refused"); }), "claim refused");
  CHECK(slurp(file) == Journal::header(hash));  // a journal it did not create is left alone
}

TEST_CASE("journal: one writer at a time", "[io][journal]") {
  TempDir d("lock");
  const fs::path file = d.path / "units.journal";
  CHECK_FALSE(Journal::in_use(file));  // no file yet
  {
    Journal j(file, hash);
    j.append(0, unit_rows(0));
    CHECK(Journal::in_use(file));
    CHECK_THROWS_WITH(Journal(file, hash), Catch::Contains("is being written by another dobudget process"));
  }
  CHECK_FALSE(Journal::in_use(file));
  Journal j(file, hash);
  CHECK(j.units().size() == 1);
}

TEST_CASE("journal: a symbolic link named units.journal is refused, and nothing is written through it",
          "[io][journal]") {
  // The reproduced bug: `ln -s ~/victim units.journal`, then plan: the header and every record went
  // into the victim file.
  TempDir d("link");
  const fs::path victim = d.path / "victim", file = d.path / "units.journal";
  write(victim, "");
  fs::create_symlink(victim, file);
  CHECK_THROWS_WITH(Journal(file, hash), Catch::StartsWith(file.string() + ": is a symbolic link"));
  CHECK(slurp(victim).empty());
  CHECK(fs::is_symlink(fs::symlink_status(file)));  // left as it was, for the user to look at

  // A link to a journal of this very study is refused all the same: the name must be the file.
  write(victim, Journal::header(hash) + Journal::record(0, unit_rows(0)));
  const std::string before = slurp(victim);
  CHECK_THROWS_WITH(Journal(file, hash), Catch::Contains("is a symbolic link"));
  CHECK(slurp(victim) == before);

  // A dangling link: its target is not created.
  fs::remove(file);
  fs::create_symlink(d.path / "elsewhere", file);
  CHECK_THROWS_WITH(Journal(file, hash), Catch::Contains("is a symbolic link"));
  CHECK_FALSE(fs::exists(d.path / "elsewhere"));
}
