// The episodes file and the codebook (episode_file.hpp): the reader on files written by hand
// (early-stopping episodes, CRLF, a byte-order mark, quoted fields), the CSV dialect of RFC 4180
// (Shafranovich, "Common Format and MIME Type for Comma-Separated Values (CSV) Files", RFC 4180,
// 2005, section 2), every class of bad input with its message and line, and the writer's round trip.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "input_error_of.hpp"
#include "io/episode_file.hpp"
#include "io/input_error.hpp"
#include "temp_dir.hpp"

namespace fs = std::filesystem;
using dobudget::Dataset;
using dobudget::io::Codebook;
using dobudget::io::EpisodeRecords;
using dobudget::io::InputError;
using dobudget::io::read_codebook;
using dobudget::io::read_episodes;
using dobudget::test::error_of;
using dobudget::test::TempDir;

namespace {

const std::string header = "episode,step,observation,action,regime\n";

// The error read_episodes gives for `text` (with the codebook `book`, when not empty).
InputError episodes_error(const std::string& text, const std::string& book = "") {
  TempDir dir;
  const fs::path csv = dir.write("episodes.csv", text);
  if (book.empty()) return error_of([&] { read_episodes(csv, nullptr); });
  const Codebook codebook = read_codebook(dir.write("codebook.yaml", book));
  return error_of([&] { read_episodes(csv, &codebook); });
}

InputError codebook_error(const std::string& text) {
  TempDir dir;
  const fs::path file = dir.write("codebook.yaml", text);
  return error_of([&] { read_codebook(file); });
}

// Observations and actions of episode i, as the Dataset holds them.
std::vector<int> observations_of(const Dataset& d, int i) {
  return std::vector<int>(d.obs(i), d.obs(i) + d.length(i) + 1);
}
std::vector<int> actions_of(const Dataset& d, int i) { return std::vector<int>(d.act(i), d.act(i) + d.length(i)); }

}  // namespace

TEST_CASE("episodes written by hand: BOM, CRLF, quoted fields, interleaved and early-stopping episodes",
          "[episode_file]") {
  // A UTF-8 byte-order mark, CRLF line ends (RFC 4180 section 2 rule 1), quoted fields with a comma
  // and a doubled quote inside (rules 5-7), an empty quoted action on a last row, and two episodes
  // whose rows are interleaved. Episode "b,1" stops after one action, "p" after none.
  const std::string text = "\xEF\xBB\xBF" "episode,step,observation,action,regime\r\n"
                           "a,0,calm,wait,logged\r\n"
                           "\"b,1\",0,\"say \"\"hi\"\"\",dose,logged\r\n"
                           "a,1,calm,dose,logged\r\n"
                           "\"b,1\",\"1\",calm,\"\",logged\r\n"
                           "a,2,restless,wait,logged\r\n"
                           "a,3,calm,,logged\r\n"
                           "p,0,restless,,pilot\r\n"
                           "q,0,calm,dose,pilot\r\n"
                           "q,1,calm,wait,pilot\r\n"
                           "q,2,restless,dose,pilot\r\n"
                           "q,3,calm,,pilot\r\n";
  TempDir dir;
  const EpisodeRecords r = read_episodes(dir.write("e.csv", text), nullptr);
  // Codes in order of first appearance, no rewards.
  CHECK(r.codebook.observations == std::vector<std::string>{"calm", "say \"hi\"", "restless"});
  CHECK(r.codebook.actions == std::vector<std::string>{"wait", "dose"});
  CHECK_FALSE(r.codebook.has_rewards());
  CHECK(r.logged_ids == std::vector<std::string>{"a", "b,1"});
  CHECK(r.pilot_ids == std::vector<std::string>{"p", "q"});
  // The horizon is the longest episode's actions, in both datasets.
  REQUIRE(r.logged.horizon == 3);
  REQUIRE(r.pilot.horizon == 3);
  REQUIRE(r.logged.count == 2);
  REQUIRE(r.pilot.count == 2);
  CHECK(r.logged.lengths == std::vector<std::int32_t>{3, 1});
  CHECK(r.pilot.lengths == std::vector<std::int32_t>{0, 3});
  CHECK(observations_of(r.logged, 0) == std::vector<int>{0, 0, 2, 0});
  CHECK(actions_of(r.logged, 0) == std::vector<int>{0, 1, 0});
  CHECK(observations_of(r.logged, 1) == std::vector<int>{1, 0});
  CHECK(actions_of(r.logged, 1) == std::vector<int>{1});
  CHECK(observations_of(r.pilot, 0) == std::vector<int>{2});
  CHECK(actions_of(r.pilot, 0).empty());
  CHECK(observations_of(r.pilot, 1) == std::vector<int>{0, 0, 2, 0});
  CHECK(actions_of(r.pilot, 1) == std::vector<int>{1, 0, 1});
  CHECK(r.logged.observations_in(2) == 6.0);  // 4 + 2 observations
}

TEST_CASE("episodes of one length have no lengths; LF line ends and a missing final line end are accepted",
          "[episode_file]") {
  TempDir dir;
  const EpisodeRecords r = read_episodes(dir.write("e.csv", header + "x,0,o1,a1,logged\nx,1,o2,,logged\n\n"
                                                                     "y,0,o2,a2,pilot\ny,1,o1,,pilot"),
                                         nullptr);
  CHECK(r.logged.horizon == 1);
  CHECK(r.logged.lengths.empty());
  CHECK(r.pilot.lengths.empty());
  CHECK(observations_of(r.pilot, 0) == std::vector<int>{1, 0});
  CHECK(actions_of(r.pilot, 0) == std::vector<int>{1});
}

TEST_CASE("a codebook fixes the order of the codes and gives the rewards", "[episode_file]") {
  TempDir dir;
  const Codebook book = read_codebook(dir.write("c.yaml", "observations: [low, high]\nactions: [stay, go]\n"
                                                          "rewards: {high: 1.5, low: -2}\n"));
  CHECK(book.observations == std::vector<std::string>{"low", "high"});
  CHECK(book.rewards == std::vector<double>{-2.0, 1.5});
  const EpisodeRecords r =
      read_episodes(dir.write("e.csv", header + "e,0,high,go,logged\ne,1,low,,logged\n"), &book);
  CHECK(observations_of(r.logged, 0) == std::vector<int>{1, 0});
  CHECK(actions_of(r.logged, 0) == std::vector<int>{1});
  CHECK(r.codebook.rewards == book.rewards);
  CHECK(r.pilot.count == 0);
  CHECK(r.pilot.horizon == 1);
}

TEST_CASE("RFC 4180 dialect: quoting cases", "[episode_file][csv]") {
  // RFC 4180 section 2, rule 5: "Each field may or may not be enclosed in double quotes"; rule 6:
  // fields holding line breaks, double quotes or commas should be enclosed; rule 7: a double quote
  // inside a quoted field is escaped by a preceding double quote.
  TempDir dir;
  SECTION("every field quoted, the header too (rule 5)") {
    const auto r = read_episodes(dir.write("e.csv", "\"episode\",\"step\",\"observation\",\"action\",\"regime\"\n"
                                                    "\"e\",\"0\",\"o\",\"a\",\"logged\"\n\"e\",\"1\",\"o\",\"\",\"logged\"\n"),
                                 nullptr);
    CHECK(r.logged_ids == std::vector<std::string>{"e"});
    CHECK(r.logged.horizon == 1);
  }
  SECTION("rule 7's example: \"b\"\"bb\" is b\"bb") {
    const auto r = read_episodes(dir.write("e.csv", header + "\"b\"\"bb\",0,\"aaa\",\"ccc\",logged\n\"b\"\"bb\",1,\"\"\"\",,logged\n"),
                                 nullptr);
    CHECK(r.logged_ids == std::vector<std::string>{"b\"bb"});
    CHECK(r.codebook.observations == std::vector<std::string>{"aaa", "\""});
  }
  SECTION("spaces are part of a field (rule 4)") {
    const auto r = read_episodes(dir.write("e.csv", header + "e,0, o,a,logged\ne,1,o,,logged\n"), nullptr);
    CHECK(r.codebook.observations == std::vector<std::string>{" o", "o"});
  }
  SECTION("a line break inside a quoted field belongs to the field (rule 6): the record starts on line 2") {
    const InputError e = episodes_error(header + "\"two\r\nlines\",0,o,a,logged\ne,1,o,,logged\n");
    CHECK(e.line == 2);
    CHECK(e.key == "episode");
    CHECK(e.message.find("holds a control character (byte 0x0d at position 4") == 0);
    const InputError f = episodes_error(header + "e,0,\"o\nstill o\",a,logged\ne,1,o,,nowhere\n");
    CHECK(f.line == 2);
    // A record after a quoted line break starts one line further on.
    const InputError g = episodes_error(header + "e,0,o,a,\"log\nged\"\ne,1,o,,pilot\n");
    CHECK(g.line == 2);
    CHECK(g.key == "regime");
  }
  SECTION("a double quote inside an unquoted field is refused") {
    const InputError e = episodes_error(header + "e,0,o\"x,a,logged\n");
    CHECK(e.line == 2);
    CHECK(e.key == "observation");
    CHECK(e.message.find("a double quote inside an unquoted field") == 0);
  }
  SECTION("text after a closing quote is refused") {
    const InputError e = episodes_error(header + "e,0,\"o\"x,a,logged\n");
    CHECK(e.line == 2);
    CHECK(e.key == "observation");
    CHECK(e.message.find("text after the closing double quote") == 0);
  }
  SECTION("a quote left open is refused at the line where it opens") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,\"o,,logged\ne,2,o,,logged\n");
    CHECK(e.line == 3);
    CHECK(e.key == "observation");
    CHECK(e.message.find("a double quote opens this field and none closes it") == 0);
  }
}

TEST_CASE("bad episodes files: one message FILE:LINE: column: problem each", "[episode_file][bad_input]") {
  SECTION("an empty file") {
    const InputError e = episodes_error("");
    CHECK(e.line == 1);
    CHECK(e.key == "header");
    CHECK(e.message == "the file is empty; expected the header line episode,step,observation,action,regime and then "
                       "one row per step");
    CHECK(std::string(e.what()).find("episodes.csv:1: header: the file is empty") != std::string::npos);
  }
  SECTION("a header and no rows") {
    const InputError e = episodes_error(header);
    CHECK(e.line == 2);
    CHECK(e.message.find("the file holds a header and no rows") == 0);
  }
  SECTION("a wrong header") {
    const InputError e = episodes_error("episode,step,obs,action,regime\ne,0,o,,logged\n");
    CHECK(e.line == 1);
    CHECK(e.key == "header");
    CHECK(e.message ==
          "column 3 is 'obs', expected 'observation' (the header is episode,step,observation,action,regime)");
    const InputError f = episodes_error("episode,step,observation,action\n");
    CHECK(f.message == "has 4 columns, expected 5: episode,step,observation,action,regime");
    const InputError g = episodes_error("\xFF\xFE" "e\0p\0");
    CHECK(g.message.find("the file is UTF-16 text") == 0);
  }
  SECTION("a missing column") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,\n");
    CHECK(e.line == 3);
    CHECK(e.key == "regime");
    CHECK(e.message ==
          "is missing: the row has 4 columns, expected 5 (episode,step,observation,action,regime)");
  }
  SECTION("an extra column") {
    const InputError e = episodes_error(header + "e,0,o,a,logged,extra\n");
    CHECK(e.line == 2);
    CHECK(e.key == "column 6");
    CHECK(e.message.find("is one column too many: the row has 6 columns, expected 5") == 0);
  }
  SECTION("an unknown regime") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,,Logged\n");
    CHECK(e.line == 3);
    CHECK(e.key == "regime");
    CHECK(e.message.find("is 'Logged', expected logged") == 0);
  }
  SECTION("a regime that changes within an episode") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,,pilot\n");
    CHECK(e.line == 3);
    CHECK(e.message == "is pilot, but episode 'e' is logged (line 2); an episode has one regime");
  }
  SECTION("a code not in the codebook") {
    const std::string book = "observations: [calm, restless]\nactions: [wait, dose]\n";
    const InputError e = episodes_error(header + "e,0,calm,wait,logged\ne,1,restles,,logged\n", book);
    CHECK(e.line == 3);
    CHECK(e.key == "observation");
    CHECK(e.message == "'restles' is not one of the observation codes of the codebook; did you mean 'restless'?");
    const InputError f = episodes_error(header + "e,0,calm,jump,logged\ne,1,calm,,logged\n", book);
    CHECK(f.line == 2);
    CHECK(f.key == "action");
    CHECK(f.message == "'jump' is not one of the action codes of the codebook");
  }
  SECTION("a repeated (episode, step), also when the rows are apart") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\nf,0,o,a,logged\ne,1,o,a,logged\ne,1,o,,logged\n");
    CHECK(e.line == 5);
    CHECK(e.key == "step");
    CHECK(e.message == "episode 'e' step 1 is given twice (the episode already has steps 0 to 1, the last on line 4)");
    const InputError f = episodes_error(header + "e,0,o,a,logged\nf,0,o,,logged\ne,1,o,,logged\ne,0,o,,logged\n");
    CHECK(f.line == 5);
    CHECK(f.message.find("episode 'e' step 0 is given twice") == 0);
  }
  SECTION("a gap in the steps") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,a,logged\ne,3,o,,logged\n");
    CHECK(e.line == 4);
    CHECK(e.key == "step");
    CHECK(e.message == "episode 'e' goes from step 1 (line 3) to step 3: step 2 is missing (steps go 0, 1, 2, ... "
                       "without gaps)");
    const InputError f = episodes_error(header + "e,1,o,,logged\n");
    CHECK(f.line == 2);
    CHECK(f.message == "episode 'e' starts at step 1; the first row of an episode has step 0");
  }
  SECTION("a step that is not a number") {
    for (const char* step : {"-1", "1.0", "one", "", "0x1", "+1"}) {
      const InputError e = episodes_error(header + "e," + step + ",o,,logged\n");
      CHECK(e.line == 2);
      CHECK(e.key == "step");
      CHECK(e.message.find("expected a step number 0, 1, 2, ..., got ") == 0);
    }
    const InputError big = episodes_error(header + "e,10001,o,,logged\n");
    CHECK(big.message.find("is 10001; an episode has at most 10000 actions") == 0);
  }
  SECTION("an action missing before the last step") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,,logged\nf,0,o,,logged\ne,2,o,,logged\n");
    CHECK(e.line == 3);  // the row without its action
    CHECK(e.key == "action");
    CHECK(e.message ==
          "is missing: episode 'e' goes on at step 2 (line 5); only an episode's last row has no action");
  }
  SECTION("an action on an episode's last row") {
    const InputError e = episodes_error(header + "e,0,o,a,logged\ne,1,o,a,logged\nf,0,o,,pilot\n");
    CHECK(e.line == 3);
    CHECK(e.key == "action");
    CHECK(e.message.find("is given on the last row of episode 'e' (step 1)") == 0);
  }
  SECTION("episodes without a single action") {
    const InputError e = episodes_error(header + "e,0,o,,logged\nf,0,o,,pilot\n");
    CHECK(e.line == 2);
    CHECK(e.message.find("every episode has one row (step 0) only") == 0);
  }
  SECTION("empty ids and codes") {
    CHECK(episodes_error(header + ",0,o,,logged\n").key == "episode");
    const InputError e = episodes_error(header + "e,0,,,logged\n");
    CHECK(e.key == "observation");
    CHECK(e.message == "is empty");
  }
  SECTION("invalid UTF-8 and control characters in codes, shown printable") {
    const InputError e = episodes_error(header + "e,0,o\xC3(,a,logged\n");
    CHECK(e.key == "observation");
    CHECK(e.message == "is not UTF-8 text: the byte at position 2 is not part of a UTF-8 character");
    const InputError f = episodes_error(header + "e,0,o,\"x\x1b[31m\",logged\n");
    CHECK(f.key == "action");
    CHECK(f.message.find("holds a control character (byte 0x1b at position 2") == 0);
    CHECK(f.message.find('\x1b') == std::string::npos);  // shown through printable_line
    const InputError g = episodes_error(header + "e,0,o,\xE2\x80\xAE" "a,logged\n");  // RIGHT-TO-LEFT OVERRIDE
    CHECK(g.message.find("holds a control character (a C1 control, a line separator or a bidirectional override)") == 0);
  }
  SECTION("ids and codes bounded in length") {
    const InputError e = episodes_error(header + std::string(201, 'x') + ",0,o,,logged\n");
    CHECK(e.key == "episode");
    CHECK(e.message == "is 201 bytes long, more than the 200 an id or a code may have");
    CHECK(episodes_error(header + "e,0," + std::string(201, 'o') + ",,logged\n").key == "observation");
    const InputError f = episodes_error(header + "e,0," + std::string(5000, 'o') + ",,logged\n");
    CHECK(f.key == "observation");
    CHECK(f.message.find("is longer than 4096 bytes") == 0);
  }
  SECTION("at most 200 codes of each kind") {
    std::string text = header;
    for (int t = 0; t <= 200; ++t) text += "e," + std::to_string(t) + ",o" + std::to_string(t) + ",a,logged\n";
    const InputError e = episodes_error(text);
    CHECK(e.line == 202);
    CHECK(e.key == "observation");
    CHECK(e.message == "'o200' is a new observation code, one more than the 200 a model holds");
  }
  SECTION("the padded storage of very uneven episodes is bounded before allocation") {
    // One episode of 10000 actions and 26844 of none: 26845 x 10001 slots > 2^28.
    std::string text = header;
    for (int t = 0; t < 10000; ++t) text += "long," + std::to_string(t) + ",o,a,logged\n";
    text += "long,10000,o,,logged\n";
    for (int i = 0; i < 26844; ++i) text += std::to_string(i) + ",0,o,,logged\n";
    // Refused at the row where the count first passes: (1 + k) x 10001 > 2^28 first for k = 26840
    // short episodes, on line 1 (header) + 10001 + 26840, long before the file's end.
    const InputError e = episodes_error(text);
    long long k = 0;
    while ((1 + k) * 10001 <= (1LL << 28)) ++k;
    CHECK(k == 26840);
    CHECK(e.line == 1 + 10001 + k);
    CHECK(e.key == "step");
    CHECK(e.message.find("26841 logged episodes stored with room for the longest (10001 steps so far) need more than "
                         "268435456 slots") == 0);
  }
  SECTION("not a file, no file, too large a file") {
    TempDir dir;
    const InputError e = error_of([&] { read_episodes(dir.path(), nullptr); });
    CHECK(e.message.find("cannot read the episodes file: is not a regular file but a directory") == 0);
    const InputError f = error_of([&] { read_episodes(dir.path() / "none.csv", nullptr); });
    CHECK(f.message == "cannot read the episodes file: no such file");
    // A sparse file one byte over the bound: refused from its size, before anything is read.
    const fs::path big = dir.write("big.csv", header);
    fs::resize_file(big, dobudget::io::max_episode_file_bytes + 1);
    const InputError g = error_of([&] { read_episodes(big, nullptr); });
    CHECK(g.line == 0);
    CHECK(g.message.find("the episodes file is larger than 1024 MiB") == 0);
  }
}

TEST_CASE("bad codebooks: located like study-file errors", "[episode_file][bad_input]") {
  auto e = codebook_error("observations: [a, b, a]\nactions: [x]\n");
  CHECK(e.line == 1);
  CHECK(e.key == "observations[2]");
  CHECK(e.message == "'a' is given twice (first as observations[0])");
  e = codebook_error("observations: [a]\n");
  CHECK(e.key == "actions");
  CHECK(e.message.find("is missing") == 0);
  e = codebook_error("observations: [a, b]\nactions: [x]\nrewards:\n  a: 1\n  c: 2\n");
  CHECK(e.line == 5);
  CHECK(e.key == "rewards.c");
  CHECK(e.message.find("is not one of the observation codes") == 0);
  e = codebook_error("observations: [a, b]\nactions: [x]\nrewards: {a: 1}\n");
  CHECK(e.line == 3);
  CHECK(e.key == "rewards");
  CHECK(e.message.find("gives no reward for the observation code 'b'") == 0);
  e = codebook_error("observations: [a, b]\nactions: [x]\nrewards: {a: 1, b: many}\n");
  CHECK(e.key == "rewards.b");
  CHECK(e.message == "expected a number, got 'many'");
  e = codebook_error("observations: [a]\nactions: [x]\nreward: {a: 1}\n");
  CHECK(e.key == "reward");
  CHECK(e.message == "unknown key 'reward'; did you mean 'rewards'?");
  std::string many = "observations: [";
  for (int i = 0; i <= 200; ++i) many += (i ? ", o" : "o") + std::to_string(i);
  e = codebook_error(many + "]\nactions: [x]\n");
  CHECK(e.key == "observations");
  CHECK(e.message == "has 201 codes, more than 200 (the most a model holds)");
  e = codebook_error("observations: [\"\\x1b\"]\nactions: [x]\n");
  CHECK(e.key == "observations[0]");
  CHECK(e.message.find("holds a control character") == 0);
}

TEST_CASE("write_episodes then read_episodes gives the same records; codebook_yaml reads back", "[episode_file]") {
  // Codes and ids that need RFC 4180 quoting (rule 6: commas, double quotes, line-end-free text
  // with spaces) and UTF-8 text; episodes of different lengths.
  EpisodeRecords r;
  r.codebook.observations = {"calm", "a,b", "say \"hi\"", " spaced ", "\xC3\xA9t\xC3\xA9"};
  r.codebook.actions = {"yes", "no: really", "- dash"};
  r.codebook.rewards = {0.1, -1e-300, 1.0 / 3.0, 0.0, 2.5};
  r.logged.horizon = r.pilot.horizon = 3;
  r.logged.count = 2;
  r.logged.observations = {0, 1, 2, 3, 4, 0, 0, 0};
  r.logged.actions = {0, 1, 2, 2, 0, 0};
  r.logged.lengths = {3, 1};
  r.logged_ids = {"first, episode", "\"quoted\""};
  r.pilot.count = 1;
  r.pilot.observations = {4, 3, 2, 1};
  r.pilot.actions = {1, 1, 0};
  r.pilot_ids = {"p"};
  TempDir dir;
  const fs::path csv = dir.path() / "e.csv", yaml = dir.path() / "c.yaml";
  dobudget::io::write_episodes(csv, r);
  std::ofstream(yaml) << dobudget::io::codebook_yaml(r.codebook);
  const Codebook book = read_codebook(yaml);
  CHECK(book.observations == r.codebook.observations);
  CHECK(book.actions == r.codebook.actions);
  CHECK(book.rewards == r.codebook.rewards);  // bit for bit
  const EpisodeRecords back = read_episodes(csv, &book);
  CHECK(back.logged_ids == r.logged_ids);
  CHECK(back.pilot_ids == r.pilot_ids);
  CHECK(back.logged.lengths == r.logged.lengths);
  CHECK(back.pilot.lengths.empty());
  for (int i = 0; i < 2; ++i) {
    CHECK(observations_of(back.logged, i) == observations_of(r.logged, i));
    CHECK(actions_of(back.logged, i) == actions_of(r.logged, i));
  }
  CHECK(observations_of(back.pilot, 0) == observations_of(r.pilot, 0));
  CHECK(actions_of(back.pilot, 0) == actions_of(r.pilot, 0));
  // Without the codebook, codes come in order of first appearance.
  const EpisodeRecords plain = read_episodes(csv, nullptr);
  CHECK(plain.codebook.observations == r.codebook.observations);
  CHECK(plain.codebook.actions == std::vector<std::string>{"yes", "no: really", "- dash"});
}
