// Warm start (config train.warm_start): a run's members start from the weights of an earlier
// bundle, usually the registry's current one, and fine-tune on this run's data instead of
// training from a random initialisation. The bundle must describe the same problem: the same
// task, classes (names and order), input columns (names, kinds, categorical vocabularies), data
// format and network (widths, activation; dense layers only). Member i starts from the bundle's
// member (i mod M): its trained weights, or for a basin fit the fit's mean (cyclical SG-MCMC:
// its last sample).
//
// The bundle's network read inputs standardised with its own training statistics; this run
// standardises with its own. Both are per-feature affine maps, so the first layer absorbs the
// difference exactly: with a = s_new / s_old and c = (m_new - m_old) / s_old per feature,
// W' = diag(a) W and b' = b + W^T c. For regression the last layer likewise maps the bundle's
// standardised target onto this run's: with r = t_old / t_new, the mean row is scaled by r and
// shifted by (mu_old - mu_new) / t_new, and the log-variance bias moves by 2 ln r. The networks'
// outputs are then the same functions of the raw inputs (to float rounding).
// Thread safety: free functions, reentrant.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/bundle.h"
#include "common/config.h"
#include "common/mlp.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

struct WarmStart {
  std::string path;    // the bundle file read (a registry's current bundle, resolved)
  std::string sha256;  // its payload's SHA-256
  Bundle bundle;       // as read, kept for scoring on this run's test split
  std::vector<std::shared_ptr<const std::vector<float>>> points;  // one per bundle member
};

// Reads config.train.warm_start (a bundle file, or a registry directory: its current bundle),
// checks that it fits `config` and `data`, and makes the starting points; nullopt for a
// registry without a current bundle yet (the first night of a nightly loop starts cold).
// Errors (kInvalidInput, naming the file and what differs): unreadable or corrupt bundle, a
// directory that is not a registry, a mismatch as above, convolution stages, or (cluster route)
// weights too many for a lease reply.
StatusOr<std::optional<WarmStart>> LoadWarmStart(const Config& config, const PreparedData& data);

// `params` (a network with `net`'s layout, reading inputs standardised with `from` and, for
// regression, predicting a target standardised with from_target_mean/scale) rewritten to read
// inputs standardised with `to` and predict the target standardised with to_target_mean/scale.
// Requires a network without convolution stages and standardizers of net.Inputs() entries.
std::vector<float> Restandardized(const Mlp& net, Task task, std::vector<float> params,
                                  const Standardizer& from, float from_target_mean,
                                  float from_target_scale, const Standardizer& to,
                                  float to_target_mean, float to_target_scale);

// The config hash of a warm-started run: the resolved config's hash and the warm-start bundle's
// payload SHA-256, so a resume or a result from another start is told apart.
std::string WarmStartConfigHash(const std::string& config_hash, const WarmStart& w);

// For report.json "warm_start": {path, sha256, run_name, members, test_metrics (the bundle's own
// run)}; the caller adds the scores on this run's test split.
nlohmann::json WarmStartJson(const WarmStart& w);

}  // namespace chorus
