#include "io/regular_file.hpp"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <stdexcept>

#include "io/input_error.hpp"

namespace dobudget::io {
namespace {

// "a pipe (FIFO)", "a directory", ...: what a file that is not regular is, for messages.
std::string kind_of(mode_t mode) {
  if (S_ISFIFO(mode)) return "a pipe (FIFO)";
  if (S_ISDIR(mode)) return "a directory";
  if (S_ISSOCK(mode)) return "a socket";
  if (S_ISCHR(mode) || S_ISBLK(mode)) return "a device";
  if (S_ISLNK(mode)) return "a symbolic link";
  return "not a file";
}

[[noreturn]] void refuse_kind(const std::filesystem::path& file, mode_t mode) {
  throw InputError(file.string(), 0, "",
                   "is not a regular file but " + kind_of(mode) +
                       "; dobudget reads and writes only regular files (a pipe or a device could block it or feed "
                       "it without end): remove it, or use a fresh --out directory");
}

[[noreturn]] void refuse_link(const std::filesystem::path& file) {
  throw InputError(file.string(), 0, "",
                   "is a symbolic link; dobudget writes this file in place and follows no link there (it could "
                   "point at any file): remove it, or use a fresh --out directory");
}

}  // namespace

int open_regular_file(const std::filesystem::path& file, int flags, Links links, struct stat* info, mode_t mode) {
  // A name that is plainly not a regular file is refused before open(2), which for a device can
  // have effects of its own; the fstat below is what makes the check race-free.
  struct stat named {};
  const int looked = links == Links::refuse ? ::lstat(file.c_str(), &named) : ::stat(file.c_str(), &named);
  if (looked == 0) {
    if (links == Links::refuse && S_ISLNK(named.st_mode)) refuse_link(file);
    if (!S_ISREG(named.st_mode)) refuse_kind(file, named.st_mode);
  }
  flags |= O_CLOEXEC | O_NONBLOCK;
  if (links == Links::refuse) flags |= O_NOFOLLOW;
  const int fd = ::open(file.c_str(), flags, mode);
  if (fd < 0) {
    const int err = errno;
    // Replaced by something else since the lstat: ELOOP is O_NOFOLLOW meeting a link; ENXIO a FIFO
    // without a reader opened for writing, or a socket; EISDIR a directory opened for writing.
    if (links == Links::refuse && err == ELOOP) refuse_link(file);
    if (err == ENXIO || err == EISDIR) {
      struct stat now {};
      refuse_kind(file, ::lstat(file.c_str(), &now) == 0 ? now.st_mode : (err == EISDIR ? S_IFDIR : S_IFIFO));
    }
    errno = err;
    return -1;
  }
  struct stat held {};
  if (::fstat(fd, &held) != 0) {
    ::close(fd);
    throw std::runtime_error("cannot open " + file.string() + ": fstat failed");
  }
  if (!S_ISREG(held.st_mode)) {
    ::close(fd);
    refuse_kind(file, held.st_mode);
  }
  const int fl = ::fcntl(fd, F_GETFL);
  if (fl < 0 || ::fcntl(fd, F_SETFL, fl & ~O_NONBLOCK) != 0) {
    ::close(fd);
    throw std::runtime_error("cannot open " + file.string() + ": fcntl failed");
  }
  if (info != nullptr) *info = held;
  return fd;
}

std::string read_descriptor(int fd, const std::filesystem::path& file, std::size_t max_bytes) {
  std::string out;
  char buf[65536];
  while (out.size() < max_bytes) {
    const std::size_t want = std::min(sizeof buf, max_bytes - out.size());
    const ssize_t n = ::pread(fd, buf, want, static_cast<off_t>(out.size()));
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) throw std::runtime_error("cannot read " + file.string());
    if (n == 0) break;
    out.append(buf, static_cast<std::size_t>(n));
  }
  return out;
}

namespace {

// Opens `file` for reading (open_regular_file, links followed), or throws naming it.
int open_for_reading(const std::filesystem::path& file, struct stat* info) {
  const int fd = open_regular_file(file, O_RDONLY, Links::follow, info);
  if (fd < 0)
    throw std::runtime_error("cannot read " + file.string() + (errno == ENOENT ? ": no such file" : ""));
  return fd;
}

}  // namespace

std::optional<std::string> read_regular_file(const std::filesystem::path& file, std::uintmax_t max_bytes,
                                             std::uintmax_t* size) {
  struct stat info {};
  const int fd = open_for_reading(file, &info);
  const auto bytes = static_cast<std::uintmax_t>(info.st_size);
  if (size != nullptr) *size = bytes;
  if (bytes > max_bytes) {
    ::close(fd);
    return std::nullopt;
  }
  try {
    // At most max_bytes even if the file grows meanwhile.
    std::string text = read_descriptor(fd, file, static_cast<std::size_t>(max_bytes));
    ::close(fd);
    return text;
  } catch (...) {
    ::close(fd);
    throw;
  }
}

std::string read_file_start(const std::filesystem::path& file, std::size_t max_bytes) {
  const int fd = open_for_reading(file, nullptr);
  try {
    std::string text = read_descriptor(fd, file, max_bytes);
    ::close(fd);
    return text;
  } catch (...) {
    ::close(fd);
    throw;
  }
}

}  // namespace dobudget::io
