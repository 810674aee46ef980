#include "io/runs_table.hpp"

#include <fmt/format.h>

#include <charconv>
#include <limits>
#include <sstream>
#include <stdexcept>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"

namespace dobudget::io {
namespace {

std::vector<std::string> split(const std::string& line) {
  std::vector<std::string> cells;
  std::string cell;
  for (char c : line) {
    if (c == ',') {
      cells.push_back(cell);
      cell.clear();
    } else {
      cell += c;
    }
  }
  cells.push_back(cell);
  return cells;
}

// Exact text to double (std::from_chars: no locale, and subnormals read back, unlike std::stod).
double parse_double(const std::string& s) {
  double x = 0.0;
  if (s == "inf") return std::numeric_limits<double>::infinity();
  if (s == "-inf") return -std::numeric_limits<double>::infinity();
  if (s == "nan") return std::numeric_limits<double>::quiet_NaN();
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
  if (ec != std::errc() || end != s.data() + s.size()) throw std::runtime_error("malformed number '" + s + "'");
  return x;
}

std::optional<double> parse_optional(const std::string& s) {
  if (s.empty()) return std::nullopt;
  return parse_double(s);
}

std::string keys(const RunRecord& r) {
  return fmt::format("{},{},{},{},{},{}", r.scenario, r.environment, r.replicate, name(r.strategy), r.logged, r.pilot);
}

}  // namespace

std::string runs_line(const RunRecord& r) {
  return fmt::format("{},{},{},{},{},{},{},{},{}", keys(r), csv_number(r.model_kl), csv_number(r.return_gap),
                     csv_number(r.loglik), r.iterations, r.converged ? 1 : 0, r.note, r.starts, r.confirmed ? 1 : 0);
}

RunRecord parse_runs_line(const std::string& line) {
  const auto c = split(line);
  if (c.size() != 14) throw std::runtime_error("expected 14 cells, found " + std::to_string(c.size()));
  RunRecord r;
  try {
    r.scenario = std::stoi(c[0]);
    r.environment = std::stoi(c[1]);
    r.replicate = std::stoi(c[2]);
    const auto s = parse_strategy(c[3]);
    if (!s) throw std::runtime_error("unknown strategy '" + c[3] + "'");
    r.strategy = *s;
    r.logged = std::stoi(c[4]);
    r.pilot = std::stoi(c[5]);
    r.model_kl = parse_optional(c[6]);
    r.return_gap = parse_optional(c[7]);
    r.loglik = parse_double(c[8]);
    r.iterations = std::stoi(c[9]);
    r.converged = c[10] == "1";
    r.note = c[11];
    r.starts = std::stoi(c[12]);
    r.confirmed = c[13] == "1";
  } catch (const std::logic_error& e) {
    throw std::runtime_error(std::string("malformed number: ") + e.what());
  }
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

std::vector<RunRecord> read_runs(const std::filesystem::path& file) {
  std::istringstream in(read_file(file));
  std::string line;
  std::getline(in, line);
  if (line != runs_header) throw std::runtime_error(file.string() + ":1: not a dobudget runs.csv header");
  std::vector<RunRecord> rows;
  int n = 1;
  while (std::getline(in, line)) {
    ++n;
    if (line.empty()) continue;
    try {
      rows.push_back(parse_runs_line(line));
    } catch (const std::exception& e) {
      throw std::runtime_error(fmt::format("{}:{}: {}", file.string(), n, e.what()));
    }
  }
  const auto timings = file.parent_path() / "timings.csv";
  if (std::filesystem::exists(timings)) {
    std::istringstream tin(read_file(timings));
    std::getline(tin, line);
    for (auto& r : rows) {
      if (!std::getline(tin, line)) break;
      const auto c = split(line);
      if (c.size() == 7) r.fit_seconds = parse_double(c[6]);
    }
  }
  return rows;
}

}  // namespace dobudget::io
