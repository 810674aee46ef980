// Hardening: helper programs run without a shell (child_process.hpp). Arguments reach the program
// byte for byte, so shell syntax in them is inert. Reference programs: coreutils' echo, pwd, true
// and false (POSIX.1-2017, "Shell and Utilities", the echo/pwd/true/false utilities).
#include <catch2/catch.hpp>

#include <filesystem>
#include <string>

#include "io/child_process.hpp"
#include "temp_dir.hpp"

using dobudget::io::run_child;
using dobudget::test::TempDir;
namespace fs = std::filesystem;

TEST_CASE("run_child passes arguments verbatim: shell syntax is never interpreted", "[child_process][hardening]") {
  TempDir dir("child");
  const std::string hostile = "x`touch PWNED1`y $(touch PWNED2); touch PWNED3 | touch PWNED4 'q\" \\ * ~ && >PWNED5";
  const auto r = run_child("/bin/echo", {"-n", hostile}, dir.path());
  REQUIRE(r.started);
  CHECK(r.exit_code == 0);
  CHECK(r.output == hostile);
  CHECK(fs::is_empty(dir.path()));  // nothing was created, in the working directory or elsewhere
  for (const char* f : {"PWNED1", "PWNED2", "PWNED3", "PWNED4", "PWNED5"}) CHECK_FALSE(fs::exists(f));
}

TEST_CASE("run_child runs in the given folder and reports exit codes and missing programs", "[child_process]") {
  TempDir dir("child-cwd");
  const auto pwd = run_child("/bin/pwd", {}, dir.path());
  REQUIRE(pwd.started);
  CHECK(fs::equivalent(fs::path(pwd.output.substr(0, pwd.output.find('\n'))), dir.path()));
  CHECK(run_child("/bin/true", {}, dir.path()).exit_code == 0);
  CHECK(run_child("/bin/false", {}, dir.path()).exit_code == 1);
  CHECK_FALSE(run_child(dir.path() / "no-such-program", {}, dir.path()).started);
  CHECK_FALSE(run_child("/bin/true", {}, dir.path() / "no-such-folder").started);
}
