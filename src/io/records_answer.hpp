// What the answer says about a study from records (issue 9), in the printed answer and answer.md:
// where the worlds come from (the records' file name, the number of plausible worlds, the prior
// concentration) and, since the pilot episodes already in the records count as already run, for
// each answer the total pilot budget needed and how many more episodes that is:
//   more = max(0, ceil(needed_pilot) - pilot episodes in the records).
// (The simulated pilot budgets are totals: a world's pilot data of budget n stand for all n pilot
// episodes, those already run included.) File names are user text: printable_line for the
// terminal, markdown_text for the page.
#pragma once
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/settings.hpp"

namespace dobudget::io {

// Empty when the study has no records. `markdown`: lines for answer.md (a section); otherwise for
// the terminal.
std::string records_answer_text(const Study& study, const std::vector<AnswerRow>& rows, bool markdown);

}  // namespace dobudget::io
