// The ASSIGN message of the MPI executor (mpi_executor.hpp): a batch of unit indices, encoded by
// rank 0 and decoded, with every check, by a worker. No MPI here, so tests/mpi tests it alone.
//
// An ASSIGN names its batch in one of two encodings, told apart by its first word:
//   0, then (first, count, stride) triples: runs of units first, first + stride, ...,
//      first + (count - 1) * stride. A batch is a slice of `todo`, which is ascending; a fresh run
//      is one triple (stride 1), a --shard run of N shards one triple of stride N, a resumed
//      directory one triple per stretch between the units already journaled.
//   1, then every unit index: used when the triples would not be shorter (gaps at random).
// So the message has at most batch + 1 words and usually 4 (32 bytes), far below OpenMPI's eager
// limit for shared memory (4,096 bytes in OpenMPI 4.1.4: btl_vader_eager_limit, `ompi_info --param
// btl vader --level 9`). Above it the send waits for the worker to take it, which no longer risks
// a deadlock (the workers never block in a send: serve_as_worker), but stalls rank 0 meanwhile.
#pragma once
#include <cstddef>
#include <vector>

namespace dobudget::mpi {

constexpr unsigned long long assign_runs = 0, assign_list = 1;

// The message for `batch`, an ascending list of unit indices.
std::vector<unsigned long long> encode_assign(const std::vector<unsigned long long>& batch);

// The unit indices of an ASSIGN, refused (std::runtime_error saying what is wrong) unless it is
// one of the two encodings above, of at least one unit, every index below `units`, and the
// indices strictly ascending (runs ascending and disjoint): so a garbled message names at most
// `units` units, and is checked in full before anything is allocated for its indices.
std::vector<std::size_t> decode_assign(const std::vector<unsigned long long>& message, std::size_t units);

}  // namespace dobudget::mpi
