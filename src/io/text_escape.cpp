// Making user text safe for each output format; see text_escape.hpp.
#include "io/text_escape.hpp"

#include <algorithm>
#include <cstdint>

namespace dobudget::io {

namespace {

constexpr std::string_view kReplacement = "\xEF\xBF\xBD";  // U+FFFD REPLACEMENT CHARACTER

// The length of the well-formed UTF-8 sequence at s[i] and its code point, or 0 when s[i] does
// not start one. RFC 3629, section 4:
//   UTF8-2 = %xC2-DF UTF8-tail
//   UTF8-3 = %xE0 %xA0-BF UTF8-tail / %xE1-EC 2( UTF8-tail ) / %xED %x80-9F UTF8-tail / %xEE-EF 2( UTF8-tail )
//   UTF8-4 = %xF0 %x90-BF 2( UTF8-tail ) / %xF1-F3 3( UTF8-tail ) / %xF4 %x80-8F 2( UTF8-tail )
std::size_t utf8_sequence(std::string_view s, std::size_t i, std::uint32_t& code) {
  const auto byte = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char b0 = byte(i);
  if (b0 < 0x80) {
    code = b0;
    return 1;
  }
  std::size_t n = 0;
  unsigned char lo = 0x80, hi = 0xBF;  // the allowed range of the second byte
  if (b0 >= 0xC2 && b0 <= 0xDF) n = 2;
  else if (b0 >= 0xE0 && b0 <= 0xEF) {
    n = 3;
    if (b0 == 0xE0) lo = 0xA0;  // no overlong forms
    if (b0 == 0xED) hi = 0x9F;  // no surrogates
  } else if (b0 >= 0xF0 && b0 <= 0xF4) {
    n = 4;
    if (b0 == 0xF0) lo = 0x90;  // no overlong forms
    if (b0 == 0xF4) hi = 0x8F;  // nothing above U+10FFFF
  } else {
    return 0;
  }
  if (i + n > s.size()) return 0;
  if (byte(i + 1) < lo || byte(i + 1) > hi) return 0;
  for (std::size_t k = 2; k < n; ++k)
    if (byte(i + k) < 0x80 || byte(i + k) > 0xBF) return 0;
  code = b0 & (n == 2 ? 0x1F : n == 3 ? 0x0F : 0x07);
  for (std::size_t k = 1; k < n; ++k) code = (code << 6) | (byte(i + k) & 0x3F);
  return n;
}

bool line_break_or_tab(std::uint32_t c) {
  return (c >= 0x09 && c <= 0x0D) || c == 0x85 || c == 0x2028 || c == 0x2029;
}

bool control(std::uint32_t c) {
  return c < 0x20 || (c >= 0x7F && c <= 0x9F) || (c >= 0x202A && c <= 0x202E) || (c >= 0x2066 && c <= 0x2069);
}

}  // namespace

std::string printable_line(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (std::size_t i = 0; i < text.size();) {
    std::uint32_t code = 0;
    const std::size_t n = utf8_sequence(text, i, code);
    if (n == 0) {  // a stray byte: one replacement character for it
      out += kReplacement;
      ++i;
      continue;
    }
    if (line_break_or_tab(code)) out += ' ';
    else if (control(code)) out += kReplacement;
    else out.append(text.substr(i, n));
    i += n;
  }
  return out;
}

std::string printable_text(std::string_view text) {
  std::string out;
  for (std::size_t start = 0; start <= text.size();) {
    const std::size_t end = std::min(text.find('\n', start), text.size());
    if (start) out += '\n';
    out += printable_line(text.substr(start, end - start));
    start = end + 1;
  }
  return out;
}

std::optional<std::size_t> first_invalid_utf8(std::string_view text) {
  for (std::size_t i = 0; i < text.size();) {
    std::uint32_t code = 0;
    const std::size_t n = utf8_sequence(text, i, code);
    if (n == 0) return i;
    i += n;
  }
  return std::nullopt;
}

std::string gnuplot_string(std::string_view text) {
  std::string out = "'";
  for (char c : printable_line(text)) {
    if (c == '\'') out += "'.\"'\".'";  // close, the constant "'", reopen: 'it'."'".'s'
    else out += c;
  }
  return out + "'";
}

std::string gnuplot_lines(const std::vector<std::string>& lines) {
  std::string out;
  for (std::size_t i = 0; i < lines.size(); ++i) {
    if (i) out += ".\"\\n\".";
    out += gnuplot_string(lines[i]);
  }
  return lines.empty() ? gnuplot_string("") : out;
}

std::string markdown_text(std::string_view text) {
  constexpr std::string_view escaped = "\\`*_{}[]()#+-.!|~:$";
  constexpr std::string_view word_joiner = "\xE2\x81\xA0";  // U+2060: see text_escape.hpp on '@'
  std::string out;
  for (char c : printable_line(text)) {
    if (c == '&') out += "&amp;";
    else if (c == '<') out += "&lt;";
    else if (c == '>') out += "&gt;";
    else if (c == '@') out.append("@").append(word_joiner);
    else {
      if (escaped.find(c) != std::string_view::npos) out += '\\';
      out += c;
    }
  }
  return out;
}

std::string html_text(std::string_view text) {
  std::string out;
  for (char c : printable_line(text)) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

}  // namespace dobudget::io
