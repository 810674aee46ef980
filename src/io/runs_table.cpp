#include "io/runs_table.hpp"

#include <fmt/format.h>

#include <array>
#include <charconv>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string_view>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "core/running/unit.hpp"
#include "io/input_error.hpp"
#include "io/regular_file.hpp"

namespace dobudget::io {
namespace {

constexpr std::array<const char*, 14> runs_columns{"scenario", "environment", "replicate", "strategy",
                                                   "logged",   "pilot",       "model_kl",  "return_gap",
                                                   "loglik",   "iterations",  "converged", "note",
                                                   "starts",   "confirmed"};

// The cells of a line, as views into it (no copies: rank 0 of an MPI run decodes every row a
// worker sends, DEVELOPERS.md "MPI hand-out rate").
std::vector<std::string_view> split(std::string_view line) {
  std::vector<std::string_view> cells;
  cells.reserve(runs_columns.size());
  std::size_t start = 0;
  while (true) {
    const std::size_t comma = line.find(',', start);
    if (comma == std::string_view::npos) break;
    cells.push_back(line.substr(start, comma - start));
    start = comma + 1;
  }
  cells.push_back(line.substr(start));
  return cells;
}

// A cell as the user sees it in a message: quoted, at most 40 characters, control characters escaped.
std::string shown(std::string_view s) {
  std::string out;
  for (char c : s.substr(0, 40)) {
    const auto u = static_cast<unsigned char>(c);
    out += u < 0x20 || u == 0x7f ? fmt::format("\\x{:02x}", u) : std::string(1, c);
  }
  return "'" + out + (s.size() > 40 ? "...'" : "'");
}

// Reads the cells of one line; every error names the source, the line and the column.
class CellReader {
 public:
  CellReader(const std::vector<std::string_view>& cells, const std::string& source, int line)
      : cells_(cells), source_(source), line_(line) {}

  [[noreturn]] void fail(std::size_t column, const std::string& message) const {
    throw InputError(source_, line_, runs_columns[column], message);
  }

  // A non-negative integer in decimal digits (no sign, no spaces).
  int count(std::size_t column) const {
    const std::string_view s = cells_[column];
    int x = 0;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
    if (s.empty() || s[0] == '-' || ec != std::errc() || end != s.data() + s.size())
      fail(column, "expected an integer of at least 0, got " + shown(s));
    return x;
  }

  // Exact text to double (std::from_chars: no locale, and subnormals read back, unlike std::stod).
  double number(std::size_t column) const {
    const std::string_view s = cells_[column];
    double x = 0.0;
    if (s == "inf") return std::numeric_limits<double>::infinity();
    if (s == "-inf") return -std::numeric_limits<double>::infinity();
    if (s == "nan") return std::numeric_limits<double>::quiet_NaN();
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
    if (s.empty() || ec != std::errc() || end != s.data() + s.size()) fail(column, "expected a number, got " + shown(s));
    return x;
  }

  std::optional<double> optional_number(std::size_t column) const {
    if (cells_[column].empty()) return std::nullopt;
    return number(column);
  }

  std::string_view text(std::size_t column) const { return cells_[column]; }

 private:
  const std::vector<std::string_view>& cells_;
  const std::string& source_;
  int line_;
};

std::string keys(const RunRecord& r) {
  return fmt::format("{},{},{},{},{},{}", r.scenario, r.environment, r.replicate, name(r.strategy), r.logged, r.pilot);
}

}  // namespace

std::string runs_line(const RunRecord& r) {
  return fmt::format("{},{},{},{},{},{},{},{},{}", keys(r), csv_number(r.model_kl), csv_number(r.return_gap),
                     csv_number(r.loglik), r.iterations, r.converged ? 1 : 0, r.note, r.starts, r.confirmed ? 1 : 0);
}

RunRecord parse_runs_line(std::string_view line, const std::string& source, int line_number) {
  const auto c = split(line);
  if (c.size() != runs_columns.size())
    throw InputError(source, line_number, "",
                     fmt::format("expected {} cells separated by commas, found {}", runs_columns.size(), c.size()));
  const CellReader cells(c, source, line_number);
  RunRecord r;
  r.scenario = cells.count(0);
  r.environment = cells.count(1);
  r.replicate = cells.count(2);
  const auto s = parse_strategy(c[3]);
  if (!s) cells.fail(3, "unknown strategy " + shown(c[3]) + "; expected pilot-only, pooled or regime-aware");
  r.strategy = *s;
  r.logged = cells.count(4);
  r.pilot = cells.count(5);
  // model_kl is a KL divergence: >= 0 (Gibbs' inequality), +inf allowed, nan not.
  r.model_kl = cells.optional_number(6);
  if (r.model_kl && !(*r.model_kl >= 0.0)) cells.fail(6, "must be at least 0, got " + std::string(c[6]));
  r.return_gap = cells.optional_number(7);
  // +inf only for a cell with no data (pilot budget 0 without logged episodes: unit.hpp, kNoData).
  if (r.return_gap && !std::isfinite(*r.return_gap) && !(*r.return_gap > 0.0 && c[11] == kNoData))
    cells.fail(7, "must be a finite number or empty, got " + std::string(c[7]));
  r.loglik = cells.number(8);
  if (std::isnan(r.loglik)) cells.fail(8, "must be a number, got nan");
  r.iterations = cells.count(9);
  if (c[10] != "0" && c[10] != "1") cells.fail(10, "must be 0 or 1, got " + shown(c[10]));
  r.converged = c[10] == "1";
  for (char ch : c[11])
    if (static_cast<unsigned char>(ch) < 0x20 || ch == 0x7f) cells.fail(11, "holds a control character: " + shown(c[11]));
  r.note = std::string(c[11]);
  r.starts = cells.count(12);
  if (c[13] != "0" && c[13] != "1") cells.fail(13, "must be 0 or 1, got " + shown(c[13]));
  r.confirmed = c[13] == "1";
  if (r.confirmed && r.starts < 2) cells.fail(13, "is 1, but a best optimum is confirmed only by a second start (starts " + std::string(c[12]) + ")");
  return r;
}

std::string runs_csv(const std::vector<RunRecord>& rows) {
  std::string out = std::string(runs_header) + "\n";
  for (const auto& r : rows) out += runs_line(r) + "\n";
  return out;
}

std::string timings_csv(const std::vector<RunRecord>& rows) {
  std::string out = std::string(timings_header) + "\n";
  for (const auto& r : rows) out += fmt::format("{},{:.6f}\n", keys(r), r.fit_seconds);
  return out;
}

namespace {

// The lines of a CSV text: split at LF; a final LF ends the last line (it does not start an empty one).
std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::size_t pos = 0;
  while (pos < text.size()) {
    std::size_t nl = text.find('\n', pos);
    if (nl == std::string::npos) nl = text.size();
    lines.push_back(text.substr(pos, nl - pos));
    pos = nl + 1;
  }
  return lines;
}

}  // namespace

std::vector<RunRecord> parse_runs(const std::string& text, const std::string& source) {
  const std::vector<std::string> lines = lines_of(text);
  if (lines.empty()) throw InputError(source, 0, "", "is empty; expected the runs.csv header and one row per fit");
  if (lines[0] != runs_header)
    throw InputError(source, 1, "", fmt::format("not a dobudget runs.csv header (expected '{}')", runs_header));
  std::vector<RunRecord> rows;
  rows.reserve(lines.size() - 1);
  for (std::size_t i = 1; i < lines.size(); ++i) {
    const int n = static_cast<int>(i + 1);
    if (lines[i].empty()) throw InputError(source, n, "", "empty line; runs.csv has one row per line and no gaps");
    rows.push_back(parse_runs_line(lines[i], source, n));
  }
  return rows;
}

std::vector<RunRecord> read_runs(const std::filesystem::path& file) {
  std::string text;
  try {
    text = read_file(file);
  } catch (const InputError&) {
    throw;  // not a regular file: named as such
  } catch (const std::runtime_error&) {
    throw InputError(file.string(), 0, "", "cannot be read");
  }
  std::vector<RunRecord> rows = parse_runs(text, file.string());
  const auto timings = file.parent_path() / "timings.csv";
  if (std::filesystem::exists(timings)) read_fit_seconds(timings, rows);
  return rows;
}

void read_fit_seconds(const std::filesystem::path& timings, std::vector<RunRecord>& rows) {
  // Informative only (wall-clock seconds), but read as carefully: same keys, same order.
  const std::string source = timings.string();
  const std::uintmax_t cap = (rows.size() + 1) * max_row_bytes;
  std::uintmax_t size = 0;
  std::optional<std::string> read;
  try {
    read = read_regular_file(timings, cap, &size);
  } catch (const InputError&) {
    throw;  // not a regular file: named as such
  } catch (const std::runtime_error&) {
    throw InputError(source, 0, "", "cannot be read");
  }
  if (!read)
    throw InputError(source, 0, "",
                     fmt::format("is {} bytes, far more than the {} rows of runs.csv beside it can fill; delete "
                                 "timings.csv or run again",
                                 size, rows.size()));
  const std::string& text = *read;
  const std::vector<std::string> lines = lines_of(text);
  if (lines.empty() || lines[0] != timings_header)
    throw InputError(source, 1, "", fmt::format("not a dobudget timings.csv header (expected '{}')", timings_header));
  if (lines.size() != rows.size() + 1)
    throw InputError(source, 0, "",
                     fmt::format("has {} rows, runs.csv beside it {}; delete timings.csv or run again",
                                 lines.size() - 1, rows.size()));
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const int n = static_cast<int>(i + 2);
    const std::string& line = lines[i + 1];
    const std::size_t comma = line.rfind(',');
    if (comma == std::string::npos || line.substr(0, comma) != keys(rows[i]))
      throw InputError(source, n, "",
                       "keys differ from line " + std::to_string(n) + " of runs.csv (" + keys(rows[i]) + ")");
    const std::string cell = line.substr(comma + 1);
    double x = 0.0;
    const auto [end, ec] = std::from_chars(cell.data(), cell.data() + cell.size(), x);
    if (cell.empty() || ec != std::errc() || end != cell.data() + cell.size() || !(x >= 0.0) || !std::isfinite(x))
      throw InputError(source, n, "fit_seconds", "expected a finite number of at least 0, got " + shown(cell));
    rows[i].fit_seconds = x;
  }
}

}  // namespace dobudget::io
