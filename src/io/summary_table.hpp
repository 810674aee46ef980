// The table `dobudget plan` prints: for each scenario, strategy, logged and pilot budget, the
// mean and spread of each measure over (environment draw, replicate) pairs.
#pragma once
#include <string>
#include <vector>

#include "core/run_record.hpp"
#include "core/settings.hpp"

namespace dobudget::io {

std::string format_summary(const Study& study, const std::vector<RunRecord>& rows);

}  // namespace dobudget::io
