// Opening a file that someone else may have placed (a run directory travels between people): only
// a regular file is opened. A FIFO (open(2) would wait for a writer, read(2) for data, neither of
// which may ever come), a device (/dev/zero reads without end), a socket or a directory is refused,
// and so is a symbolic link where the caller asks (Links::refuse, for files dobudget writes in
// place: a link named units.journal would have the records appended to whatever it points at).
//
// The check cannot be raced: open(2) with O_NONBLOCK (a FIFO opens at once instead of waiting) and
// O_NOFOLLOW for Links::refuse, then fstat(2) of the descriptor itself, not a second lookup of the
// name; O_NONBLOCK is cleared again (fcntl F_SETFL) before the descriptor is handed out. Every
// descriptor is O_CLOEXEC (no child process, such as gnuplot, inherits it).
#pragma once
#include <sys/stat.h>

#include <cstddef>
#include <filesystem>
#include <cstdint>
#include <limits>
#include <optional>
#include <string>

namespace dobudget::io {

enum class Links {
  follow,  // reading: a link to a regular file is as good as the file
  refuse,  // writing in place, or locking: the name itself must be the regular file
};

// open(2) of `file` with `flags` (O_CLOEXEC and, for Links::refuse, O_NOFOLLOW added) and `mode`
// (for O_CREAT). Returns the descriptor of a regular file; *info, when given, receives its fstat.
// Returns -1 with errno set when open(2) fails for another reason than the file's kind (ENOENT,
// EACCES, EEXIST under O_EXCL, ...): the caller decides. Throws InputError (input_error.hpp) naming
// the file when it exists but is not a regular file, or is a symbolic link and links is refuse:
//   runs/x/units.journal: is not a regular file (a pipe (FIFO)); ...
int open_regular_file(const std::filesystem::path& file, int flags, Links links, struct stat* info = nullptr,
                      mode_t mode = 0666);

// Up to max_bytes of the file open at `fd`, from its start (pread(2): the file offset is left as
// it is). Throws std::runtime_error naming `file` on a read error.
std::string read_descriptor(int fd, const std::filesystem::path& file,
                            std::size_t max_bytes = std::numeric_limits<std::size_t>::max());

// The whole of the regular file `file` (symbolic links followed) when it holds at most max_bytes;
// nullopt, having read nothing, when it holds more. *size, when given, receives its size. Throws
// InputError as open_regular_file does, std::runtime_error naming the file when it is missing or
// cannot be read.
std::optional<std::string> read_regular_file(const std::filesystem::path& file, std::uintmax_t max_bytes,
                                             std::uintmax_t* size = nullptr);

// The first max_bytes (or fewer) of the regular file `file` (links followed), the rest unread.
// Throws as read_regular_file does.
std::string read_file_start(const std::filesystem::path& file, std::size_t max_bytes);

}  // namespace dobudget::io
