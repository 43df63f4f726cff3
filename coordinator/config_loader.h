// Turning a YAML config file into a validated Config (common/config.h), and back into YAML.
// This is the only code in chorus that includes yaml-cpp. Thread safety: free functions.
#pragma once

#include <string>

#include "common/config.h"
#include "common/status.h"

namespace chorus {

// Reads and validates `path`. Unknown keys, wrong types and out-of-range values are kInvalidInput
// with "PATH:LINE:COLUMN: KEY: what was expected". Relative data paths are resolved against the
// config file's directory and stored absolute. Defaults fill every key not given.
StatusOr<Config> LoadConfigFile(const std::string& path);

// The same, from text; `path` names the source in messages and anchors relative paths.
StatusOr<Config> ParseConfig(const std::string& yaml_text, const std::string& path);

// The resolved config as YAML, every key present (what a run writes as config.yaml).
std::string ConfigToYaml(const Config& config);

// SHA-256 hex of the parts of the config that change trained members or assembly (run.seed, data,
// model, train, ensemble); speed-only settings and names do not change it.
std::string ConfigHash(const Config& config);

}  // namespace chorus
