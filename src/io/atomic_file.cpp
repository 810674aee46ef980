#include "io/atomic_file.hpp"

#include <cstdio>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <unistd.h>

namespace dobudget::io {

void write_file_atomically(const std::filesystem::path& file, std::string_view contents) {
  const auto tmp = std::filesystem::path(file.string() + ".tmp." + std::to_string(::getpid()));
  {
    std::FILE* f = std::fopen(tmp.c_str(), "wb");
    if (f == nullptr) throw std::runtime_error("cannot write " + tmp.string());
    const bool ok = std::fwrite(contents.data(), 1, contents.size(), f) == contents.size() && std::fflush(f) == 0 &&
                    ::fsync(::fileno(f)) == 0;
    std::fclose(f);
    if (!ok) {
      std::filesystem::remove(tmp);
      throw std::runtime_error("cannot write " + tmp.string());
    }
  }
  std::filesystem::rename(tmp, file);
}

std::string read_file(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw std::runtime_error("cannot read " + file.string());
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

}  // namespace dobudget::io
