// The memory this process may use: the smallest of the machine's physical memory (sysconf), the
// memory limit of its control group (cgroup v2 memory.max, or v1 memory.limit_in_bytes: how
// containers and batch schedulers such as Slurm confine a job) and its address-space limit
// (getrlimit RLIMIT_AS, `ulimit -v`). `check` and `plan` refuse a study whose estimated peak
// memory (memory_estimate.hpp) is above it (memory_messages.hpp).
#pragma once
#include <filesystem>
#include <optional>
#include <string>

namespace dobudget::io {

struct MachineMemory {
  double bytes = 0.0;      // 0 when it cannot be told (then nothing is refused)
  std::string limited_by;  // what sets it, for messages: "physical memory", "the address-space limit (ulimit -v)", ...
};

MachineMemory machine_memory();

// A cgroup memory file's value: bytes, or nullopt for "max" (cgroup v2: no limit) or text that is
// not a whole number.
std::optional<double> cgroup_memory_value(const std::string& text);

// The tightest memory limit of the cgroup `proc_self_cgroup` (the text of /proc/self/cgroup) puts
// this process in, under the cgroup file system mounted at `root` (/sys/fs/cgroup): the smallest
// memory.max of its cgroup v2 directory and every parent (a child cannot use more than a parent
// allows), and memory.limit_in_bytes of its cgroup v1 memory directory (root/memory/...) and every
// parent. The mount's root is always looked at: inside a container it is the container's own
// cgroup, whatever path /proc/self/cgroup gives. nullopt when no limit is set.
std::optional<double> cgroup_memory_limit(const std::filesystem::path& root, const std::string& proc_self_cgroup);

}  // namespace dobudget::io
