#include "tests/testing/process.h"

#include <gtest/gtest.h>
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <thread>

#include <array>
#include <cstdio>
#include <fstream>
#include <sstream>

namespace chorus::testing {

CommandResult RunShell(const std::string& command_line, int timeout_seconds) {
  std::string quoted;
  for (char c : command_line) quoted += c == '\'' ? std::string("'\\''") : std::string(1, c);
  const std::string cmd = "timeout -s KILL " + std::to_string(timeout_seconds) + " sh -c '" +
                          quoted + "' 2>&1";
  CommandResult result;
  FILE* pipe = popen(cmd.c_str(), "r");
  if (pipe == nullptr) {
    ADD_FAILURE() << "cannot start: " << cmd;
    return result;
  }
  std::array<char, 4096> buf;
  size_t n;
  while ((n = fread(buf.data(), 1, buf.size(), pipe)) > 0) result.output.append(buf.data(), n);
  const int status = pclose(pipe);
  result.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  return result;
}

extern "C" char** environ;

BackgroundProcess::BackgroundProcess(const std::vector<std::string>& argv, const std::string& log_file) {
  std::vector<std::string> copy = argv;
  std::vector<char*> args;
  for (std::string& a : copy) args.push_back(a.data());
  args.push_back(nullptr);
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, log_file.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
  posix_spawn_file_actions_adddup2(&actions, STDOUT_FILENO, STDERR_FILENO);
  pid_t pid = -1;
  if (posix_spawn(&pid, args[0], &actions, nullptr, args.data(), environ) != 0) {
    ADD_FAILURE() << "cannot start " << argv[0];
  }
  posix_spawn_file_actions_destroy(&actions);
  pid_ = pid;
}

BackgroundProcess::~BackgroundProcess() {
  if (pid_ > 0 && !reaped_) {
    kill(pid_, SIGKILL);
    waitpid(pid_, nullptr, 0);
  }
}

void BackgroundProcess::Signal(int signal) const {
  if (pid_ > 0 && !reaped_) kill(pid_, signal);
}

int BackgroundProcess::Wait(double seconds) {
  const bool done = WaitFor([this] {
    if (reaped_) return true;
    if (waitpid(pid_, &status_, WNOHANG) == pid_) reaped_ = true;
    return reaped_;
  }, seconds);
  if (!done) return -1;
  return WIFEXITED(status_) ? WEXITSTATUS(status_) : 128 + WTERMSIG(status_);
}

bool WaitFor(const std::function<bool()>& condition, double seconds) {
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration<double>(seconds);
  while (!condition()) {
    if (std::chrono::steady_clock::now() >= until) return false;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  return true;
}

std::string BinaryPath(const std::string& name) { return std::string(CHORUS_BINARY_DIR) + "/" + name; }

void WriteTextFile(const std::string& path, const std::string& text) {
  std::ofstream f(path, std::ios::binary);
  f << text;
  if (!f) ADD_FAILURE() << "cannot write " << path;
}

std::string ReadTextFile(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  if (!f) {
    ADD_FAILURE() << "cannot read " << path;
    return "";
  }
  std::ostringstream s;
  s << f.rdbuf();
  return s.str();
}

}  // namespace chorus::testing
