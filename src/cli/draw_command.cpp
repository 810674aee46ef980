// dobudget draw: write the environments of a study as model files.
#include <fmt/format.h>

#include <cstdio>

#include "cli/commands.hpp"
#include "core/world/synthetic.hpp"
#include "io/atomic_file.hpp"
#include "io/file_name.hpp"
#include "io/model_file.hpp"
#include "io/records_study.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {

int draw_command(const std::string& study_file, const std::string& out) {
  Study study = io::load_study(study_file);
  io::prepare_records(study);  // worlds from records (issue 9)
  const std::filesystem::path dir = out.empty() ? std::filesystem::path("environments") / io::safe_file_name(study.name) : std::filesystem::path(out);
  std::filesystem::create_directories(dir);
  for (const auto& sc : study.scenarios) {
    const int draws = sc.settings.environment.given ? 1 : sc.settings.environment.draws;
    for (int d = 0; d < draws; ++d) {
      const Environment env = make_environment(sc.settings, unit_stream_key(study.seed, sc.index, d, 0));
      const auto file = dir / fmt::format("scenario-{}-environment-{}.yaml", sc.index, d);
      io::write_file_atomically(file, io::model_yaml(env));
      std::printf("%s\n", file.string().c_str());
    }
  }
  return 0;
}

}  // namespace dobudget::cli
