// Fuzz target: YAML text through the config loader, with the validation `chorus run` applies
// (coordinator/config_loader.h ParseConfig). An accepted config must survive the round trip a
// run relies on for resume: its resolved YAML (config.yaml in the run directory) parses again to
// a config with the same hash.
#include <cstdlib>
#include <string>

#include "coordinator/config_loader.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  const std::string text(reinterpret_cast<const char*>(data), size);
  const StatusOr<Config> config = ParseConfig(text, "/fuzz/config.yaml");
  if (!config.ok()) return 0;
  const StatusOr<Config> again = ParseConfig(ConfigToYaml(config.value()), "/fuzz/config.yaml");
  if (!again.ok() || ConfigHash(again.value()) != ConfigHash(config.value())) std::abort();
  return 0;
}
