// Regression tests for what fuzzing the readers found (tests/fuzz/run.sh): each feeds the input,
// inline, to the reader and expects what the reader promises, a located InputError.
#include <catch2/catch.hpp>

#include "input_error_of.hpp"

#include <string>

#include "io/input_error.hpp"
#include "io/model_file.hpp"
#include "io/study_file.hpp"
#include "io/yaml_input.hpp"

using namespace dobudget;
using dobudget::test::error_of;
using io::InputError;

namespace {

// A study whose one sweep axis lists `n` distinct whole numbers: "sweep:\n  replicates: [1, 2, ...]".
std::string study_with_sweep_of(int n) {
  std::string text = "name: wide\nsweep:\n  replicates: [";
  for (int i = 1; i <= n; ++i) text += (i > 1 ? "," : "") + std::to_string(i);
  return text + "]\n";
}

}  // namespace

// Found by review while fuzzing the study reader: every swept value was compared with the values
// before it (to refuse duplicates) before the number of values was checked, so one axis of n
// values cost n^2 / 2 string comparisons before the refusal (quadratic time in the file's size).
// The axis is now refused by its length first, naming it; without that, the refusal came later and
// named only "sweep".
TEST_CASE("a sweep axis longer than a study's scenarios is refused by its length, naming the axis",
          "[fuzz_regressions][study_file]") {
  const InputError e = error_of([] { io::parse_study(study_with_sweep_of(20000), "wide.yaml"); });
  CHECK(e.file == "wide.yaml");
  CHECK(e.line == 3);
  CHECK(e.key == "sweep.replicates");
  CHECK(e.message.find("lists 20000 values") != std::string::npos);
  // A short axis is read as before.
  CHECK_NOTHROW(io::parse_study(study_with_sweep_of(3), "wide.yaml"));
}

// Found by fuzz_study_file and fuzz_model_file (timeouts, memory growing about 0.5 GB a second): a
// ',' where a document's value should start made yaml-cpp 0.7's YAML::LoadAll return the same
// empty document forever (yaml-cpp issue 1040). parse_yaml now refuses it as malformed YAML.
TEST_CASE("a stray comma at the top of a YAML file is malformed YAML, not an endless parse",
          "[fuzz_regressions][study_file]") {
  const InputError study = error_of([] { io::parse_study(",", "comma.yaml"); });
  CHECK(study.file == "comma.yaml");
  CHECK(study.line == 1);
  CHECK(study.key.empty());
  CHECK(study.message == "malformed YAML: unexpected ',' where a value should start");
  // The model file's case, cut down from what the fuzzer found: a comment, then a line starting with ','.
  const InputError model = error_of([] {
    io::parse_model(io::input::parse_yaml("# An invented model\n, 1 \"stuffy\".\nstates: 2\n", "model.yaml"), "model.yaml",
                    "", 10, 1.0);
  });
  CHECK(model.file == "model.yaml");
  CHECK(model.line == 2);
  CHECK_THAT(model.message, Catch::StartsWith("malformed YAML: "));
  // Several documents are still told apart from a stuck parse.
  const InputError two = error_of([] { io::parse_study("name: a\n---\nname: b\n", "two.yaml"); });
  CHECK_THAT(two.message, Catch::Contains("holds 2 YAML documents"));
}

// Found while fuzzing: yaml-cpp keeps about 470 bytes per node, so a file of many short scalars can
// take gigabytes before any limit of the readers applies. The nodes are counted by a pre-scan first
// (yaml_input.hpp, max_yaml_nodes); here with a limit of 100 so that the test stays small.
TEST_CASE("a YAML text with more nodes than the limit is refused before it is loaded", "[fuzz_regressions]") {
  std::string list = "values: [";
  for (int i = 0; i < 200; ++i) list += (i ? "," : "") + std::to_string(i);
  list += "]\n";
  const InputError e = error_of([&] { io::input::parse_yaml(list, "many.yaml", 100); });
  CHECK(e.file == "many.yaml");
  CHECK(e.line == 1);
  CHECK(e.message.find("more than 100 YAML values") != std::string::npos);
  CHECK_NOTHROW(io::input::parse_yaml(list, "many.yaml", 1000));
}
