// A writer process killed with SIGKILL at 50 seeded random moments: after
// every kill the file passes PRAGMA integrity_check and holds exactly the
// batches its checkpoint covers (row by row, nothing duplicated or missing),
// the checkpoint never goes back, and the next process resumes exactly there.
// The process is tests/helpers/writer_driver.cpp; its data is deterministic
// (tests/helpers/crash_workload.hpp), so the test knows what must be stored.
#include <catch2/catch.hpp>

#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "helpers/crash_workload.hpp"
#include "storage_fixture.hpp"

extern char** environ;

using namespace accrue;
namespace crash = accrue::testing::crash;

namespace {

struct Child {
  pid_t pid = -1;
  int out = -1;  // its stdout
};

Child spawn_driver(const std::vector<std::string>& args) {
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, fds[1], 1);
  posix_spawn_file_actions_addclose(&actions, fds[0]);
  std::vector<char*> argv;
  std::vector<std::string> all{ACCRUE_WRITER_DRIVER};
  all.insert(all.end(), args.begin(), args.end());
  for (auto& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  Child c;
  const int rc = ::posix_spawn(&c.pid, argv[0], &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  ::close(fds[1]);
  REQUIRE(rc == 0);
  c.out = fds[0];
  return c;
}

// The driver's "ready" line, or "" if it ended first. The 30 s bound only
// stops a hung test; nothing is decided by time.
std::string read_line(int fd) {
  std::string line;
  char ch = 0;
  while (line.empty() || line.back() != '\n') {
    pollfd p{fd, POLLIN, 0};
    if (::poll(&p, 1, 30000) <= 0) break;
    if (::read(fd, &ch, 1) != 1) break;
    line += ch;
  }
  return line;
}

int wait_exit(Child& c) {
  int status = 0;
  REQUIRE(::waitpid(c.pid, &status, 0) == c.pid);
  ::close(c.out);
  return status;
}

}  // namespace

TEST_CASE("writer: SIGKILL at 50 seeded moments leaves exactly the committed prefix, and the next writer resumes there") {
  storage::testing::TempDir dir("crash");
  const std::string path = dir.file("crash.db");
  std::mt19937 rng(20261202);  // seeded: the same kill moments on every run
  std::uniform_int_distribution<int> after_ready_us(0, 60000);
  std::uniform_int_distribution<int> after_spawn_us(0, 20000);
  std::int64_t committed = 0;
  int kills_after_progress = 0, kills_during_open = 0, kills_before_first_commit = 0;
  for (int kill = 0; kill < 50; ++kill) {
    Child c = spawn_driver({path});
    // One kill in five lands from the spawn (opening, migrating, resuming);
    // the others land while the writer commits.
    const bool early = kill % 5 == 0;
    std::string ready;
    if (early) {
      std::this_thread::sleep_for(std::chrono::microseconds(after_spawn_us(rng)));
    } else {
      ready = read_line(c.out);
      REQUIRE(ready.rfind("ready ", 0) == 0);
      // Resumed exactly at the stored checkpoint.
      CHECK(std::stoll(ready.substr(6)) == committed);
      std::this_thread::sleep_for(std::chrono::microseconds(after_ready_us(rng)));
    }
    REQUIRE(::kill(c.pid, SIGKILL) == 0);
    const int status = wait_exit(c);
    REQUIRE((WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL));
    const crash::Verdict v = crash::verify(path);
    INFO("kill " << kill << ": " << v.error);
    REQUIRE(v.ok());
    REQUIRE(v.batches >= committed);  // a checkpoint never goes back
    if (early) ++kills_during_open;
    if (v.batches == 0) ++kills_before_first_commit;
    if (v.batches > committed) ++kills_after_progress;
    committed = v.batches;
  }
  // A last writer runs to a fixed end and stops cleanly: the stream carries on
  // from the last checkpoint to exactly that end, with every row once.
  const std::int64_t end = committed + 100;
  Child c = spawn_driver({path, "--batches", std::to_string(end)});
  const std::string ready = read_line(c.out);
  CHECK(ready.rfind("ready " + std::to_string(committed) + " ", 0) == 0);
  const int status = wait_exit(c);
  REQUIRE((WIFEXITED(status) && WEXITSTATUS(status) == 0));
  const crash::Verdict v = crash::verify(path);
  INFO(v.error);
  REQUIRE(v.ok());
  REQUIRE(v.batches == end);
  WARN("50 kills: " << kills_during_open << " from the spawn, " << kills_before_first_commit
                    << " before the first commit, " << kills_after_progress << " after new commits; " << committed
                    << " batches committed across the kills");
}
