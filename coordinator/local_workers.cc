#include "coordinator/local_workers.h"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <chrono>
#include <cstring>
#include <filesystem>
#include <thread>

extern char** environ;

namespace chorus {

LocalWorkers::~LocalWorkers() { Stop(2.0); }

Status LocalWorkers::Start(const std::string& worker_binary, const std::vector<std::string>& args,
                           int count, const std::string& log_file) {
  std::vector<std::string> argv_storage = {worker_binary};
  argv_storage.insert(argv_storage.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (std::string& a : argv_storage) argv.push_back(a.data());
  argv.push_back(nullptr);
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, log_file.c_str(),
                                   O_WRONLY | O_CREAT | O_APPEND, 0644);
  posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, "/dev/null", O_WRONLY, 0);
  Status st;
  for (int i = 0; i < count && st.ok(); ++i) {
    pid_t pid = 0;
    const int rc = posix_spawn(&pid, worker_binary.c_str(), &actions, nullptr, argv.data(), environ);
    if (rc != 0) st = Status::Internal("cannot start " + worker_binary + ": " + std::strerror(rc));
    else pids_.push_back(pid);
  }
  posix_spawn_file_actions_destroy(&actions);
  return st;
}

int LocalWorkers::WaitForExit(double seconds) {
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration<double>(seconds);
  while (!pids_.empty()) {
    for (size_t i = 0; i < pids_.size();) {
      if (waitpid(pids_[i], nullptr, WNOHANG) != 0) pids_.erase(pids_.begin() + static_cast<long>(i));
      else ++i;
    }
    if (pids_.empty() || std::chrono::steady_clock::now() >= until) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  return static_cast<int>(pids_.size());
}

void LocalWorkers::Stop(double grace_seconds) {
  for (pid_t p : pids_) kill(p, SIGTERM);
  if (WaitForExit(grace_seconds) == 0) return;
  for (pid_t p : pids_) kill(p, SIGKILL);
  for (pid_t p : pids_) waitpid(p, nullptr, 0);
  pids_.clear();
}

std::string WorkerBinaryPath() {
  std::error_code ec;
  const auto self = std::filesystem::read_symlink("/proc/self/exe", ec);
  if (ec) return "chorus-worker";
  return (self.parent_path() / "chorus-worker").string();
}

}  // namespace chorus
