// Running the project's executables from tests. Thread safety: reentrant.
#pragma once

#include <functional>
#include <string>
#include <vector>

namespace chorus::testing {

struct CommandResult {
  int exit_code = -1;   // the process's exit status, or -1 if it did not exit normally
  std::string output;   // stdout and stderr together
};

// Runs `command_line` through /bin/sh with stderr merged into stdout, bounded by `timeout_seconds`
// (coreutils timeout; a killed command reports exit code 124 or 137).
CommandResult RunShell(const std::string& command_line, int timeout_seconds = 600);

// A child process run without a shell, its stdout and stderr appended to a log file. The
// destructor kills (SIGKILL) and reaps it if it is still running, so tests never leave
// processes behind.
class BackgroundProcess {
 public:
  BackgroundProcess(const std::vector<std::string>& argv, const std::string& log_file);
  ~BackgroundProcess();
  BackgroundProcess(const BackgroundProcess&) = delete;
  BackgroundProcess& operator=(const BackgroundProcess&) = delete;

  int pid() const { return pid_; }
  void Signal(int signal) const;
  // Waits up to `seconds`; returns the exit code, 128 + signal if killed, or -1 on timeout.
  int Wait(double seconds);

 private:
  int pid_ = -1;
  bool reaped_ = false;
  int status_ = 0;
};

// Polls `condition` every 20 ms for up to `seconds`; returns whether it became true.
bool WaitFor(const std::function<bool()>& condition, double seconds);

// Path of a built executable (chorus, chorus-demo-data).
std::string BinaryPath(const std::string& name);

// Writes a text file, creating nothing else; fails the test on error.
void WriteTextFile(const std::string& path, const std::string& text);

// Reads a whole file; "" (and a test failure) if it cannot be read.
std::string ReadTextFile(const std::string& path);

}  // namespace chorus::testing
