// Making user text safe for each output format. User text is anything read from a study or model
// file or a run directory (the study name, scenario labels, swept keys and values, file names):
// it travels between people and is treated as hostile. Every writer puts such text into its
// output through exactly one of the functions below, never raw.
//
// The shared first step, printable_line(), makes the text one line of valid UTF-8 with no control
// characters, so that no user text can end a line (a comment, a heading, a table row), start a
// terminal escape sequence, or reorder what is shown:
//   * TAB, LF, VT, FF, CR, NEL (U+0085), LINE SEPARATOR and PARAGRAPH SEPARATOR (U+2028, U+2029)
//     become one space each;
//   * every other C0 control (U+0000-U+001F, e.g. ESC), DEL (U+007F), every C1 control
//     (U+0080-U+009F, e.g. CSI U+009B) and the bidirectional embedding, override and isolate
//     controls (U+202A-U+202E, U+2066-U+2069; Boucher and Anderson, "Trojan Source: Invisible
//     Vulnerabilities", 2021) become U+FFFD, so that the reader sees that something was there;
//   * each byte that is not part of a well-formed UTF-8 sequence (RFC 3629, Yergeau 2003,
//     section 4: no overlong forms, no surrogates, nothing above U+10FFFF) becomes U+FFFD.
// Everything else passes unchanged.
#pragma once
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace dobudget::io {

// One line of printable UTF-8, as above: for the terminal and for '#' comment lines of data files
// (a newline in a name cannot end the comment; a CR cannot either, which pandas would take as a
// line break).
std::string printable_line(std::string_view text);

// printable_line of each line of `text`, line breaks (LF) kept: for messages of several lines
// printed to the terminal (an error that quotes user text, a program's output).
std::string printable_text(std::string_view text);

// The position of the first byte of `text` that is not part of a well-formed UTF-8 sequence
// (RFC 3629, section 4), or nullopt when the whole text is well-formed.
std::optional<std::size_t> first_invalid_utf8(std::string_view text);

// A gnuplot string expression holding `text` (printable_line first): single-quoted pieces, each '
// of the text written as the constant "'" between them: it's -> 'it'."'".'s'.
// Checked against gnuplot 5.4 patchlevel 4: inside single quotes gnuplot expands no backslash
// escape, runs no `backquoted` command and substitutes no @macro; inside double quotes it runs
// backquoted commands (`"x`touch F`y"` creates F), so user text never goes between double quotes.
// (@macros are substituted only outside quotes.) The doubled quote '' inside single quotes works
// only in some places: 'a''b' gives a'b, but `print ''''` and `print '''a'` fail with "unexpected
// or unrecognized token", so it is not used. A newline would end the command, hence the
// flattening. Terminals are set `noenhanced`, so {, }, ^, _ and @ are not markup either.
std::string gnuplot_string(std::string_view text);

// A gnuplot string expression of several lines: gnuplot_string() of each, joined with ."\n". (a
// constant, like "'": the only double-quoted strings), e.g. 'line one'."\n".'line two'.
std::string gnuplot_lines(const std::vector<std::string>& lines);

// Markdown inline text showing `text` literally (printable_line first, so it cannot end a heading,
// a paragraph or a table row). A backslash goes before each ASCII punctuation character that can
// start Markdown syntax: \ ` * _ { } [ ] ( ) # + - . ! | ~, and also : (GitHub's extended autolinks
// "http://...") and $ (GitHub's math); CommonMark 0.31.2, section 2.4: any ASCII punctuation
// character may be backslash-escaped. & < > are written as the entity references &amp; &lt; &gt;
// (CommonMark section 2.5), which also hold in renderers without backslash escapes for them, so
// no HTML tag or entity can be formed. '@' is followed by U+2060 WORD JOINER (invisible, no
// width): GitHub's extended e-mail autolinks (GFM spec 0.29, section 6.9) turn "a@b.com" into a
// mailto: link even when the '@' is backslash-escaped or written &#64; (checked with cmark-gfm
// 0.29.0.gfm.6), and the joiner breaks the address. The pipe's \| is the escaped pipe that GFM
// table cells take (GFM section 4.10), so the result is good inside headings, paragraphs, table
// cells, link and image text.
std::string markdown_text(std::string_view text);

// HTML text showing `text` literally (printable_line first: no line break, control character or
// bidirectional control survives, and the text is valid UTF-8). & < > " ' become the character
// references &amp; &lt; &gt; &quot; &#39;, so the result is safe both as element content and inside
// a double- or single-quoted attribute value (HTML Living Standard, sec. 13.1.2.3 "Attributes" and
// 13.5 "Named character references"; the same five characters as rule 1 of the OWASP "Cross Site
// Scripting Prevention Cheat Sheet"). It is not safe inside <script> or <style>, in an unquoted
// attribute, or in a URL attribute (href, src): report.html puts user text in none of these.
std::string html_text(std::string_view text);

}  // namespace dobudget::io
