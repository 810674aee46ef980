// Files appear whole or not at all: contents go to a temporary name in the same directory,
// are flushed, then renamed over the target (rename(2) is atomic within a file system; POSIX.1-2017).
#pragma once
#include <filesystem>
#include <string>
#include <string_view>

namespace dobudget::io {

void write_file_atomically(const std::filesystem::path& file, std::string_view contents);
// The whole of a regular file (symbolic links followed); std::runtime_error naming the file when
// it is missing or unreadable, InputError (a std::runtime_error) when it is not a regular file (a
// device or a pipe: regular_file.hpp).
std::string read_file(const std::filesystem::path& file);

}  // namespace dobudget::io
