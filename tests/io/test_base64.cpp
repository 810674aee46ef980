// Base64 (src/io/base64.hpp) against the test vectors of RFC 4648 (Josefsson 2006), section 10,
// and against coreutils' base64(1) on every byte value when it is installed.
#include <catch2/catch.hpp>

#include "temp_dir.hpp"

#include <string>

#include "io/base64.hpp"
#include "io/child_process.hpp"
#include "io/report.hpp"

using namespace dobudget;

TEST_CASE("base64: the test vectors of RFC 4648, section 10", "[base64]") {
  CHECK(io::base64("") == "");
  CHECK(io::base64("f") == "Zg==");
  CHECK(io::base64("fo") == "Zm8=");
  CHECK(io::base64("foo") == "Zm9v");
  CHECK(io::base64("foob") == "Zm9vYg==");
  CHECK(io::base64("fooba") == "Zm9vYmE=");
  CHECK(io::base64("foobar") == "Zm9vYmFy");
}

TEST_CASE("base64: every byte value, as coreutils base64 encodes it", "[base64]") {
  const auto tool = io::find_program("base64");
  if (!tool) {
    WARN("coreutils base64 not found: checked against RFC 4648's vectors only");
    return;
  }
  dobudget::test::TempDir tmp;
  std::string bytes;
  for (int round = 0; round < 3; ++round)
    for (int b = 0; b < 256; ++b) bytes += static_cast<char>((b * (round + 1)) & 0xff);
  bytes += "\x00\xff";
  const auto file = tmp.write("bytes.bin", bytes);
  const auto r = io::run_child(*tool, {"-w", "0", file.string()}, tmp.path());
  REQUIRE(r.exit_code == 0);
  CHECK(io::base64(bytes) == r.output);
}
