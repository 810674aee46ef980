#include "io/journal.hpp"

#include <boost/crc.hpp>
#include <fmt/format.h>
#include <unistd.h>

#include <stdexcept>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "io/runs_table.hpp"

namespace dobudget::io {
namespace {

std::uint32_t crc32(std::string_view s) {
  boost::crc_32_type crc;
  crc.process_bytes(s.data(), s.size());
  return crc.checksum();
}

std::string payload(const std::vector<RunRecord>& rows) {
  std::string p;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (i > 0) p += ';';
    p += runs_line(rows[i]) + "," + csv_number(rows[i].fit_seconds);
  }
  return p;
}

std::vector<RunRecord> parse_payload(const std::string& p) {
  std::vector<RunRecord> rows;
  std::size_t start = 0;
  while (start <= p.size()) {
    std::size_t end = p.find(';', start);
    if (end == std::string::npos) end = p.size();
    const std::string row = p.substr(start, end - start);
    const std::size_t comma = row.rfind(',');
    if (comma == std::string::npos) throw std::runtime_error("malformed row");
    RunRecord r = parse_runs_line(row.substr(0, comma));
    r.fit_seconds = std::stod(row.substr(comma + 1));
    rows.push_back(r);
    start = end + 1;
  }
  return rows;
}

}  // namespace

std::map<std::size_t, std::vector<RunRecord>> Journal::parse(const std::string& text, std::size_t* intact_bytes,
                                                             bool* torn) {
  std::map<std::size_t, std::vector<RunRecord>> units;
  std::size_t pos = 0;
  *torn = false;
  int line = 0;
  while (pos < text.size()) {
    ++line;
    const std::size_t nl = text.find('\n', pos);
    const bool last = nl == std::string::npos || nl + 1 == text.size();
    try {
      if (nl == std::string::npos) throw std::runtime_error("no end of line");
      const std::string rec = text.substr(pos, nl - pos);
      const std::size_t t1 = rec.find('\t'), t2 = rec.find('\t', t1 + 1);
      if (t1 == std::string::npos || t2 == std::string::npos) throw std::runtime_error("missing fields");
      const std::string body = rec.substr(t2 + 1);
      if (fmt::format("{:08x}", crc32(body)) != rec.substr(t1 + 1, t2 - t1 - 1)) throw std::runtime_error("checksum mismatch");
      units[std::stoul(rec.substr(0, t1))] = parse_payload(body);
    } catch (const std::exception& e) {
      if (!last) throw std::runtime_error(fmt::format("units.journal record {} is damaged ({})", line, e.what()));
      *torn = true;
      break;
    }
    pos = nl + 1;
  }
  *intact_bytes = pos;
  return units;
}

Journal::Journal(const std::filesystem::path& file) {
  std::size_t intact = 0;
  if (std::filesystem::exists(file)) {
    const std::string text = read_file(file);
    units_ = parse(text, &intact, &torn_);
    if (intact < text.size()) std::filesystem::resize_file(file, intact);
  }
  file_ = std::fopen(file.c_str(), "ab");
  if (file_ == nullptr) throw std::runtime_error("cannot open " + file.string() + " for appending");
}

Journal::~Journal() {
  if (file_ != nullptr) std::fclose(file_);
}

void Journal::append(std::size_t unit_index, const std::vector<RunRecord>& rows) {
  const std::string body = payload(rows);
  const std::string rec = fmt::format("{}\t{:08x}\t{}\n", unit_index, crc32(body), body);
  if (std::fwrite(rec.data(), 1, rec.size(), file_) != rec.size() || std::fflush(file_) != 0)
    throw std::runtime_error("cannot append to units.journal");
  units_[unit_index] = rows;
}

}  // namespace dobudget::io
