// Writers for the pilot-policy comparison (issue 13; core/answer/pilot_choice.hpp):
// pilot_choice.csv, a section of answer.md and a terminal table.
//
// pilot_choice.csv columns (appended, never reordered):
//   uniform_scenario,best_scenario,measure,target,assurance,criterion,strategy,logged,best_policy,
//   needed_best,needed_uniform,saved_vs_uniform,low,high
// Numbers as in answer.csv (shortest round-trip, "inf", empty when missing). No user text: the
// scenarios are given by index (their labels are in answer.md and study.resolved.yaml).
#pragma once
#include <filesystem>
#include <string>
#include <vector>

#include "core/answer/pilot_choice.hpp"

namespace dobudget::io {

std::string pilot_choice_csv(const std::vector<PilotChoiceRow>& rows);
void write_pilot_choice_csv(const std::filesystem::path& path, const std::vector<PilotChoiceRow>& rows);

// Markdown section (empty when rows is empty); user text (the other swept assignments) through
// markdown_text.
std::string format_pilot_choice_md(const std::vector<PilotChoiceRow>& rows);

// Aligned terminal table (empty when rows is empty); user text through printable_line.
std::string format_pilot_choice_table(const std::vector<PilotChoiceRow>& rows);

}  // namespace dobudget::io
