// Opening only regular files (io/regular_file.hpp): a regular file opens (through a symbolic link
// only where links are followed); a pipe, a device or a directory is refused at once, never waited
// on or read without end; a dangling link is not created through; the descriptor handed out is
// blocking and close-on-exec; a capped read reads nothing of a file over its cap.
#include <catch2/catch.hpp>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <chrono>
#include <condition_variable>
#include <filesystem>
#include <mutex>
#include <thread>

#include "input_error_of.hpp"
#include "io/atomic_file.hpp"
#include "io/regular_file.hpp"
#include "temp_dir.hpp"

namespace fs = std::filesystem;
using dobudget::io::Links;
using dobudget::io::open_regular_file;
using dobudget::test::error_of;

namespace {

// A FIFO at `path`. Should the code under test block on it after all (open(2) waiting for the
// other end, read(2) for data), a watchdog opens and closes the other end after 20 s: the call
// returns and the test fails, instead of hanging.
class Fifo {
 public:
  explicit Fifo(fs::path path) : path_(std::move(path)) {
    REQUIRE(::mkfifo(path_.c_str(), 0644) == 0);
    watchdog_ = std::thread([this] {
      std::unique_lock<std::mutex> lock(mutex_);
      if (!done_cv_.wait_for(lock, std::chrono::seconds(20), [this] { return done_; })) {
        const int fd = ::open(path_.c_str(), O_RDWR | O_NONBLOCK);  // both ends: unblocks either side
        if (fd >= 0) ::close(fd);
      }
    });
  }
  ~Fifo() {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      done_ = true;
    }
    done_cv_.notify_one();
    watchdog_.join();
  }
  const fs::path& path() const { return path_; }

 private:
  fs::path path_;
  std::mutex mutex_;
  std::condition_variable done_cv_;
  bool done_ = false;
  std::thread watchdog_;
};

}  // namespace

TEST_CASE("regular file: a regular file opens; a symbolic link to one only where links are followed",
          "[io][regular_file]") {
  dobudget::test::TempDir d("dobudget_test_regular_file");
  const fs::path file = d.write("file.txt", "contents\n");
  const fs::path link = d.path() / "link.txt";
  fs::create_symlink(file, link);

  const int fd = open_regular_file(link, O_RDONLY, Links::follow);
  REQUIRE(fd >= 0);
  CHECK(dobudget::io::read_descriptor(fd, link) == "contents\n");
  // Blocking again (O_NONBLOCK cleared) and close-on-exec.
  CHECK((::fcntl(fd, F_GETFL) & O_NONBLOCK) == 0);
  CHECK((::fcntl(fd, F_GETFD) & FD_CLOEXEC) != 0);
  ::close(fd);

  auto e = error_of([&] { open_regular_file(link, O_RDWR | O_APPEND, Links::refuse); });
  CHECK(e.file == link.string());
  CHECK_THAT(e.message, Catch::Contains("is a symbolic link"));
  CHECK(dobudget::io::read_file(file) == "contents\n");

  // A dangling link is not created through (O_CREAT would otherwise make its target).
  const fs::path target = d.path() / "elsewhere.txt", dangling = d.path() / "dangling.txt";
  fs::create_symlink(target, dangling);
  e = error_of([&] { open_regular_file(dangling, O_RDWR | O_CREAT, Links::refuse); });
  CHECK_THAT(e.message, Catch::Contains("is a symbolic link"));
  CHECK_FALSE(fs::exists(target));

  // A missing file is the caller's to judge: -1 and errno.
  errno = 0;
  CHECK(open_regular_file(d.path() / "missing", O_RDONLY, Links::follow) == -1);
  CHECK(errno == ENOENT);
}

TEST_CASE("regular file: a pipe, a device or a directory is refused at once, never waited on or read without end",
          "[io][regular_file]") {
  dobudget::test::TempDir d("dobudget_test_regular_file");
  const Fifo fifo(d.path() / "units.journal");
  const auto started = std::chrono::steady_clock::now();
  for (const int flags : {O_RDONLY, O_WRONLY | O_APPEND, O_RDWR | O_APPEND | O_CREAT})
    for (const Links links : {Links::follow, Links::refuse}) {
      INFO("flags " << flags << ", links " << (links == Links::follow ? "followed" : "refused"));
      const auto e = error_of([&] { open_regular_file(fifo.path(), flags, links); });
      CHECK(e.file == fifo.path().string());
      CHECK_THAT(e.message, Catch::StartsWith("is not a regular file but a pipe (FIFO)"));
    }
  CHECK_THAT(error_of([&] { dobudget::io::read_file(fifo.path()); }).message, Catch::Contains("a pipe (FIFO)"));
  CHECK_THAT(error_of([&] { dobudget::io::read_file_start(fifo.path(), 200); }).message, Catch::Contains("a pipe (FIFO)"));
  // A link to the pipe, where links are followed, is the pipe.
  const fs::path link = d.path() / "runs.csv";
  fs::create_symlink(fifo.path(), link);
  CHECK_THAT(error_of([&] { dobudget::io::read_file(link); }).message, Catch::Contains("a pipe (FIFO)"));
  // Far within the watchdog's 20 s: nothing waited.
  CHECK(std::chrono::steady_clock::now() - started < std::chrono::seconds(10));

  // /dev/zero reads without end; a directory is not a file.
  CHECK_THAT(error_of([] { dobudget::io::read_file("/dev/zero"); }).message, Catch::Contains("but a device"));
  const fs::path zero = d.path() / "timings.csv";
  fs::create_symlink("/dev/zero", zero);
  CHECK_THAT(error_of([&] { dobudget::io::read_file(zero); }).message, Catch::Contains("but a device"));
  fs::create_directories(d.path() / "dir");
  CHECK_THAT(error_of([&] { open_regular_file(d.path() / "dir", O_RDWR, Links::refuse); }).message,
             Catch::Contains("but a directory"));
}

TEST_CASE("regular file: a capped read reads nothing of a file over its cap; a start read only its start",
          "[io][regular_file]") {
  dobudget::test::TempDir d("dobudget_test_regular_file");
  const fs::path file = d.write("runs.csv", std::string(1000, 'x'));
  std::uintmax_t size = 0;
  CHECK_FALSE(dobudget::io::read_regular_file(file, 999, &size).has_value());
  CHECK(size == 1000);
  const auto whole = dobudget::io::read_regular_file(file, 1000, &size);
  REQUIRE(whole.has_value());
  CHECK(whole->size() == 1000);
  CHECK(dobudget::io::read_file_start(file, 10) == std::string(10, 'x'));
  CHECK(dobudget::io::read_file_start(file, 5000).size() == 1000);
  CHECK_THROWS_WITH(dobudget::io::read_file_start(d.path() / "missing", 10), Catch::Contains("missing"));
}
