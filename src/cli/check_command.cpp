// dobudget check: validate a study, print it resolved, count units and fits.
#include <cstdio>

#include "cli/commands.hpp"
#include "core/unit.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {

int check_command(const std::string& study_file) {
  const Study study = io::load_study(study_file);
  std::printf("%s", io::resolved_yaml(study).c_str());
  std::size_t units = 0, fits = 0;
  for (const auto& u : enumerate_units(study)) {
    ++units;
    fits += static_cast<std::size_t>(fits_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings));
  }
  std::printf("# valid study: %zu scenario(s), %zu units, %zu model fits\n", study.scenarios.size(), units, fits);
  return 0;
}

}  // namespace dobudget::cli
