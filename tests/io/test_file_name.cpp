// Hardening: a study name never chooses where files go (safe_file_name, file_name.hpp).
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "io/file_name.hpp"

using dobudget::io::safe_file_name;

TEST_CASE("safe_file_name keeps plain names and makes every other name one harmless component", "[file_name][hardening]") {
  CHECK(safe_file_name("default") == "default");
  CHECK(safe_file_name("tutoring-sweep_v2.1") == "tutoring-sweep_v2.1");
  CHECK(safe_file_name("Orchard irrigation 2026") == "Orchard-irrigation-2026");
  CHECK(safe_file_name("../../escaped") == "escaped");
  CHECK(safe_file_name("/etc/passwd") == "etc-passwd");
  CHECK(safe_file_name("a/../b") == "a-..-b");
  CHECK(safe_file_name("..").rfind("study-", 0) == 0);
  CHECK(safe_file_name(".hidden") == "hidden");
  CHECK(safe_file_name("--help") == "help");
  CHECK(safe_file_name("x`touch PWNED`y") == "x-touch-PWNED-y");
  CHECK(safe_file_name("C:\\temp\\x") == "C-temp-x");
  CHECK(safe_file_name("Gew\xc3\xa4" "chshaus") == "Gew-chshaus");
  CHECK(safe_file_name("") == "study");
  CHECK(safe_file_name("///").rfind("study-", 0) == 0);
  // Names with nothing left still get directories of their own: "study-" and 8 hex digits.
  const std::string greenhouse = safe_file_name("\xe6\xb8\xa9\xe5\xae\xa4"), orchard = safe_file_name("\xe6\x9e\x9c\xe5\x9b\xad");
  CHECK(greenhouse.size() == 14);
  CHECK(greenhouse.rfind("study-", 0) == 0);
  CHECK(greenhouse != orchard);
  CHECK(greenhouse == safe_file_name("\xe6\xb8\xa9\xe5\xae\xa4"));
  CHECK(safe_file_name(std::string(300, 'a')).size() == 80);
  // Whatever the input, the result is one path component that is neither "." nor "..".
  for (const std::string& s : std::vector<std::string>{"/", "\\", ". .", "-.-", "a\nb", std::string("\0x", 2)}) {
    const std::string f = safe_file_name(s);
    INFO(f);
    CHECK(f.find('/') == std::string::npos);
    CHECK(f != ".");
    CHECK(f != "..");
    CHECK(!f.empty());
    CHECK(f.front() != '.');
    CHECK(f.front() != '-');
  }
}
