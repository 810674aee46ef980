// The unit journal (io/journal.hpp): records read back bit for bit, a torn last record is dropped
// (never half-read) and the file truncated to its intact prefix, a damaged record before the last
// is an error naming the file and the record, and one writer at a time.
#include <catch2/catch.hpp>
#include <unistd.h>

#include <bit>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>

#include "io/journal.hpp"

namespace fs = std::filesystem;
using dobudget::RunRecord;
using dobudget::Strategy;
using dobudget::io::Journal;

namespace {

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
// zero, infinity, missing values.
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
        r.model_kl = values[static_cast<std::size_t>(k) % values.size()];
        if (k % 4 != 3) r.return_gap = -values[static_cast<std::size_t>(k + 3) % values.size()];
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

}  // namespace

TEST_CASE("journal: records read back bit for bit", "[io][journal]") {
  TempDir d("roundtrip");
  const fs::path file = d.path / "units.journal";
  {
    Journal j(file);
    CHECK(j.units().empty());
    CHECK_FALSE(j.torn_tail_dropped());
    j.append(4, unit_rows(0));
    j.append(0, unit_rows(1));
    j.append(17, unit_rows(2));
  }
  const std::string text = slurp(file);
  CHECK(std::count(text.begin(), text.end(), '\n') == 3);
  CHECK(text.rfind(Journal::record(4, unit_rows(0)), 0) == 0);  // append writes record() as is

  Journal j(file);
  CHECK_FALSE(j.torn_tail_dropped());
  REQUIRE(j.units().size() == 3);
  require_same(j.units().at(4), unit_rows(0));
  require_same(j.units().at(0), unit_rows(1));
  require_same(j.units().at(17), unit_rows(2));
  CHECK(slurp(file) == text);  // reading changes nothing

  std::size_t intact = 0;
  bool torn = true;
  const auto parsed = Journal::parse(text, &intact, &torn);
  CHECK(intact == text.size());
  CHECK_FALSE(torn);
  CHECK(parsed.size() == 3);
}

TEST_CASE("journal: a torn last record is dropped, truncated away, and never half-read", "[io][journal]") {
  TempDir d("torn");
  const fs::path file = d.path / "units.journal";
  const std::string two = Journal::record(0, unit_rows(0)) + Journal::record(1, unit_rows(1));
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
    const auto parsed = Journal::parse(two + tail, &intact, &torn);
    CHECK(torn);
    CHECK(intact == two.size());
    CHECK(parsed.size() == 2);
    CHECK(parsed.count(2) == 0);

    write(file, two + tail);
    {
      Journal j(file);
      CHECK(j.torn_tail_dropped());
      CHECK(j.units().size() == 2);
      CHECK(slurp(file) == two);  // truncated to the intact prefix
      j.append(2, unit_rows(2));  // the unit computed again
    }
    Journal again(file);
    CHECK_FALSE(again.torn_tail_dropped());
    REQUIRE(again.units().size() == 3);
    require_same(again.units().at(2), unit_rows(2));
  }
}

TEST_CASE("journal: a damaged record before the last is an error naming the file and the record", "[io][journal]") {
  TempDir d("damaged");
  const fs::path file = d.path / "units.journal";
  const std::string r0 = Journal::record(0, unit_rows(0)), r1 = Journal::record(1, unit_rows(1)),
                    r2 = Journal::record(2, unit_rows(2));
  std::string damaged = r1;
  damaged[damaged.size() / 2] = damaged[damaged.size() / 2] == '7' ? '8' : '7';  // a changed digit: CRC mismatch
  const std::string text = r0 + damaged + r2;

  std::size_t intact = 0;
  bool torn = false;
  CHECK_THROWS_WITH(Journal::parse(text, &intact, &torn, "runs/x/units.journal"),
                    Catch::Contains("runs/x/units.journal: record 2 (line 2) is damaged (checksum mismatch)"));
  CHECK_THROWS_WITH(Journal::parse(r0 + "x\t00000000\t\n" + r2, &intact, &torn), Catch::Contains("record 2"));
  CHECK_THROWS_WITH(Journal::parse(r0 + "\n" + r2, &intact, &torn), Catch::Contains("record 2"));  // an empty line

  write(file, text);
  CHECK_THROWS_WITH(Journal(file), Catch::Contains(file.string() + ": record 2 (line 2) is damaged"));
  CHECK(slurp(file) == text);  // nothing truncated or appended
}

TEST_CASE("journal: one writer at a time", "[io][journal]") {
  TempDir d("lock");
  const fs::path file = d.path / "units.journal";
  CHECK_FALSE(Journal::in_use(file));  // no file yet
  {
    Journal j(file);
    j.append(0, unit_rows(0));
    CHECK(Journal::in_use(file));
    CHECK_THROWS_WITH(Journal(file), Catch::Contains("is being written by another dobudget process"));
  }
  CHECK_FALSE(Journal::in_use(file));
  Journal j(file);
  CHECK(j.units().size() == 1);
}
