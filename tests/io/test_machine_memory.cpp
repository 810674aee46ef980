// The memory this process may use (src/io/machine_memory.hpp): cgroup files read as the kernel
// writes them, the tightest limit of a cgroup and its parents, and the smallest of all sources.
// File formats: the Linux kernel's Documentation/admin-guide/cgroup-v2.rst ("memory.max": a number
// of bytes or "max") and cgroup-v1/memory.rst ("memory.limit_in_bytes").
#include <catch2/catch.hpp>
#include <sys/resource.h>
#include <unistd.h>

#include "io/machine_memory.hpp"
#include "temp_dir.hpp"

using namespace dobudget;
using dobudget::test::TempDir;

TEST_CASE("machine memory: a cgroup file's value, and \"max\" for no limit", "[machine_memory]") {
  CHECK(io::cgroup_memory_value("max\n") == std::nullopt);
  CHECK(io::cgroup_memory_value("4294967296\n") == 4294967296.0);
  CHECK(io::cgroup_memory_value("536870912") == 536870912.0);
  for (const char* bad : {"", "\n", "-1", "12 GB", "1e9", "0x100"}) CHECK(io::cgroup_memory_value(bad) == std::nullopt);
}

TEST_CASE("machine memory: the tightest limit of a cgroup and its parents, v2 and v1", "[machine_memory]") {
  TempDir root("machine_memory");
  // cgroup v2: a Slurm job step below a job limited to 8 GiB, the step itself unlimited.
  root.write("system.slice/slurmstepd.scope/job_7/memory.max", "8589934592\n");
  root.write("system.slice/slurmstepd.scope/job_7/step_0/memory.max", "max\n");
  const std::string v2 = "0::/system.slice/slurmstepd.scope/job_7/step_0\n";
  CHECK(io::cgroup_memory_limit(root.path(), v2) == 8589934592.0);
  // The mount's root counts too (inside a container it is the container's own cgroup).
  root.write("memory.max", "2147483648\n");
  CHECK(io::cgroup_memory_limit(root.path(), v2) == 2147483648.0);
  // No way out of the mount through "..".
  CHECK(io::cgroup_memory_limit(root.path(), "0::/../../etc\n") == 2147483648.0);
  // Nothing set: no limit.
  TempDir empty("machine_memory_none");
  empty.write("a/memory.max", "max\n");
  CHECK(io::cgroup_memory_limit(empty.path(), "0::/a\n") == std::nullopt);
  CHECK(io::cgroup_memory_limit(empty.path(), "") == std::nullopt);
  // cgroup v1: the memory controller's hierarchy, under root/memory.
  TempDir v1("machine_memory_v1");
  v1.write("memory/process_api/abc/memory.limit_in_bytes", "1073741824\n");
  v1.write("memory/memory.limit_in_bytes", "9223372036854771712\n");  // v1's "unlimited"
  CHECK(io::cgroup_memory_limit(v1.path(), "4:memory:/process_api/abc\n1:cpu:/\n0::/\n") == 1073741824.0);
  CHECK(io::cgroup_memory_limit(v1.path(), "5:cpuacct,memory:/process_api/abc\n") == 1073741824.0);
}

TEST_CASE("machine memory: at most the physical memory and the address-space limit", "[machine_memory]") {
  const io::MachineMemory m = io::machine_memory();
  REQUIRE(m.bytes > 0.0);
  CHECK(m.bytes <= static_cast<double>(::sysconf(_SC_PHYS_PAGES)) * static_cast<double>(::sysconf(_SC_PAGE_SIZE)));
  CHECK_FALSE(m.limited_by.empty());
  rlimit as{};
  REQUIRE(::getrlimit(RLIMIT_AS, &as) == 0);
  if (as.rlim_cur != RLIM_INFINITY) CHECK(m.bytes <= static_cast<double>(as.rlim_cur));
  // The address-space limit set by `ulimit -v` is shown end to end in tests/cli/test_stop.cpp.
}
