// The study-file reference page (docs/study-file.md), written from the key table (study_keys.hpp)
// so that it cannot drift from what the validator accepts. `dobudget reference study-file` prints
// it; a test compares the committed page with this text.
#pragma once
#include <string>

namespace dobudget::io {

// The Markdown page: an introduction, then one table per top-level key or section (every row of
// the key table, in table order), then the rules shared by every key. Deterministic.
std::string study_file_reference();

}  // namespace dobudget::io
