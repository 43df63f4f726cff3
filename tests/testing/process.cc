#include "tests/testing/process.h"

#include <gtest/gtest.h>
#include <sys/wait.h>

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
