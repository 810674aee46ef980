#include "io/file_name.hpp"

namespace dobudget::io {

std::string safe_file_name(std::string_view text) {
  constexpr std::size_t max_length = 80;
  const auto kept = [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '.' || c == '_' ||
           c == '-';
  };
  std::string out;
  for (char c : text) {
    const char next = kept(c) ? c : '-';
    if (next == '-' && !out.empty() && out.back() == '-') continue;  // one '-' per run
    if (out.empty() && (next == '.' || next == '-')) continue;      // no leading '.' or '-'
    out += next;
  }
  if (out.size() > max_length) out.resize(max_length);
  while (!out.empty() && out.back() == '-') out.pop_back();
  return out.empty() ? std::string("study") : out;
}

}  // namespace dobudget::io
