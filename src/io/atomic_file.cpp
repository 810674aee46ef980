#include "io/atomic_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <vector>

namespace dobudget::io {

void write_file_atomically(const std::filesystem::path& file, std::string_view contents) {
  // A fresh temporary name made by mkstemp (created with O_EXCL, never an existing file or a link
  // someone placed there), written, flushed to disk, then renamed over the target.
  std::string name = file.string() + ".tmp.XXXXXX";
  std::vector<char> buffer(name.begin(), name.end());
  buffer.push_back('\0');
  const int fd = ::mkostemp(buffer.data(), O_CLOEXEC);
  if (fd < 0) throw std::runtime_error("cannot write " + file.string() + ": cannot create a temporary file beside it");
  const std::filesystem::path tmp(buffer.data());
  bool ok = ::fchmod(fd, 0644) == 0;
  for (std::size_t done = 0; ok && done < contents.size();) {
    const ssize_t n = ::write(fd, contents.data() + done, contents.size() - done);
    if (n < 0 && errno == EINTR) continue;
    ok = n > 0;
    if (ok) done += static_cast<std::size_t>(n);
  }
  ok = ok && ::fsync(fd) == 0;
  ok = (::close(fd) == 0) && ok;
  std::error_code ec;
  if (!ok) {
    std::filesystem::remove(tmp, ec);
    throw std::runtime_error("cannot write " + file.string() + " (disk full or not writable?)");
  }
  std::filesystem::rename(tmp, file, ec);
  if (ec) {
    std::filesystem::remove(tmp, ec);
    throw std::runtime_error("cannot write " + file.string() + ": cannot rename the temporary file into place");
  }
}

std::string read_file(const std::filesystem::path& file) {
  // Only regular files: a device (/dev/zero) or a pipe placed in a run directory would make us
  // read without end, or block.
  std::error_code ec;
  if (std::filesystem::exists(file, ec) && !std::filesystem::is_regular_file(file, ec))
    throw std::runtime_error("cannot read " + file.string() + ": not a regular file");
  std::ifstream in(file, std::ios::binary);
  if (!in) throw std::runtime_error("cannot read " + file.string());
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

}  // namespace dobudget::io
