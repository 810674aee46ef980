// Mistakes in the user's input files (study files, model files), located for the user.
//
// An InputError names the file, the 1-based line, the key path of the offending value and what
// is wrong:   study.yaml:7: budgets.pilot[2]: must be larger than the previous budget (30), got 20
// The command line prints what() and exits with code 2.
//
// Key paths join mapping keys with '.' and sequence indices with "[i]" (0-based), starting at the
// top of the file: "environment.states", "budgets.pilot[2]", "transitions[1][0][2]". A value that
// came from a sweep is named by its sweep entry: "sweep.logging.privilege[1]".
//
// The readers' toolkit that finds and phrases these mistakes (checked access to yaml-cpp nodes,
// "did you mean" suggestions) is in yaml_input.hpp.
#pragma once
#include <stdexcept>
#include <string>
#include <utility>

namespace dobudget::io {

struct InputError : std::runtime_error {
  // line: 1-based, 0 when unknown (e.g. the file cannot be read). key: empty when no key applies
  // (e.g. malformed YAML).
  InputError(std::string file_, int line_, std::string key_, std::string message_)
      : std::runtime_error(format(file_, line_, key_, message_)),
        file(std::move(file_)),
        line(line_),
        key(std::move(key_)),
        message(std::move(message_)) {}

  std::string file;
  int line = 0;
  std::string key;
  std::string message;

  // "FILE:LINE: KEY: MESSAGE"; the ":LINE" part is left out when the line is unknown (0) and the
  // " KEY:" part when there is no key.
  static std::string format(const std::string& file, int line, const std::string& key, const std::string& message) {
    std::string s = file;
    if (line > 0) s += ":" + std::to_string(line);
    s += ": ";
    if (!key.empty()) s += key + ": ";
    s += message;
    // A NUL byte (quoted from a hostile file) would cut what() short: shown as \0 instead.
    for (std::size_t i = 0; (i = s.find('\0', i)) != std::string::npos; i += 2) s.replace(i, 1, "\\0");
    return s;
  }
};

}  // namespace dobudget::io
