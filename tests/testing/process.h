// Running the project's executables from tests. Thread safety: reentrant.
#pragma once

#include <string>

namespace chorus::testing {

struct CommandResult {
  int exit_code = -1;   // the process's exit status, or -1 if it did not exit normally
  std::string output;   // stdout and stderr together
};

// Runs `command_line` through /bin/sh with stderr merged into stdout, bounded by `timeout_seconds`
// (coreutils timeout; a killed command reports exit code 124 or 137).
CommandResult RunShell(const std::string& command_line, int timeout_seconds = 600);

// Path of a built executable (chorus, chorus-demo-data).
std::string BinaryPath(const std::string& name);

// Writes a text file, creating nothing else; fails the test on error.
void WriteTextFile(const std::string& path, const std::string& text);

// Reads a whole file; "" (and a test failure) if it cannot be read.
std::string ReadTextFile(const std::string& path);

}  // namespace chorus::testing
