// End-to-end checks of `dobudget plan --shard K/N` and `dobudget merge` (issue 5; docs/clusters.md,
// 7): shards merged in any order give the same runs.csv and answer.csv bytes as a single run with
// any thread count, and merge refuses inputs that are not exactly one study's units, once each,
// with exit code 2, a message naming what is wrong, and nothing written at --out.
#include <catch2/catch.hpp>
#include <sys/stat.h>

#include <algorithm>

#include "cli_harness.hpp"
#include "io/journal.hpp"
#include "io/run_directory.hpp"

using namespace cli_test;

namespace {

namespace fs = std::filesystem;

std::string plan(const Scratch& s, const std::string& study, const std::string& out, const std::string& extra = "") {
  const Result r = run("plan " + (s / study).string() + " --quiet " + extra + " --out " + (s / out).string());
  INFO(r.out);
  REQUIRE(r.code == 0);
  return r.out;
}

Result merge(const Scratch& s, const std::vector<std::string>& inputs, const std::string& out) {
  std::string args = "merge";
  for (const auto& in : inputs) args += " " + (s / in).string();
  return run(args + " --out " + (s / out).string());
}

// The tables `plan` and `merge` print: from the summary's first line to the run directory line.
std::string printed_tables(const std::string& out) {
  const auto begin = out.find("model_kl over");
  const auto end = out.find("\nrun directory:");
  if (begin == std::string::npos || end == std::string::npos || end < begin) return "(no tables in: " + out + ")";
  return out.substr(begin, end - begin);
}

void make_three_shards(const Scratch& s) {
  write(s / "study.yaml", tiny_study);
  for (int k = 0; k < 3; ++k) {
    const std::string out =
        plan(s, "study.yaml", "part-" + std::to_string(k), "--threads 1 --shard " + std::to_string(k) + "/3");
    CHECK(out.find("combine the shards with `dobudget merge`") != std::string::npos);
    CHECK_FALSE(fs::exists(s / ("part-" + std::to_string(k)) / "runs.csv"));
  }
}

}  // namespace

TEST_CASE("merge: 3 shards merged in any order equal a 1-thread and a 2-thread run byte for byte", "[cli][merge][shard]") {
  Scratch s("shards-identical");
  make_three_shards(s);
  const std::string one = plan(s, "study.yaml", "t1", "--threads 1");
  plan(s, "study.yaml", "t2", "--threads 2");

  const Result m = merge(s, {"part-2", "part-0", "part-1"}, "merged");
  INFO(m.out);
  REQUIRE(m.code == 0);
  const std::string runs = slurp(s / "t1" / "runs.csv");
  const std::string answer = slurp(s / "t1" / "answer.csv");
  REQUIRE(std::count(runs.begin(), runs.end(), '\n') == 1 + 2 * 3 * 3 * 2 * 2);
  CHECK(slurp(s / "t2" / "runs.csv") == runs);
  CHECK(slurp(s / "t2" / "answer.csv") == answer);
  CHECK(slurp(s / "merged" / "runs.csv") == runs);
  CHECK(slurp(s / "merged" / "answer.csv") == answer);
  CHECK(slurp(s / "merged" / "study.resolved.yaml") == slurp(s / "t1" / "study.resolved.yaml"));
  for (const char* f : {"timings.csv", "answer.md", "manifest.json", "units.journal"}) CHECK(fs::exists(s / "merged" / f));
  // The same tables as plan prints, and a manifest that names the inputs.
  CHECK(printed_tables(m.out) == printed_tables(one));
  const std::string manifest = slurp(s / "merged" / "manifest.json");
  CHECK(manifest.find("\"merged_from\"") != std::string::npos);
  CHECK(manifest.find("\"2/3\"") != std::string::npos);
  CHECK(manifest.find("\"complete\": true") != std::string::npos);

  // The merged directory is a complete run directory: `plan` on it computes nothing, `answer` reads it.
  const Result again = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "merged").string());
  INFO(again.out);
  CHECK(again.code == 0);
  CHECK(again.out.find("(6 resumed)") != std::string::npos);
  CHECK(slurp(s / "merged" / "runs.csv") == runs);
  CHECK(run("answer " + (s / "merged").string()).code == 0);
  CHECK(slurp(s / "merged" / "answer.csv") == answer);
}

TEST_CASE("merge: a complete unsharded directory alone is copied", "[cli][merge]") {
  Scratch s("merge-copy");
  write(s / "study.yaml", tiny_study);
  plan(s, "study.yaml", "run");
  const Result m = merge(s, {"run"}, "copy");
  INFO(m.out);
  REQUIRE(m.code == 0);
  CHECK(slurp(s / "copy" / "runs.csv") == slurp(s / "run" / "runs.csv"));
  CHECK(slurp(s / "copy" / "answer.csv") == slurp(s / "run" / "answer.csv"));
  // Merging again into the same directory (same study) is allowed and gives the same bytes.
  REQUIRE(merge(s, {"run"}, "copy").code == 0);
  CHECK(slurp(s / "copy" / "runs.csv") == slurp(s / "run" / "runs.csv"));
}

TEST_CASE("merge: refuses shards of different studies, naming the directory and both hashes", "[cli][merge]") {
  Scratch s("merge-mismatch");
  make_three_shards(s);
  write(s / "other.yaml", std::string(tiny_study) + "assurance: 0.9\n");
  plan(s, "other.yaml", "other-1", "--shard 1/3");
  const Result r = merge(s, {"part-0", "other-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("other-1 holds a different study") != std::string::npos);
  const auto hash = [](const std::string& text) {  // "study_hash": "<16 hex>" in manifest.json
    const auto at = text.find("\"study_hash\": \"");
    return at == std::string::npos ? std::string("?") : text.substr(at + 15, 16);
  };
  CHECK(r.out.find(hash(slurp(s / "other-1" / "manifest.json"))) != std::string::npos);
  CHECK(r.out.find(hash(slurp(s / "part-0" / "manifest.json"))) != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
}

TEST_CASE("merge: refuses missing shards, naming them", "[cli][merge]") {
  Scratch s("merge-missing");
  make_three_shards(s);
  const Result r = merge(s, {"part-2", "part-0"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("4 of the study's 6 units; 2 are missing") != std::string::npos);
  CHECK(r.out.find("shard 1/3: not among the inputs") != std::string::npos);
  CHECK(r.out.find("shard 0/3") == std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  // A shard killed part-way has no manifest yet: it is recognised by its units, and the message
  // says how to resume it.
  const std::string journal = slurp(s / "part-1" / "units.journal");
  fs::remove(s / "part-1" / "manifest.json");
  const std::size_t first_record_end = journal.find('\n', journal.find('\n') + 1) + 1;  // after the header line
  write(s / "part-1" / "units.journal", journal.substr(0, first_record_end));          // 1 of its 2 units
  const Result killed = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(killed.out);
  CHECK(killed.code == 2);
  CHECK(killed.out.find("5 of the study's 6 units; 1 is missing") != std::string::npos);
  CHECK(killed.out.find("shard 1/3: 1 of its 2 units are missing from " + (s / "part-1").string()) != std::string::npos);
  CHECK(killed.out.find("--shard 1/3 --out " + (s / "part-1").string()) != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  // Without manifests (e.g. shard runs that were killed) the missing units are listed by key.
  fs::remove(s / "part-0" / "manifest.json");
  fs::remove(s / "part-2" / "manifest.json");
  const Result k = merge(s, {"part-0", "part-2"}, "merged");
  INFO(k.out);
  CHECK(k.code == 2);
  CHECK(k.out.find("unit 1 (scenario 0, environment draw 0, replicate 1)") != std::string::npos);
  CHECK(k.out.find("unit 4 (scenario 0, environment draw 1, replicate 1)") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
}

TEST_CASE("merge: refuses duplicated shards, naming the unit and both directories", "[cli][merge]") {
  Scratch s("merge-duplicate");
  make_three_shards(s);
  fs::copy(s / "part-1", s / "part-1-again");
  const Result r = merge(s, {"part-0", "part-1", "part-2", "part-1-again"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  // Unit 1 is (scenario 0, draw 0, replicate 1): units run replicate fastest, 3 replicates per draw.
  CHECK(r.out.find("unit 1 (scenario 0, environment draw 0, replicate 1) is in both") != std::string::npos);
  CHECK(r.out.find((s / "part-1").string() + " and " + (s / "part-1-again").string()) != std::string::npos);
  CHECK(r.out.find("both hold shard 1/3") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  const Result twice = merge(s, {"part-0", "part-1", "part-2", "part-1"}, "merged");
  CHECK(twice.code == 2);
  CHECK(twice.out.find("is listed twice") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
}

TEST_CASE("merge: refuses an input with a torn or damaged journal, and an --out of another study", "[cli][merge]") {
  Scratch s("merge-torn");
  make_three_shards(s);
  // Torn tail: the last record loses its end (a run killed while writing it).
  const fs::path journal = s / "part-1" / "units.journal";
  const std::string intact = slurp(journal);
  write(journal, intact.substr(0, intact.size() - 40));
  Result r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + " ends with a torn record") != std::string::npos);
  CHECK(r.out.find("--shard 1/3 --out " + (s / "part-1").string()) != std::string::npos);  // how to resume it
  CHECK_FALSE(fs::exists(s / "merged"));
  CHECK(slurp(journal) == intact.substr(0, intact.size() - 40));  // inputs are never modified

  // A damaged first record (of two; line 2, after the header) is not a torn tail.
  std::string damaged = intact;
  damaged[damaged.find('\t') + 1] = damaged[damaged.find('\t') + 1] == '0' ? '1' : '0';
  write(journal, damaged);
  r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ":2: damaged record (checksum mismatch)") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
  write(journal, intact);

  // --out holding another study, or being an input, is refused; a directory of files is too.
  write(s / "other.yaml", std::string(tiny_study) + "assurance: 0.9\n");
  plan(s, "other.yaml", "other", "--shard 0/2");
  const std::string before = slurp(s / "other" / "units.journal");
  r = merge(s, {"part-0", "part-1", "part-2"}, "other");
  CHECK(r.code == 2);
  CHECK(r.out.find("holds a different study") != std::string::npos);
  CHECK(slurp(s / "other" / "units.journal") == before);
  r = merge(s, {"part-0", "part-1", "part-2"}, "part-1");
  CHECK(r.code == 2);
  CHECK(r.out.find("is one of the inputs") != std::string::npos);
  fs::create_directories(s / "notes");
  write(s / "notes" / "todo.txt", "x");
  r = merge(s, {"part-0", "part-1", "part-2"}, "notes");
  CHECK(r.code == 2);
  CHECK(r.out.find("not a dobudget run directory") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "notes" / "runs.csv"));

  // Not a run directory at all, or absent.
  r = merge(s, {"part-0", "notes"}, "merged");
  CHECK(r.code == 2);
  CHECK(r.out.find("notes is not a dobudget run directory") != std::string::npos);
  r = merge(s, {"part-0", "absent"}, "merged");
  CHECK(r.code == 2);
  CHECK(r.out.find("absent does not exist") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  // With every input intact again, the merge goes through.
  REQUIRE(merge(s, {"part-0", "part-1", "part-2"}, "merged").code == 0);
}

TEST_CASE("merge: applies the journal's checks to every input: its study, each record's unit, the header",
          "[cli][merge][journal]") {
  Scratch s("merge-records");
  make_three_shards(s);
  const fs::path journal = s / "part-1" / "units.journal";
  const std::string intact = slurp(journal);
  const std::string header = intact.substr(0, intact.find('\n') + 1);
  CHECK(header == dobudget::io::Journal::header(dobudget::io::study_hash(slurp(s / "part-1" / "study.resolved.yaml"))));

  // A record with an intact checksum whose rows are another unit's: shard 1/3 holds units 1 and
  // 4; unit 4's rows are written under index 1 (and unit 1's under 4).
  std::size_t intact_bytes = 0;
  bool torn = false;
  const auto units = dobudget::io::Journal::parse(intact, &intact_bytes, &torn);
  REQUIRE(units.size() == 2);
  const std::string swapped =
      header + dobudget::io::Journal::record(1, units.at(4)) + dobudget::io::Journal::record(4, units.at(1));
  write(journal, swapped);
  Result r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ":2: the record of unit 1 does not belong to it") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
  CHECK(slurp(journal) == swapped);  // inputs are never modified

  // A journal without the header (format 1), or of another study.
  write(journal, intact.substr(header.size()));
  r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ":1: has no journal header") != std::string::npos);
  write(journal, dobudget::io::Journal::header("0000000000000000") + intact.substr(header.size()));
  r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ":1: belongs to another study") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  // A study.resolved.yaml edited in one input (in all of them alike, so they agree) after planning.
  write(journal, intact);
  const std::string resolved = slurp(s / "part-0" / "study.resolved.yaml");
  for (int k = 0; k < 3; ++k) write(s / ("part-" + std::to_string(k)) / "study.resolved.yaml", resolved + "# edited\n");
  r = merge(s, {"part-0", "part-1", "part-2"}, "merged");
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("study.resolved.yaml: has study hash") != std::string::npos);
  CHECK(r.out.find("was edited after the run") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));
  for (int k = 0; k < 3; ++k) write(s / ("part-" + std::to_string(k)) / "study.resolved.yaml", resolved);

  // Intact again: the merged journal has the header, and `plan` resumes it as a finished run.
  REQUIRE(merge(s, {"part-0", "part-1", "part-2"}, "merged").code == 0);
  CHECK(slurp(s / "merged" / "units.journal").rfind(header, 0) == 0);
  const std::string runs = slurp(s / "merged" / "runs.csv");
  r = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "merged").string());
  INFO(r.out);
  CHECK(r.code == 0);
  CHECK(r.out.find("(6 resumed)") != std::string::npos);
  CHECK(slurp(s / "merged" / "runs.csv") == runs);
}

TEST_CASE("merge: a pipe in place of an input's or --out's units.journal is refused at once; a link at --out is "
          "replaced, never written through",
          "[cli][merge][journal]") {
  // The reproduced bug: with a pipe (mkfifo) as units.journal, merge blocked (in Journal::in_use,
  // and in reading the journal's header).
  Scratch s("merge-kinds");
  write(s / "study.yaml", tiny_study);
  plan(s, "study.yaml", "whole", "--threads 1");
  const std::string journal = slurp(s / "whole" / "units.journal");

  // An input whose journal is a pipe.
  fs::copy(s / "whole", s / "input", fs::copy_options::recursive);
  fs::remove(s / "input" / "units.journal");
  REQUIRE(::mkfifo((s / "input" / "units.journal").c_str(), 0644) == 0);
  Result r = run_within(20, "merge " + (s / "input").string() + " --out " + (s / "merged").string());
  INFO(r.out);
  CHECK(r.code == 2);  // not 137: it did not hang until killed
  CHECK(r.out.find("error: " + (s / "input" / "units.journal").string() + ": is not a regular file but a pipe (FIFO)") !=
        std::string::npos);
  CHECK_FALSE(fs::exists(s / "merged"));

  // An --out of this study whose journal is a pipe.
  fs::create_directories(s / "out");
  fs::copy(s / "whole" / "study.resolved.yaml", s / "out" / "study.resolved.yaml");
  REQUIRE(::mkfifo((s / "out" / "units.journal").c_str(), 0644) == 0);
  r = run_within(20, "merge " + (s / "whole").string() + " --out " + (s / "out").string());
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("error: " + (s / "out" / "units.journal").string() + ": is not a regular file but a pipe (FIFO)") !=
        std::string::npos);
  CHECK_FALSE(fs::exists(s / "out" / "runs.csv"));

  // An --out whose units.journal is a link to an empty file elsewhere: merge writes the directory,
  // and its journal replaces the link (write_file_atomically renames over the name); the file the
  // link pointed at is left empty.
  const fs::path victim = s / "victim";
  write(victim, "");
  fs::create_directories(s / "linked");
  fs::create_symlink(victim, s / "linked" / "units.journal");
  r = run_within(60, "merge " + (s / "whole").string() + " --out " + (s / "linked").string());
  INFO(r.out);
  CHECK(r.code == 0);
  CHECK(slurp(victim).empty());
  CHECK_FALSE(fs::is_symlink(fs::symlink_status(s / "linked" / "units.journal")));
  CHECK(slurp(s / "linked" / "units.journal") == journal);
}
