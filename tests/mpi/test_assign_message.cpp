// The ASSIGN message (src/mpi/assign_message.hpp): batches round-trip, a fresh or --shard batch is
// one run, scattered gaps fall back to a list no longer than the batch, and a garbled message is
// refused with what is wrong instead of naming units that do not exist or expanding without bound.
#include <catch2/catch.hpp>

#include <algorithm>
#include <stdexcept>
#include <string>

#include "mpi/assign_message.hpp"

using dobudget::mpi::decode_assign;
using dobudget::mpi::encode_assign;
using Words = std::vector<unsigned long long>;

namespace {

std::vector<std::size_t> as_sizes(const Words& w) { return {w.begin(), w.end()}; }

std::string refusal(const Words& message, std::size_t units) {
  try {
    decode_assign(message, units);
  } catch (const std::runtime_error& e) {
    return e.what();
  }
  return "accepted";
}

}  // namespace

TEST_CASE("assign message: batches round-trip; runs for strides, a list for scattered gaps", "[mpi][assign]") {
  Words consecutive;
  for (unsigned long long i = 100; i < 725; ++i) consecutive.push_back(i);
  CHECK(encode_assign(consecutive) == Words{0, 100, 625, 1});  // 625 units in 32 bytes
  CHECK(decode_assign(encode_assign(consecutive), 725) == as_sizes(consecutive));

  Words shard;  // --shard 2/7: every 7th unit
  for (unsigned long long i = 2; i < 7000; i += 7) shard.push_back(i);
  CHECK(encode_assign(shard) == Words{0, 2, shard.size(), 7});
  CHECK(decode_assign(encode_assign(shard), 7000) == as_sizes(shard));

  Words resumed;  // stretches between journaled units: one run each
  for (unsigned long long i = 0; i < 10; ++i) resumed.insert(resumed.end(), {i, 20 + i, 40 + i});
  std::sort(resumed.begin(), resumed.end());
  CHECK(encode_assign(resumed) == Words{0, 0, 10, 1, 20, 10, 1, 40, 10, 1});
  CHECK(decode_assign(encode_assign(resumed), 50) == as_sizes(resumed));

  Words scattered;  // index mod 5 in {1, 3, 4}: runs would not be shorter
  for (unsigned long long i = 0; i < 600; ++i)
    if (i % 5 == 1 || i % 5 == 3 || i % 5 == 4) scattered.push_back(i);
  const Words message = encode_assign(scattered);
  CHECK(message.front() == 1);
  CHECK(message.size() == scattered.size() + 1);
  CHECK(decode_assign(message, 600) == as_sizes(scattered));

  CHECK(decode_assign(encode_assign({5}), 6) == std::vector<std::size_t>{5});
}

TEST_CASE("assign message: a garbled message is refused, saying what is wrong", "[mpi][assign]") {
  CHECK_THAT(refusal({}, 10), Catch::Contains("no unit"));
  CHECK_THAT(refusal({0}, 10), Catch::Contains("no unit"));
  CHECK_THAT(refusal({7, 1, 2}, 10), Catch::Contains("unknown encoding 7"));
  CHECK_THAT(refusal({0, 1, 2}, 10), Catch::Contains("not (first, count, stride) triples"));
  CHECK_THAT(refusal({0, 1, 0, 1}, 10), Catch::Contains("count 0"));
  CHECK_THAT(refusal({0, 1, 2, 0}, 10), Catch::Contains("stride 0"));
  CHECK_THAT(refusal({0, 10, 1, 1}, 10), Catch::Contains("beyond the last unit"));  // first == units
  CHECK_THAT(refusal({0, 5, 6, 1}, 10), Catch::Contains("beyond the last unit"));   // 5..10
  CHECK(refusal({0, 5, 5, 1}, 10) == "accepted");                                  // 5..9
  CHECK_THAT(refusal({0, 0, 3, 3, 6, 1, 1}, 10), Catch::Contains("overlaps"));      // 0, 3, 6 then 6
  CHECK_THAT(refusal({0, 4, 1, 1, 2, 1, 1}, 10), Catch::Contains("overlaps"));      // descending
  // A count that would expand to 2^64 indices, or wrap around: refused before any is allocated.
  CHECK_THAT(refusal({0, 0, ~0ULL, 1}, 10), Catch::Contains("beyond the last unit"));
  CHECK_THAT(refusal({0, 1, 3, ~0ULL / 2}, 10), Catch::Contains("beyond the last unit"));
  CHECK_THAT(refusal({1, 3, 3}, 10), Catch::Contains("not above the one before"));  // a repeat
  CHECK_THAT(refusal({1, 4, 2}, 10), Catch::Contains("not above the one before"));  // descending
  CHECK_THAT(refusal({1, 2, 10}, 10), Catch::Contains("not below the last unit"));
  CHECK_THAT(refusal({1, 0}, 0), Catch::Contains("not below the last unit"));  // a study of no unit
}
