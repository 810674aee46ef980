// Measurement (not a test): where rank 0 of an MPI run spends its time per remote unit
// (src/mpi/mpi_executor.cpp; DEVELOPERS.md, "MPI hand-out rate"). A worker sends the units.journal
// records of every unit it finished since its last message in one RESULT; rank 0 checks and
// decodes them and appends them to units.journal. This times, per unit, on records the size of the
// hand-out measurement's near-empty units (3 rows each):
//   1. the steps of the unit-by-unit path: Journal::parse of a message (CRC-32 and decoding),
//      Journal::record (encoding again, CRC-32) and Journal::append (encode + write + fflush);
//   2. the batch path, Journal::parse_batch + Journal::append_batch (one write and one fflush per
//      message), for messages of 1, 10 and 100 records.
//
// Usage: bench_journal_batch [DIR] [UNITS]
//   DIR    where to write the scratch journals (default: the system temporary directory)
//   UNITS  records per measurement (default 20000)
// Build: cmake --build build --target bench_journal_batch
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <string>
#include <vector>

#include "io/journal.hpp"

namespace {

using namespace dobudget;
namespace fs = std::filesystem;

// CPU time of this thread, as the MPI executor counts rank 0's (CLOCK_THREAD_CPUTIME_ID).
double cpu_seconds() {
  timespec t{};
  ::clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

// One near-empty unit's rows, as the hand-out study writes them: 3 strategies, logged 0, pilot 2,
// model_kl and loglik of 16-17 significant digits, no return_gap, 10 starts, fit_seconds of 5.
std::vector<RunRecord> unit_rows(int unit) {
  std::vector<RunRecord> rows;
  double x = 0.1234567890123456 + unit * 1e-7;
  for (Strategy st : all_strategies) {
    RunRecord r;
    r.environment = unit / 1000;
    r.replicate = unit % 1000;
    r.strategy = st;
    r.pilot = 2;
    x = x * 1.6180339887498949 - static_cast<int>(x * 1.6180339887498949);
    r.model_kl = x;
    r.loglik = -1.7844088209595643 * (1.0 + x);
    r.iterations = 1 + unit % 3;
    r.starts = 10;
    r.fit_seconds = 5.6173e-05 * (1.0 + x);
    rows.push_back(r);
  }
  return rows;
}

}  // namespace

int main(int argc, char** argv) {
  const fs::path base = argc > 1 ? fs::path(argv[1]) : fs::temp_directory_path();
  const int n = argc > 2 ? std::max(100, std::atoi(argv[2])) : 20000;
  const fs::path dir = base / ("dobudget-bench-journal-batch-" + std::to_string(::getpid()));
  fs::remove_all(dir);
  fs::create_directories(dir);

  std::vector<std::vector<RunRecord>> units;
  std::vector<std::string> records;
  for (int u = 0; u < n; ++u) {
    units.push_back(unit_rows(u));
    records.push_back(io::Journal::record(static_cast<std::size_t>(u), units.back()));
  }
  std::printf("%d units of %zu rows (%zu bytes per record) in %s; CPU time of this thread per unit\n", n,
              units[0].size(), records[0].size(), dir.c_str());

  // 1. The unit-by-unit path's steps.
  {
    double t0 = cpu_seconds();
    std::size_t decoded = 0;
    for (const auto& rec : records) {
      std::size_t intact = 0;
      bool torn = false;
      decoded += io::Journal::parse(rec, &intact, &torn, "bench").size();
    }
    const double parse_s = cpu_seconds() - t0;
    t0 = cpu_seconds();
    std::size_t bytes = 0;
    for (int u = 0; u < n; ++u) bytes += io::Journal::record(static_cast<std::size_t>(u), units[static_cast<std::size_t>(u)]).size();
    const double encode_s = cpu_seconds() - t0;
    double append_s = 0.0;
    {
      io::Journal journal(dir / "one-by-one.journal", "0000000000000000");
      t0 = cpu_seconds();
      for (int u = 0; u < n; ++u) journal.append(static_cast<std::size_t>(u), units[static_cast<std::size_t>(u)]);
      append_s = cpu_seconds() - t0;
    }
    std::printf("  unit by unit: Journal::parse %.2f us, Journal::record %.2f us, Journal::append %.2f us "
                "(of it write + fflush about %.2f us); parse + append %.2f us (%zu units, %zu bytes)\n",
                1e6 * parse_s / n, 1e6 * encode_s / n, 1e6 * append_s / n, 1e6 * (append_s - encode_s) / n,
                1e6 * (parse_s + append_s) / n, decoded, bytes);
  }

  // 2. The batch path, for messages of 1, 10 and 100 records.
  for (int per_message : {1, 10, 100}) {
    std::vector<std::string> messages;
    for (int u = 0; u < n; u += per_message) {
      std::string m;
      for (int k = u; k < std::min(n, u + per_message); ++k) m += records[static_cast<std::size_t>(k)];
      messages.push_back(std::move(m));
    }
    const fs::path file = dir / ("batch-" + std::to_string(per_message) + ".journal");
    double parse_s = 0.0, append_s = 0.0;
    {
      io::Journal journal(file, "0000000000000000");
      for (auto& m : messages) {
        const double t0 = cpu_seconds();
        io::Journal::Batch batch = io::Journal::parse_batch(std::move(m), "bench");
        const double t1 = cpu_seconds();
        journal.append_batch(std::move(batch));
        append_s += cpu_seconds() - t1;
        parse_s += t1 - t0;
      }
    }
    std::printf("  batches of %3d: Journal::parse_batch %.2f us, Journal::append_batch %.2f us; together %.2f us "
                "per unit (%.0f units per CPU second)\n",
                per_message, 1e6 * parse_s / n, 1e6 * append_s / n, 1e6 * (parse_s + append_s) / n,
                n / (parse_s + append_s));
  }
  fs::remove_all(dir);
  return 0;
}
