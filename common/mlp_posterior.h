// The log posterior of an MLP's parameters on a whole data set, with its gradient, as a target for
// full-batch HMC (common/hmc.h); and the posterior predictive of parameter draws.
//   log p(theta | D) = sum_i log p(y_i | x_i, theta) - |theta|^2 / (2 prior_variance) + const
//   classification: log p(y | x) = z_y - logsumexp(z)          (common/heads.h, softmax head)
//   regression:     log p(y | x) = -0.5 [s + (y - mu)^2 e^-s + ln 2pi], outputs (mu, s = log var)
// The dropped constant is the prior's normaliser, -P/2 ln(2 pi prior_variance).
// Precision: theta is rounded to float32 and the network runs in float32 (common/mlp.h), so the
// value carries float rounding (relative ~1e-7 per row) and each chunk's gradient is a float32 sum
// over its rows; chunks, rows' losses and the prior are summed in double.
// Thread safety: an MlpLogPosterior owns forward/backward scratch, so it belongs to one thread
// (copies are independent); the network and data it points to must outlive it unchanged.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

class MlpLogPosterior {
 public:
  // Rows per forward/backward pass; bounds the scratch memory.
  static constexpr int64_t kDefaultChunkRows = 256;

  // Checks that `data` fits `net` and `task` (x has the network's inputs and at least one row;
  // classification: one label per row in [0, outputs), outputs >= 2; regression: one target per
  // row, outputs == 2), that prior_variance > 0 and chunk_rows >= 1; kInvalidInput otherwise.
  static StatusOr<MlpLogPosterior> Create(const Mlp& net, Task task, const Split& data,
                                          double prior_variance,
                                          int64_t chunk_rows = kDefaultChunkRows);

  // log p(theta | D) up to the constant above; writes its gradient into grad (resized). theta has
  // ParameterCount() entries in the Mlp layout. A network output that overflows gives a
  // non-finite value, which HMC treats as outside the support.
  double operator()(const std::vector<double>& theta, std::vector<double>& grad);

  int64_t ParameterCount() const { return net_->ParameterCount(); }

 private:
  MlpLogPosterior(const Mlp& net, Task task, const Split& data, double prior_variance,
                  int64_t chunk_rows);

  // sum over rows [first, first + rows) of log p(y | x); adds the gradient into grad.
  double AddChunk(int64_t first, int64_t rows, std::vector<double>& grad);

  const Mlp* net_;
  Task task_;
  const Split* data_;
  double prior_variance_;
  Mlp::Workspace workspace_;
  Matrix output_grad_;             // chunk_rows x outputs
  std::vector<float> params_, param_grad_;
};

// The posterior predictive on x (rows x inputs) from parameter draws: draws[c] is one chain's
// draws, a parameter vector a row (as HmcChain::draws), at least one draw in all.
//   classification: rows x K, the mean over draws of softmax(z) (double);
//   regression: rows x 2, column 0 the mixture mean m = mean_s mu_s, column 1 the mixture
//   variance mean_s e^{s_s} + mean_s (mu_s - m)^2 (law of total variance).
// Runs x through the network in chunks of chunk_rows rows on the calling thread; reentrant.
MatrixD PosteriorPredictive(const Mlp& net, Task task, const std::vector<MatrixD>& draws,
                            const ConstMatrixRef& x,
                            int64_t chunk_rows = MlpLogPosterior::kDefaultChunkRows);

}  // namespace chorus
