// Small real runs of the `chorus` executable on the invented demo data (tools/demo_data.cc), for
// tests of what a finished run directory holds. Thread safety: not thread-safe (runs processes,
// writes files); call from one test thread.
#pragma once

#include <string>

namespace chorus::testing {

// Writes 1200 training and 400 test rows of demo data to DIR/data; fails the test on error.
void WriteDemoData(const std::string& dir);

// YAML of a quick run on DIR/data (a config written into DIR): classification of alarm causes
// (with their true probabilities) or regression of hours to fault, one hidden layer of 16 units;
// `extra` is appended and holds the other sections (train, ensemble, ...).
std::string DemoClassificationYaml(const std::string& name, int seed, const std::string& extra);
std::string DemoRegressionYaml(const std::string& name, int seed, const std::string& extra);

// Writes DIR/NAME.yaml, runs `chorus run` on it with --out DIR/runs-NAME and returns the run
// directory (the one holding manifest.json); on failure records a test failure with the output
// and returns "".
std::string RunDemo(const std::string& dir, const std::string& name, const std::string& yaml);

// RunDemo made once per build for suites whose tests only read the run: CTest starts every test
// in its own process, so a suite's SetUpTestSuite would otherwise train the same members again
// for each test. The run lives under CHORUS_BINARY_DIR/test-runs/, keyed by a SHA-256 of `yaml`
// and of the `chorus` and `chorus-demo-data` executables' sizes and times; processes asking for
// it at once take turns on a lock file. Returns the run directory, or "" after a test failure.
std::string SharedDemoRun(const std::string& name, const std::string& yaml);

// The four small shared runs the promote, history, export and warm-start tests read: per task a
// better run (3 members, 8 epochs, seed 1) and a weaker one (1 member, 2 epochs, seed 2), in
// process. One definition, so every suite asks SharedDemoRun for the same name and YAML and the
// members train once per build.
enum class PromoteRun { kBetter, kWeaker, kBetterRegression, kWeakerRegression };
constexpr char kBetterRunSettings[] =
    "train: {epochs: 8}\nensemble: {members: 3}\ncluster: {local_workers: 0}\n";
constexpr char kWeakerRunSettings[] =
    "train: {epochs: 2}\nensemble: {members: 1}\ncluster: {local_workers: 0}\n";
std::string SharedPromoteRun(PromoteRun which);

}  // namespace chorus::testing
