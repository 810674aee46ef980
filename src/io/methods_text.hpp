// The methods paragraph of a report (issue 12): what a team pastes into a proposal, filled with
// the study's own figures. Written at the top of report.md, as plain text in report/methods.txt,
// and in report.html.
//
// The paragraphs are plain text holding user text (the study name, swept keys and values) as it
// is: each output escapes every paragraph whole (printable_line for methods.txt, markdown_text for
// report.md, html_text for report.html; text_escape.hpp), so nothing in them is markup.
//
// What they say, for the study's settings (scenario 0's where a sweep changes nothing else):
//   1. what was simulated: the synthetic family and its knobs (or the given model), sizes, horizon,
//      the number of worlds (environment draws) and replicates, the logging model (privilege,
//      temperature), the pilot policy, the budgets;
//   2. how models were fitted: EM (Baum-Welch with SQUAREM), starts, iterations, the Dirichlet
//      pseudo-count, the latent states, the strategies;
//   3. the criterion: each measure with a target, the assurance, the interpolation, the bootstrap;
//   4. the answer for each strategy with its interval, at the largest logged budget (the other
//      logged budgets are in the tables and in the figure of needed pilot episodes against the
//      logged budget); with a sweep, one sentence per scenario and the worst case over them;
//   5. the main assumptions;
//   6. the caution (methods_caution()).
// With a sweep, paragraphs 1-3 describe the settings common to every scenario and name each swept
// key with its values where it appears ("privilege swept over 0, 0.5, 1"), and paragraph 4 gives
// every scenario's answers: one methods text for the study, not one per scenario.
#pragma once
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/settings.hpp"

namespace dobudget::io {

struct MethodsInput {
  const Study* study = nullptr;
  const std::vector<AnswerRow>* answers = nullptr;  // compute_study_answers(study, rows, overrides)
  int bootstrap = 1000;                              // resamples behind the intervals
};

// The paragraphs (plain text, see above), the caution last.
std::vector<std::string> methods_paragraphs(const MethodsInput& input);

// The caution that ends the methods text.
const char* methods_caution();

// methods.txt: each paragraph on one line (printable_line), a blank line between them.
std::string methods_plain_text(const std::vector<std::string>& paragraphs);

}  // namespace dobudget::io
