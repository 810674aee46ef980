// The study-file keys: one table, read by the validator (study_file.cpp derives the keys each
// section accepts and the keys a sweep accepts from it) and by the reference page
// (study_reference.hpp writes docs/study-file.md from it). Adding a key is one row here, plus its
// reading and checking in study_file.cpp.
//
// A row's `path` is the dotted key ("environment.states"); a path without a dot is a top-level key
// or section, and a section's keys follow it. Rows are in the order the validator lists keys in its
// messages ("expected one of: ..."), so keep a new key next to its neighbours. The texts are for
// people (the reference page); the limits themselves are checked in study_file.cpp, and tests
// check the table against what the validator accepts and fills in (tests/io/test_study_keys.cpp).
#pragma once
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace dobudget::io {

// Whether a key can be swept, and how a swept value is read (and written canonically) before it
// is checked in place: none (not sweepable), whole numbers, seeds (0 .. 2^64-1), numbers, text.
enum class SweepKind { none, whole, seed, number, text };

struct StudyKey {
  std::string_view path;          // dotted key path, e.g. "environment.states"
  std::string_view type;          // "section", "whole number", "number", "text", "list of ...", ...
  std::string_view default_text;  // what an absent key means
  std::string_view allowed;       // the values accepted
  SweepKind sweep;                // none: cannot be swept
  std::string_view meaning;       // one line: what it changes
};

// Every key, in validator order.
const std::vector<StudyKey>& study_keys();

// The row of a path, or nullptr.
const StudyKey* find_study_key(std::string_view path);

// The names (last path component) of the keys directly inside `section` ("" for the top level),
// in table order: what that mapping accepts.
std::vector<std::string> study_section_keys(std::string_view section);

// The sweepable paths with their kinds, in table order.
std::vector<std::pair<std::string, SweepKind>> sweepable_study_keys();

}  // namespace dobudget::io
