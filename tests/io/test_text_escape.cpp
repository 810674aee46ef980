// Making user text safe for each output format, src/io/text_escape.hpp. The gnuplot strings are
// also checked against the installed gnuplot (skipped with a WARN when it is absent).
#include <catch2/catch.hpp>

#include "temp_dir.hpp"

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/report.hpp"
#include "io/summary_table.hpp"
#include "io/child_process.hpp"
#include "io/text_escape.hpp"

namespace fs = std::filesystem;
using namespace dobudget;

namespace {

const std::string kReplacement = "\xEF\xBF\xBD";  // U+FFFD

// Everything the hostile study name of the report test holds, and a few more.
const std::string kHostile = std::string("x`touch PWNED`y @x 'q' \"d\" back\\slash\nline2](http://e)<script>&amp;\r\t") +
                             "\x1b[31m" + std::string(1, '\0') + "end";

bool contains(const std::string& hay, const std::string& needle) { return hay.find(needle) != std::string::npos; }

bool any_file_named(const fs::path& root, const std::string& name) {
  for (const auto& e : fs::recursive_directory_iterator(root))
    if (e.path().filename() == name) return true;
  return false;
}

}  // namespace

TEST_CASE("text_escape: printable_line flattens line breaks and replaces control characters", "[text_escape]") {
  // C0 and C1 control sets: ISO/IEC 6429 (ECMA-48, 5th edition 1991, sections 5.2 and 5.3).
  CHECK(io::printable_line("plain name-1.5") == "plain name-1.5");
  CHECK(io::printable_line("a\nb\r\nc\td\ve\ff") == "a b  c d e f");
  CHECK(io::printable_line("\x1b[31mred") == kReplacement + "[31mred");  // ESC: no terminal escape sequence
  CHECK(io::printable_line(std::string("a\0b", 3)) == "a" + kReplacement + "b");
  CHECK(io::printable_line("a\x7f" "b") == "a" + kReplacement + "b");                // DEL
  CHECK(io::printable_line("a\xC2\x9B" "31m") == "a" + kReplacement + "31m");       // CSI, U+009B (C1)
  CHECK(io::printable_line("a\xC2\x85" "b") == "a b");                               // NEL, U+0085
  CHECK(io::printable_line("a\xE2\x80\xA8" "b\xE2\x80\xA9" "c") == "a b c");         // U+2028, U+2029
  // Bidirectional overrides and isolates (Boucher and Anderson, "Trojan Source", 2021).
  CHECK(io::printable_line("a\xE2\x80\xAE" "b") == "a" + kReplacement + "b");       // U+202E RLO
  CHECK(io::printable_line("a\xE2\x81\xA6" "b") == "a" + kReplacement + "b");       // U+2066 LRI
  // Well-formed UTF-8 passes unchanged: 2, 3 and 4 byte sequences.
  CHECK(io::printable_line("caf\xC3\xA9 \xE2\x82\xAC \xE6\x97\xA5 \xF0\x9F\x98\x80") ==
        "caf\xC3\xA9 \xE2\x82\xAC \xE6\x97\xA5 \xF0\x9F\x98\x80");
  // Ill-formed UTF-8 (RFC 3629, Yergeau 2003, section 4): one U+FFFD per stray byte.
  CHECK(io::printable_line("a\xFF" "b") == "a" + kReplacement + "b");
  CHECK(io::printable_line("\xC0\xAF") == kReplacement + kReplacement);                 // overlong '/'
  CHECK(io::printable_line("\xED\xA0\x80") == kReplacement + kReplacement + kReplacement);  // surrogate U+D800
  CHECK(io::printable_line("\xF4\x90\x80\x80").substr(0, 3) == kReplacement);          // above U+10FFFF
  CHECK(io::printable_line("a\xE2\x82") == "a" + kReplacement + kReplacement);          // cut short
  CHECK(io::printable_line("\xE2\x82" "a") == kReplacement + kReplacement + "a");
  // Whatever goes in, one line without control characters comes out.
  const std::string out = io::printable_line(kHostile);
  for (char c : out) CHECK((static_cast<unsigned char>(c) >= 0x20 && c != 0x7f));
}

TEST_CASE("text_escape: gnuplot_string is single-quoted pieces joined by the constant \"'\"", "[text_escape]") {
  // The rules are checked against the installed gnuplot in the next test (text_escape.hpp says what
  // gnuplot 5.4 does with quotes, backquotes and @macros).
  CHECK(io::gnuplot_string("plain") == "'plain'");
  CHECK(io::gnuplot_string("it's") == "'it'.\"'\".'s'");
  CHECK(io::gnuplot_string("'") == "''.\"'\".''");
  CHECK(io::gnuplot_string("a`id`b @m \"q\" \\n") == "'a`id`b @m \"q\" \\n'");
  CHECK(io::gnuplot_string("two\nlines") == "'two lines'");
  CHECK(io::gnuplot_string("") == "''");
  CHECK(io::gnuplot_lines({"one", "it's two"}) == "'one'.\"\\n\".'it'.\"'\".'s two'");
  CHECK(io::gnuplot_lines({"only"}) == "'only'");
}

TEST_CASE("text_escape: gnuplot runs no command and expands nothing in gnuplot_string", "[text_escape]") {
  if (!io::find_program("gnuplot")) {
    WARN("gnuplot is not installed (Debian: gnuplot-nox): gnuplot_string is not checked against it");
    return;
  }
  test::TempDir tmp;
  // gnuplot prints each string as it reads it; a double-quoted control line shows that this gnuplot
  // does run backquotes inside double quotes (the bug gnuplot_string avoids).
  const std::vector<std::string> texts = {kHostile, "`touch PWNED`", "@x", "'", "''", "'''a'", "a''''b",
                                          "it's", "\\", "end\\", "a;b # c", "%s %d {\\bf x}", "$0 $HOME",
                                          std::string("x\"`touch PWNED`\"y")};
  std::string script = "set print 'out.txt'\nx = 'macro'\n";
  for (const auto& t : texts) script += "print " + io::gnuplot_string(t) + "\n";
  script += "print " + io::gnuplot_lines({"first `touch PWNED`", "second @x"}) + "\n";
  script += "print \"control `echo ran`\"\n";
  io::write_file_atomically(tmp.path() / "s.gp", script);
  const auto gnuplot = io::run_child(*io::find_program("gnuplot"), {"s.gp"}, tmp.path());
  INFO(gnuplot.output);
  REQUIRE(gnuplot.exit_code == 0);
  std::string expected;
  for (const auto& t : texts) expected += io::printable_line(t) + "\n";
  expected += "first `touch PWNED`\nsecond @x\ncontrol ran\n";
  CHECK(io::read_file(tmp.path() / "out.txt") == expected);
  CHECK_FALSE(any_file_named(tmp.path(), "PWNED"));
}

TEST_CASE("text_escape: markdown_text escapes syntax characters, & < > and line breaks", "[text_escape]") {
  // CommonMark 0.31.2, section 2.4 (backslash escapes: any ASCII punctuation) and 2.5 (entity
  // references); GitHub extended autolinks and math for ':' and '$'.
  CHECK(io::markdown_text("plain text 42") == "plain text 42");
  CHECK(io::markdown_text("logging.privilege=0.9") == "logging\\.privilege=0\\.9");
  CHECK(io::markdown_text("[a](http://e)") == "\\[a\\]\\(http\\://e\\)");
  CHECK(io::markdown_text("<script>alert(1)</script>") == "&lt;script&gt;alert\\(1\\)&lt;/script&gt;");
  CHECK(io::markdown_text("&amp; &#60;") == "&amp;amp; &amp;\\#60;");
  CHECK(io::markdown_text("`code` *em* _em_ ~~s~~ # h") == "\\`code\\` \\*em\\* \\_em\\_ \\~\\~s\\~\\~ \\# h");
  CHECK(io::markdown_text("{+-!|}$\\") == "\\{\\+\\-\\!\\|\\}\\$\\\\");
  CHECK(io::markdown_text("a\nb\r\n# c") == "a b  \\# c");  // no new line, so no heading
  CHECK(io::markdown_text("caf\xC3\xA9") == "caf\xC3\xA9");
  // Every listed character is preceded by a backslash, whatever surrounds it.
  for (char c : std::string("\\`*_{}[]()#+-.!|~:$")) {
    INFO(c);
    CHECK(io::markdown_text(std::string("a") + c + "b") == std::string("a\\") + c + "b");
  }
  // A table cell: the pipe escaped (GFM spec 0.29, section 4.10), the row kept on one line.
  CHECK(io::markdown_text("a|b\nc") == "a\\|b c");
  // '@' is followed by U+2060 WORD JOINER, so that no e-mail autolink forms (GFM 0.29, sec. 6.9).
  CHECK(io::markdown_text("a@b.com") == "a@\xE2\x81\xA0" "b\\.com");
}

TEST_CASE("text_escape: printable_text keeps line breaks and cleans each line; first_invalid_utf8", "[text_escape]") {
  CHECK(io::printable_text("one\ntwo\x1b[2J\nthree") == "one\ntwo\xEF\xBF\xBD[2J\nthree");
  CHECK(io::printable_text("a\tb\r\n") == "a b \n");
  CHECK(io::printable_text("") == "");
  // RFC 3629, section 4: a lone continuation byte, an overlong '/', a surrogate, past U+10FFFF.
  CHECK_FALSE(io::first_invalid_utf8("plain caf\xC3\xA9 \xF0\x9F\x8C\xB1").has_value());
  CHECK(io::first_invalid_utf8("ab\x80") == std::optional<std::size_t>(2));
  CHECK(io::first_invalid_utf8("\xC0\xAF") == std::optional<std::size_t>(0));
  CHECK(io::first_invalid_utf8("x\xED\xA0\x80") == std::optional<std::size_t>(1));
  CHECK(io::first_invalid_utf8("\xF4\x90\x80\x80") == std::optional<std::size_t>(0));
  CHECK(io::first_invalid_utf8("cut \xE2\x82") == std::optional<std::size_t>(4));
}

TEST_CASE("text_escape: the terminal tables show user text without control characters", "[text_escape]") {
  Study study;
  study.name = "t";
  for (int i = 0; i < 2; ++i) {
    Scenario sc;
    sc.index = i;
    const std::string value = "v" + std::to_string(i) + "\x1b]0;title\x07\n";
    sc.assignments = {{"key\x1b[2J", value}};
    sc.label = "key\x1b[2J=" + value;
    study.scenarios.push_back(sc);
  }
  AnswerRow r;
  r.target = 0.02;
  r.assurance = 0.8;
  r.needed_pilot = 10;
  r.status = AnswerStatus::reached;
  std::vector<AnswerRow> rows{r, r};
  rows[1].scenario = 1;
  const std::string table = io::format_answer_table(rows, &study);
  const std::string summary = io::format_summary(study, {});
  for (const std::string& text : {table, summary}) {
    INFO(text);
    CHECK_FALSE(contains(text, "\x1b"));
    CHECK_FALSE(contains(text, "\x07"));
    CHECK(contains(text, kReplacement + "[2J"));
  }
  // One line per row: header, two rows, a blank line, the worst-case title, its header and row.
  CHECK(std::count(table.begin(), table.end(), '\n') == 7);
  CHECK(contains(summary, "scenario 1: key" + kReplacement + "[2J=v1" + kReplacement + "]0;title" + kReplacement +
                              " \n"));
}

TEST_CASE("text_escape: html_text writes & < > \" ' as character references, after printable_line", "[text_escape][html]") {
  // HTML Living Standard, sec. 13.5 (named character references &amp; &lt; &gt; &quot;) and
  // 13.1.4 (numeric references: &#39; is U+0027); the five characters of rule 1 of the OWASP
  // "Cross Site Scripting Prevention Cheat Sheet".
  CHECK(io::html_text("plain text 42") == "plain text 42");
  CHECK(io::html_text("<script>alert(1)</script>") == "&lt;script&gt;alert(1)&lt;/script&gt;");
  CHECK(io::html_text("a & b") == "a &amp; b");
  CHECK(io::html_text("&amp;") == "&amp;amp;");  // a reference in the text is shown, not taken
  CHECK(io::html_text("\"d\" 'q'") == "&quot;d&quot; &#39;q&#39;");
  CHECK(io::html_text("caf\xC3\xA9") == "caf\xC3\xA9");
  // printable_line first: no line break, no ESC, no bidirectional override (Boucher and Anderson 2021).
  CHECK(io::html_text("a\nb") == "a b");
  CHECK(io::html_text("x\xE2\x80\xAEy") == "x" + kReplacement + "y");  // U+202E RIGHT-TO-LEFT OVERRIDE
  CHECK(io::html_text("x\xE2\x81\xA6y") == "x" + kReplacement + "y");  // U+2066 LEFT-TO-RIGHT ISOLATE
  CHECK(io::html_text("\x1b[31m") == kReplacement + "[31m");
  // No character that can open a tag, end an attribute value or start a reference is left.
  for (const std::string& text : {kHostile, std::string("\"'><&")}) {
    const std::string h = io::html_text(text);
    INFO(h);
    CHECK(h.find_first_of("<>\"'") == std::string::npos);
    for (std::size_t i = h.find('&'); i != std::string::npos; i = h.find('&', i + 1)) {
      const bool reference = h.compare(i, 5, "&amp;") == 0 || h.compare(i, 4, "&lt;") == 0 ||
                             h.compare(i, 4, "&gt;") == 0 || h.compare(i, 6, "&quot;") == 0 ||
                             h.compare(i, 5, "&#39;") == 0;
      CHECK(reference);
    }
  }
}

TEST_CASE("text_escape: an HTML parser reads html_text back as the text, in content and in attributes",
          "[text_escape][html]") {
  // Reference: libxml2's HTML parser (xmllint --html, Debian libxml2-utils), an implementation
  // outside the project: the text it reads from the element and from a quoted attribute must be
  // printable_line(text) exactly, and the page must hold no element but the ones written.
  const auto xmllint = io::find_program("xmllint");
  if (!xmllint) {
    WARN("xmllint is not installed (Debian: libxml2-utils): html_text is checked as text only");
    return;
  }
  dobudget::test::TempDir tmp;
  const std::vector<std::string> texts = {kHostile, "<script>alert('x')</script> & \"quotes\"",
                                          "\xE2\x80\xAE" "evil\xE2\x81\xA6 name", "a&amp;b &#60; &lt;"};
  for (const std::string& text : texts) {
    const std::string h = io::html_text(text);
    const fs::path page = tmp.write("page.html", "<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>t</title>"
                                                 "</head><body><p title=\"" + h + "\" lang='" + h + "'>" + h +
                                                 "</p></body></html>\n");
    auto xpath = [&](const std::string& expression) {
      const auto r = io::run_child(*xmllint, {"--html", "--xpath", expression, page.string()}, tmp.path());
      REQUIRE(r.started);
      // xmllint prints the result and a line feed
      return !r.output.empty() && r.output.back() == '\n' ? r.output.substr(0, r.output.size() - 1) : r.output;
    };
    INFO(h);
    const std::string expected = io::printable_line(text);
    CHECK(xpath("string(//p)") == expected);
    CHECK(xpath("string(//p/@title)") == expected);
    CHECK(xpath("string(//p/@lang)") == expected);
    CHECK(xpath("count(//body//*)") == "1");
  }
}
