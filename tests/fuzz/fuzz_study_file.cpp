// libFuzzer target: the study-file reader (io::parse_study) on arbitrary bytes, as the study file
// study.yaml of a temporary folder that also holds a valid model.yaml, so that a relative
// environment.file resolves there. The reader must read the bytes or refuse them with one located
// InputError; a study it reads must survive the resolved round trip the run directory relies on:
// resolved_yaml(parse_study(resolved_yaml(s))) == resolved_yaml(s) (study_file.hpp).
#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include "fuzz_finding.hpp"
#include "io/study_file.hpp"

namespace {

namespace fs = std::filesystem;

// A valid two-state model for `environment.file: model.yaml`.
constexpr const char* model_text = R"(states: 2
actions: 2
observations: 2
initial: [0.5, 0.5]
transitions:
  - [[0.9, 0.1], [0.2, 0.8]]
  - [[0.5, 0.5], [0.5, 0.5]]
emissions: [[0.8, 0.2], [0.3, 0.7]]
rewards: [0, 1]
logging_policy: [[0.9, 0.1], [0.1, 0.9]]
)";

fs::path folder;

void remove_folder() {
  std::error_code ec;
  fs::remove_all(folder, ec);
}

}  // namespace

extern "C" int LLVMFuzzerInitialize(int*, char***) {
  std::string name = (fs::temp_directory_path() / "dobudget_fuzz_study_XXXXXX").string();
  if (::mkdtemp(name.data()) == nullptr) dobudget::fuzz::finding("cannot create a temporary folder");
  folder = name;
  std::ofstream(folder / "model.yaml", std::ios::binary) << model_text;
  std::atexit(remove_folder);
  return 0;
}

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace dobudget;
  const std::string text(reinterpret_cast<const char*>(data), size);
  Study study;
  if (!fuzz::reads([&] { study = io::parse_study(text, folder / "study.yaml"); })) return 0;
  if (study.scenarios.empty()) fuzz::finding("a study without scenarios was read");
  std::string resolved, again;
  try {
    resolved = io::resolved_yaml(study);
    again = io::resolved_yaml(io::parse_study(resolved, folder / "study.resolved.yaml"));
  } catch (const std::exception& e) {
    fuzz::finding(std::string("the resolved study of a study that was read does not read back: ") + e.what());
  }
  if (again != resolved) fuzz::finding("the resolved study does not read back to itself:\n" + resolved + "\n---\n" + again);
  return 0;
}
