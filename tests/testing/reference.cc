#include "tests/testing/reference.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <array>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iomanip>
#include <memory>

namespace chorus::testing {

std::string SourcePath(const std::string& relative) {
  return std::string(CHORUS_SOURCE_DIR) + "/" + relative;
}

std::string RunReferenceScript(const std::string& script, const std::vector<std::string>& args) {
  std::string cmd = std::string(CHORUS_REFERENCE_PYTHON) + " '" + SourcePath("tests/reference/" + script) + "'";
  for (const auto& a : args) cmd += " '" + a + "'";
  std::unique_ptr<FILE, int (*)(FILE*)> pipe(popen(cmd.c_str(), "r"), pclose);
  if (!pipe) {
    ADD_FAILURE() << "cannot start: " << cmd;
    return "";
  }
  std::string out;
  std::array<char, 4096> buf;
  size_t n;
  while ((n = fread(buf.data(), 1, buf.size(), pipe.get())) > 0) out.append(buf.data(), n);
  const int rc = pclose(pipe.release());
  if (rc != 0) {
    ADD_FAILURE() << "reference script failed (status " << rc << "): " << cmd << "\n" << out;
    return "";
  }
  return out;
}

std::string MakeTempDir(const std::string& prefix) {
  const char* base = std::getenv("TMPDIR");
  std::string tmpl = std::string(base ? base : "/tmp") + "/" + prefix + "-XXXXXX";
  if (mkdtemp(tmpl.data()) == nullptr) {
    ADD_FAILURE() << "mkdtemp failed for " << tmpl;
    return "";
  }
  return tmpl;
}

void WriteMatrixText(const std::string& path, const MatrixD& m) {
  std::ofstream f(path);
  f << m.rows() << " " << m.cols() << "\n" << std::setprecision(17);
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) f << (j ? " " : "") << m(i, j);
    f << "\n";
  }
}

MatrixD ReadMatrixText(const std::string& path) {
  std::ifstream f(path);
  Eigen::Index rows = 0, cols = 0;
  f >> rows >> cols;
  MatrixD m(rows, cols);
  for (Eigen::Index i = 0; i < rows; ++i)
    for (Eigen::Index j = 0; j < cols; ++j) f >> m(i, j);
  if (!f) ADD_FAILURE() << "could not read matrix from " << path;
  return m;
}

}  // namespace chorus::testing
