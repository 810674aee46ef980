#include "io/file_name.hpp"

#include <fmt/format.h>

#include "core/world/seeding.hpp"

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
  if (!out.empty()) return out;
  // Nothing left (a name in another script, or only punctuation): "study-" and 8 hex digits of
  // the name's FNV-1a hash (seeding.hpp), so that two such names do not share a directory.
  return text.empty() ? std::string("study") : fmt::format("study-{:08x}", name_key(text) & 0xffffffffu);
}

}  // namespace dobudget::io
