// Measurement (not a test): how fast an episodes file is read (io/episode_file.hpp). Issue 9 asks
// that a million rows read in seconds. The file is generated here: random episodes of a world of
// 6 observation codes and 3 action codes, ids like "ward-3/000123", lengths 1 to 19 actions
// (mean 9, so about 10 rows per episode), logged and pilot mixed, written by write_episodes (so
// the file is also what `dobudget simulate` writes: LF line ends, codes unquoted). Then it is read
// back REPEATS times without and with a codebook, and rows per second is reported for the best
// and the median repeat, with the file size and the bytes per row.
//
// Usage: bench_episode_import [ROWS] [REPEATS] [DIR]
//   ROWS     rows to generate (default 1000000)
//   REPEATS  reads of the file (default 5)
//   DIR      where to write the scratch file (default: the system temporary directory)
// Build: cmake --build build --target bench_episode_import
#include <unistd.h>

#include <boost/random/uniform_int_distribution.hpp>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fmt/format.h>
#include <string>
#include <vector>

#include "core/world/seeding.hpp"
#include "io/atomic_file.hpp"
#include "io/episode_file.hpp"

namespace {

using namespace dobudget;
using Clock = std::chrono::steady_clock;
namespace fs = std::filesystem;

io::EpisodeRecords generate(long long rows) {
  Engine rng(20261202);
  boost::random::uniform_int_distribution<int> length(1, 19), obs(0, 5), act(0, 2), coin(0, 3);
  io::EpisodeRecords r;
  r.codebook.observations = {"calm", "restless", "agitated", "asleep", "awake", "unknown"};
  r.codebook.actions = {"wait", "dose", "call"};
  std::vector<int> lengths[2];
  long long total = 0;
  while (total < rows) {
    const int len = static_cast<int>(std::min<long long>(length(rng), rows - total - 1));
    if (len < 1) break;
    lengths[coin(rng) == 0 ? 1 : 0].push_back(len);
    total += len + 1;
  }
  for (int k = 0; k < 2; ++k) {
    Dataset& d = k == 0 ? r.logged : r.pilot;
    auto& ids = k == 0 ? r.logged_ids : r.pilot_ids;
    d.horizon = 19;
    d.count = static_cast<int>(lengths[k].size());
    d.lengths.assign(lengths[k].begin(), lengths[k].end());
    d.observations.resize(static_cast<std::size_t>(d.count) * 20);
    d.actions.resize(static_cast<std::size_t>(d.count) * 19);
    for (auto& o : d.observations) o = obs(rng);
    for (auto& a : d.actions) a = act(rng);
    for (int i = 0; i < d.count; ++i) ids.push_back(fmt::format("ward-{}/{:06}", k == 0 ? 3 : 9, i));
  }
  return r;
}

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

}  // namespace

int main(int argc, char** argv) {
  const long long rows = argc > 1 ? std::atoll(argv[1]) : 1000000;
  const int repeats = argc > 2 ? std::atoi(argv[2]) : 5;
  const fs::path dir = argc > 3 ? fs::path(argv[3]) : fs::temp_directory_path();
  const fs::path csv = dir / fmt::format("bench_episode_import_{}.csv", ::getpid());
  const fs::path book = dir / fmt::format("bench_episode_import_{}.yaml", ::getpid());
  const io::EpisodeRecords r = generate(rows);
  auto t0 = Clock::now();
  io::write_episodes(csv, r);
  const double write_s = seconds_since(t0);
  io::write_file_atomically(book, io::codebook_yaml(r.codebook));
  const auto bytes = fs::file_size(csv);
  long long written_rows = 0;
  for (const Dataset* d : {&r.logged, &r.pilot})
    for (int i = 0; i < d->count; ++i) written_rows += d->length(i) + 1;
  std::printf("file: %lld rows, %d logged + %d pilot episodes, %.1f MB (%.1f bytes per row); written in %.2f s\n",
              written_rows, r.logged.count, r.pilot.count, bytes / 1e6, double(bytes) / written_rows, write_s);
  const io::Codebook codebook = io::read_codebook(book);
  for (const bool with_codebook : {false, true}) {
    std::vector<double> times;
    for (int k = 0; k < repeats; ++k) {
      t0 = Clock::now();
      const io::EpisodeRecords back = io::read_episodes(csv, with_codebook ? &codebook : nullptr);
      times.push_back(seconds_since(t0));
      if (back.logged.count != r.logged.count || back.pilot.count != r.pilot.count) {
        std::fprintf(stderr, "read back a different number of episodes\n");
        return 1;
      }
    }
    std::sort(times.begin(), times.end());
    const double median = times[times.size() / 2];
    std::printf("read_episodes %s codebook: best %.3f s (%.2f million rows/s, %.0f MB/s), median %.3f s (%.2f million rows/s)\n",
                with_codebook ? "with a" : "without a", times.front(), written_rows / times.front() / 1e6,
                bytes / times.front() / 1e6, median, written_rows / median / 1e6);
  }
  fs::remove(csv);
  fs::remove(book);
  return 0;
}
