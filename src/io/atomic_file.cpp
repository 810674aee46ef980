#include "io/atomic_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <limits>
#include <stdexcept>
#include <vector>

#include "io/regular_file.hpp"

namespace dobudget::io {

void write_file_atomically(const std::filesystem::path& file, std::string_view contents) {
  // A fresh temporary name made by mkstemp (created with O_EXCL, never an existing file or a link
  // someone placed there), written, flushed to disk, then renamed over the target. rename(2)
  // replaces the name: a symbolic link (or a pipe) placed at `file` is replaced, never followed, so
  // nothing outside the directory is written.
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
  // Only regular files (regular_file.hpp): a device (/dev/zero) or a pipe placed in a run
  // directory would make us read without end, or block.
  return *read_regular_file(file, std::numeric_limits<std::uintmax_t>::max());
}

}  // namespace dobudget::io
