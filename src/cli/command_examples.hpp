// The examples that `--help` shows: each command's own under `dobudget COMMAND --help`, every
// command's (with the caution) under `dobudget --help`. A new command adds its rows to the table
// in command_examples.cpp; main.cpp gives every subcommand its examples.
#pragma once
#include <string>
#include <string_view>
#include <vector>

namespace dobudget::cli {

struct CommandExample {
  std::string_view command;  // the subcommand, e.g. "plan"
  std::string_view line;     // the command line, e.g. "dobudget plan configs/default.yaml"
  std::string_view note;     // what it does (may be empty)
};

// Every example, grouped by command in the order `dobudget --help` lists them.
const std::vector<CommandExample>& command_examples();

// "Examples:" and the examples of `command` (every command's when empty), one per line; "" when
// the command has none.
std::string examples_text(std::string_view command = {});

}  // namespace dobudget::cli
