// deploy/ holds working examples: every YAML file parses and its Kubernetes objects fit together,
// every chorus config in it loads, and every flag its scripts, systemd units and manifests pass
// to chorus and chorus-worker exists (checked against the executables' --help). What deploy/
// asks of chorus is read by tests/deploy/deploy_files.py (PyYAML, Debian python3-yaml).
#include <gtest/gtest.h>

#include <algorithm>
#include <map>
#include <nlohmann/json.hpp>
#include <regex>
#include <set>
#include <sstream>

#include "coordinator/config_loader.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace deploy_files_test {

using nlohmann::json;

using Records = std::map<std::string, std::vector<json>>;

// Every record deploy_files.py prints, grouped by kind ("command", "config", "problem").
Records ReadDeployFiles() {
  const auto r = testing::RunShell(std::string(CHORUS_REFERENCE_PYTHON) + " " +
                                       testing::SourcePath("tests/deploy/deploy_files.py") + " " +
                                       testing::SourcePath("deploy") + " 2>&1",
                                   60);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  Records records;
  std::istringstream lines(r.output);
  for (std::string line; std::getline(lines, line);) {
    const json record = json::parse(line, nullptr, false);
    if (record.is_discarded()) {
      ADD_FAILURE() << "not a record: " << line;
      continue;
    }
    records[record["kind"].get<std::string>()].push_back(record);
  }
  return records;
}

// The records of one kind (none is an empty list).
std::vector<json> OfKind(const Records& records, const std::string& kind) {
  const auto it = records.find(kind);
  return it == records.end() ? std::vector<json>{} : it->second;
}

// The long options a CLI11 --help lists ("  -h,--help", "  --registry TEXT REQUIRED").
std::set<std::string> HelpFlags(const std::string& help) {
  static const std::regex option(R"(^\s+(?:-\w,)?(--[A-Za-z0-9][A-Za-z0-9-]*))");
  std::set<std::string> flags;
  std::istringstream lines(help);
  std::smatch m;
  for (std::string line; std::getline(lines, line);) {
    if (std::regex_search(line, m, option)) flags.insert(m[1]);
  }
  return flags;
}

// `chorus SUBCOMMAND --help` or `chorus-worker --help`; "" (and a failure) if it does not exist.
std::string Help(const std::vector<std::string>& command) {
  std::string line = testing::BinaryPath(command[0]);
  for (size_t i = 1; i < command.size(); ++i) line += " " + command[i];
  const auto r = testing::RunShell(line + " --help", 30);
  EXPECT_EQ(r.exit_code, 0) << line << " --help: " << r.output;
  return r.exit_code == 0 ? r.output : "";
}

// The subcommands `chorus --help` lists ("  run    Train every member...").
std::set<std::string> Subcommands(const std::string& help) {
  static const std::regex subcommand(R"(^  ([a-z]+)\s)");
  std::set<std::string> names;
  std::istringstream lines(help.substr(std::min(help.size(), help.find("Subcommands:"))));
  std::smatch m;
  for (std::string line; std::getline(lines, line);) {
    if (std::regex_search(line, m, subcommand)) names.insert(m[1]);
  }
  return names;
}

TEST(DeployFilesTest, EveryYamlFileParsesAndTheManifestsFitTogether) {
  const Records records = ReadDeployFiles();
  for (const json& problem : OfKind(records, "problem")) {
    ADD_FAILURE() << "deploy/" << problem["file"].get<std::string>() << ": "
                  << problem["what"].get<std::string>();
  }
  // The examples the README promises: systemd, Kubernetes and Slurm each run chorus.
  std::set<std::string> files;
  for (const json& c : OfKind(records, "command")) files.insert(c["file"].get<std::string>());
  for (const char* file : {"nightly.sh", "systemd/chorus-worker.service", "slurm/chorus.sbatch",
                           "kubernetes/worker-deployment.yaml"}) {
    EXPECT_TRUE(files.count(file)) << "no chorus command found in deploy/" << file;
  }
}

TEST(DeployFilesTest, EveryChorusConfigLoads) {
  const std::vector<json> configs = OfKind(ReadDeployFiles(), "config");
  EXPECT_GE(configs.size(), 3u);  // systemd, Kubernetes, Slurm
  for (const json& config : configs) {
    const std::string file = config["file"].get<std::string>();
    SCOPED_TRACE(file);
    const StatusOr<Config> loaded =
        ParseConfig(config["text"].get<std::string>(), testing::SourcePath("deploy/" + file));
    ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
    // Remote workers train these runs: each coordinator listens beyond loopback with a token.
    EXPECT_FALSE(loaded.value().cluster.listen.empty());
    EXPECT_FALSE(loaded.value().cluster.token_file.empty());
  }
}

TEST(DeployFilesTest, EveryFlagPassedToChorusAndChorusWorkerExists) {
  const std::vector<json> commands = OfKind(ReadDeployFiles(), "command");
  ASSERT_FALSE(commands.empty());
  const std::set<std::string> subcommands = Subcommands(Help({"chorus"}));
  std::map<std::vector<std::string>, std::set<std::string>> help;  // command -> its flags
  for (const json& record : commands) {
    const auto argv = record["argv"].get<std::vector<std::string>>();
    SCOPED_TRACE("deploy/" + record["file"].get<std::string>() + ": " + record["argv"].dump());
    std::vector<std::string> command = {argv[0]};
    if (argv[0] == "chorus") {
      ASSERT_GE(argv.size(), 2u);
      ASSERT_TRUE(subcommands.count(argv[1])) << "chorus has no subcommand " << argv[1];
      command.push_back(argv[1]);
    }
    if (!help.count(command)) help[command] = HelpFlags(Help(command));
    for (const std::string& arg : argv) {
      if (arg.size() < 3 || arg.compare(0, 2, "--") != 0) continue;
      const std::string flag = arg.substr(0, arg.find('='));
      EXPECT_TRUE(help[command].count(flag)) << command.back() << " has no " << flag;
    }
  }
}

}  // namespace deploy_files_test
}  // namespace chorus
