#include "io/machine_memory.hpp"

#include <sys/resource.h>
#include <unistd.h>

#include <charconv>
#include <fstream>
#include <sstream>

namespace dobudget::io {
namespace {

std::optional<std::string> read_small_file(const std::filesystem::path& file) {
  std::ifstream in(file);
  if (!in) return std::nullopt;
  std::string text;
  std::getline(in, text);
  return text;
}

// The smallest value of `name` in `dir` and its parents up to `root` (both included; `dir` is
// below `root`). Directories that do not exist are passed over.
std::optional<double> smallest_up_to(const std::filesystem::path& root, std::filesystem::path dir,
                                     const std::string& name) {
  std::optional<double> best;
  for (;; dir = dir.parent_path()) {
    if (const auto text = read_small_file(dir / name))
      if (const auto v = cgroup_memory_value(*text); v && (!best || *v < *best)) best = v;
    if (dir == root || dir == dir.parent_path()) break;
  }
  return best;
}

// A cgroup path from /proc/self/cgroup ("/a/b") below `base`, with no way out of it ("..").
std::filesystem::path below(const std::filesystem::path& base, const std::string& path) {
  std::filesystem::path out = base;
  std::istringstream parts(path);
  for (std::string part; std::getline(parts, part, '/');)
    if (!part.empty() && part != "." && part != "..") out /= part;
  return out;
}

}  // namespace

std::optional<double> cgroup_memory_value(const std::string& text) {
  std::string t = text;
  while (!t.empty() && (t.back() == '\n' || t.back() == ' ')) t.pop_back();
  if (t.empty() || t == "max") return std::nullopt;
  unsigned long long v = 0;
  const auto [end, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || end != t.data() + t.size()) return std::nullopt;
  return static_cast<double>(v);
}

std::optional<double> cgroup_memory_limit(const std::filesystem::path& root, const std::string& proc_self_cgroup) {
  std::optional<double> best;
  const auto keep = [&](std::optional<double> v) {
    if (v && (!best || *v < *best)) best = v;
  };
  // Lines "ID:CONTROLLERS:PATH": "0::PATH" is cgroup v2; a v1 line lists "memory" among its controllers.
  std::istringstream lines(proc_self_cgroup);
  for (std::string line; std::getline(lines, line);) {
    const auto a = line.find(':'), b = a == std::string::npos ? a : line.find(':', a + 1);
    if (b == std::string::npos) continue;
    const std::string controllers = line.substr(a + 1, b - a - 1), path = line.substr(b + 1);
    if (line.compare(0, a, "0") == 0 && controllers.empty()) {
      keep(smallest_up_to(root, below(root, path), "memory.max"));
    } else if (("," + controllers + ",").find(",memory,") != std::string::npos) {
      keep(smallest_up_to(root / "memory", below(root / "memory", path), "memory.limit_in_bytes"));
    }
  }
  return best;
}

MachineMemory machine_memory() {
  MachineMemory out;
  const long pages = ::sysconf(_SC_PHYS_PAGES), page = ::sysconf(_SC_PAGE_SIZE);
  if (pages > 0 && page > 0) out = {static_cast<double>(pages) * static_cast<double>(page), "physical memory"};
  const auto tighter = [&](double bytes, const char* what) {
    if (bytes > 0.0 && (out.bytes <= 0.0 || bytes < out.bytes)) out = {bytes, what};
  };
  std::string self;
  if (std::ifstream in("/proc/self/cgroup"); in) {
    std::ostringstream ss;
    ss << in.rdbuf();
    self = ss.str();
  }
  if (const auto cgroup = cgroup_memory_limit("/sys/fs/cgroup", self)) tighter(*cgroup, "the memory limit of this job's cgroup");
  rlimit as{};
  if (::getrlimit(RLIMIT_AS, &as) == 0 && as.rlim_cur != RLIM_INFINITY)
    tighter(static_cast<double>(as.rlim_cur), "the address-space limit, ulimit -v");
  return out;
}

}  // namespace dobudget::io
