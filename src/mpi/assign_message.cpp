#include "mpi/assign_message.hpp"

#include <fmt/format.h>

#include <stdexcept>
#include <string>

namespace dobudget::mpi {

std::vector<unsigned long long> encode_assign(const std::vector<unsigned long long>& batch) {
  std::vector<unsigned long long> runs{assign_runs};
  for (unsigned long long index : batch) {
    const std::size_t k = runs.size() - 3;  // the last triple, when there is one
    if (runs.size() > 1 && runs[k + 1] == 1 && index > runs[k]) {
      runs[k + 1] = 2;  // a run of one unit takes any later unit as its second, setting the stride
      runs[k + 2] = index - runs[k];
    } else if (runs.size() > 1 && index == runs[k] + runs[k + 1] * runs[k + 2]) {
      ++runs[k + 1];
    } else {
      runs.insert(runs.end(), {index, 1, 1});
    }
  }
  if (runs.size() - 1 < batch.size()) return runs;
  std::vector<unsigned long long> list{assign_list};
  list.insert(list.end(), batch.begin(), batch.end());
  return list;
}

std::vector<std::size_t> decode_assign(const std::vector<unsigned long long>& message, std::size_t units) {
  if (message.size() < 2) throw std::runtime_error("rank 0 sent an ASSIGN of no unit");
  const auto bad = [&](const std::string& why) {
    return std::runtime_error(fmt::format("rank 0 sent a malformed ASSIGN ({} words): {} (the study has {} units)",
                                          message.size(), why, units));
  };
  std::size_t total = 0;
  if (message[0] == assign_runs) {
    if ((message.size() - 1) % 3 != 0) throw bad("its runs are not (first, count, stride) triples");
    unsigned long long next_free = 0;  // the least index the next run may start at
    for (std::size_t k = 1; k < message.size(); k += 3) {
      const unsigned long long first = message[k], count = message[k + 1], stride = message[k + 2];
      if (count == 0 || stride == 0) throw bad(fmt::format("run {} has count {} and stride {}", k / 3 + 1, count, stride));
      if (first < next_free || first >= units || (count - 1) > (units - 1 - first) / stride)
        throw bad(fmt::format("run {} ({}, {}, {}) overlaps the one before or reaches beyond the last unit", k / 3 + 1,
                              first, count, stride));
      next_free = first + (count - 1) * stride + 1;
      total += static_cast<std::size_t>(count);  // at most `units` in all: the runs are ascending and disjoint
    }
    std::vector<std::size_t> batch;
    batch.reserve(total);
    for (std::size_t k = 1; k < message.size(); k += 3)
      for (unsigned long long j = 0; j < message[k + 1]; ++j)
        batch.push_back(static_cast<std::size_t>(message[k] + j * message[k + 2]));
    return batch;
  }
  if (message[0] != assign_list) throw bad(fmt::format("unknown encoding {}", message[0]));
  for (std::size_t k = 1; k < message.size(); ++k)
    if (message[k] >= units || (k > 1 && message[k] <= message[k - 1]))
      throw bad(fmt::format("index {} ({}) is not below the last unit or not above the one before", k, message[k]));
  return {message.begin() + 1, message.end()};
}

}  // namespace dobudget::mpi
