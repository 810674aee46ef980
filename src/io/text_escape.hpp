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
#include <string>
#include <string_view>
#include <vector>

namespace dobudget::io {

// One line of printable UTF-8, as above: for the terminal and for '#' comment lines of data files
// (a newline in a name cannot end the comment; a CR cannot either, which pandas would take as a
// line break).
std::string printable_line(std::string_view text);

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
// no HTML tag or entity can be formed. Good inside headings, paragraphs, link and image text.
std::string markdown_text(std::string_view text);

// A cell of a Markdown (GitHub Flavored Markdown) table: markdown_text(), whose \| is the escaped
// pipe that GFM table cells take (GFM spec 0.29, section 4.10) and whose flattened line breaks
// keep the row on one line.
std::string markdown_cell(std::string_view text);

// A CSV field (RFC 4180: Shafranovich 2005, section 2): as is, unless it holds a comma, a double
// quote, CR or LF; then enclosed in double quotes with each double quote doubled. The text itself is
// kept (line breaks included), so that a CSV reader gets back exactly `text`.
std::string csv_field(std::string_view text);

}  // namespace dobudget::io
