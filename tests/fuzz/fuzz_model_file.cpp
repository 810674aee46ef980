// libFuzzer target: the model-file reader (io::parse_model on the YAML that io::input::parse_yaml
// makes of arbitrary bytes). The reader must read the bytes or refuse them with one located
// InputError; a model it reads must survive the round trip model_file.hpp promises: model_yaml of
// it reads back to the same matrices, bit for bit.
#include <cstddef>
#include <cstdint>
#include <string>

#include "fuzz_finding.hpp"
#include "io/model_file.hpp"
#include "io/yaml_input.hpp"

namespace {

constexpr int horizon = 10;
constexpr double discount = 0.95;

dobudget::Environment read(const std::string& text, const std::string& file) {
  return dobudget::io::parse_model(dobudget::io::input::parse_yaml(text, file), file, "", horizon, discount);
}

bool same(const dobudget::Environment& a, const dobudget::Environment& b) {
  const auto eq = [](const auto& x, const auto& y) {  // Eigen: sizes first, then every entry exactly
    return x.rows() == y.rows() && x.cols() == y.cols() && (x.size() == 0 || (x.array() == y.array()).all());
  };
  if (a.model.transitions.size() != b.model.transitions.size()) return false;
  for (std::size_t i = 0; i < a.model.transitions.size(); ++i)
    if (!eq(a.model.transitions[i], b.model.transitions[i])) return false;
  return a.model.states == b.model.states && a.model.actions == b.model.actions &&
         a.model.observations == b.model.observations && eq(a.model.initial, b.model.initial) &&
         eq(a.model.emissions, b.model.emissions) && eq(a.model.rewards, b.model.rewards) &&
         eq(a.logging_policy, b.logging_policy) && a.model.horizon == b.model.horizon &&
         a.model.discount == b.model.discount;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace dobudget;
  const std::string text(reinterpret_cast<const char*>(data), size);
  Environment env;
  if (!fuzz::reads([&] { env = read(text, "model.yaml"); })) return 0;
  std::string written;
  Environment back;
  try {
    written = io::model_yaml(env);
    back = read(written, "written.yaml");
  } catch (const std::exception& e) {
    fuzz::finding(std::string("model_yaml of a model that was read does not read back: ") + e.what());
  }
  if (!same(env, back)) fuzz::finding("model_yaml does not read back to the same model:\n" + written);
  return 0;
}
