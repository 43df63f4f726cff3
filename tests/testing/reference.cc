#include "tests/testing/reference.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <array>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iomanip>
#include <cmath>
#include <memory>
#include <sstream>

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

// Parses the "name value [value ...]" lines a reference script prints.
std::map<std::string, std::vector<double>> ParseReferenceOutput(const std::string& text) {
  std::map<std::string, std::vector<double>> out;
  std::istringstream lines(text);
  std::string line, name;
  while (std::getline(lines, line)) {
    std::istringstream fields(line);
    fields >> name;
    for (double v; fields >> v;) out[name].push_back(v);
  }
  return out;
}

// Rows softmax(2 z) with z standard normal: confident but often wrong, like a real classifier.
MatrixD RandomProbabilities(int rows, int classes, Philox* rng) {
  MatrixD p(rows, classes);
  for (int i = 0; i < rows; ++i) {
    for (int k = 0; k < classes; ++k) p(i, k) = std::exp(2.0 * rng->NextNormal());
    p.row(i) /= p.row(i).sum();
  }
  return p;
}

std::vector<int32_t> RandomLabels(int rows, int classes, Philox* rng) {
  std::vector<int32_t> labels(rows);
  for (auto& y : labels) y = static_cast<int32_t>(rng->NextBelow(classes));
  return labels;
}

}  // namespace chorus::testing
