// Last-layer Laplace approximation: a Gaussian posterior over the last layer's weights of a trained
// Mlp, the layers below held at their trained values (MacKay 1992, "A practical Bayesian framework
// for backpropagation networks"; Kristiadi et al., ICML 2020, "Being Bayesian, even just a bit,
// fixes overconfidence in ReLU networks"; Daxberger et al., NeurIPS 2021, "Laplace Redux").
// Notation (H, K, phi, Theta, theta, P, Lambda_n) as in common/last_layer_curvature.h. Posterior
// N(theta_map, Sigma), Sigma = (Hdata + prior I)^{-1}: Hdata the generalised Gauss-Newton matrix of
// the training loss summed over rows (LastLayerHessian), prior the precision of the N(0, I / prior)
// prior on theta. Regression outputs are in standardised target units.
// Memory and time: kFull holds P^2 doubles of eigenvectors (8 P^2 bytes, 210 MB at P = 5130),
// fitting peaks near twice that, and its O(P^3) eigendecomposition took 3 s at P = 1290 on
// one core (so minutes at P = 5130); kKronecker holds (H+1)^2 + K^2 doubles and costs O((H+1)^3).
// Prefer kKronecker when P is in the thousands.
// Thread safety: free functions, reentrant, owning no threads; a LastLayerLaplace is immutable
// once fitted and may be shared read-only.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/last_layer_curvature.h"
#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

// How Hdata is held.
//   kFull:      the exact P x P matrix (LastLayerHessian).
//   kKronecker: the K-FAC factors G kron A (LastLayerKroneckerFactors).
enum class LaplaceForm { kFull, kKronecker };

// A fitted last-layer Laplace approximation: the eigendecomposition of Hdata, so that Sigma for
// any prior precision comes without refitting. Eigenvalues below zero (rounding) are stored as 0.
struct LastLayerLaplace {
  Task task = Task::kClassification;
  LaplaceForm form = LaplaceForm::kFull;
  MatrixD theta_map;             // (H+1) x K, the trained last layer
  double prior_precision = 1.0;  // > 0; set it (e.g. from TunePriorPrecision) at any time
  // kFull: Hdata = V diag(lambda) V^T, V = eigenvectors (P x P, column m the m-th eigenvector).
  MatrixD eigenvectors;
  Eigen::VectorXd eigenvalues;
  // kKronecker: G = U_G diag(g) U_G^T and A = U_A diag(a) U_A^T; Hdata's eigenvectors are the
  // columns of U_G kron U_A, column i K + m with eigenvalue g_i a_m.
  MatrixD feature_eigenvectors;  // U_G, (H+1) x (H+1)
  Eigen::VectorXd feature_eigenvalues;
  MatrixD output_eigenvectors;   // U_A, K x K
  Eigen::VectorXd output_eigenvalues;

  int64_t parameters() const { return theta_map.size(); }
};

// Fits the approximation at theta_map (LastLayerWeights) from the training rows' features
// (LastHiddenFeatures). Errors (kInvalidInput, message naming the argument): no rows, features
// and theta_map of mismatched widths, fewer than 2 outputs (regression: not exactly 2), a
// non-finite feature or weight, prior_precision not a finite number > 0.
StatusOr<LastLayerLaplace> FitLastLayerLaplace(Task task, LaplaceForm form,
                                               const ConstMatrixRef& features,
                                               const MatrixD& theta_map, double prior_precision);

// Sigma = (Hdata + prior I)^{-1} as a P x P matrix, formed through the eigenbasis: O(P^3) time
// and P^2 memory in both forms, for inspection and small layers.
MatrixD PosteriorCovariance(const LastLayerLaplace& laplace);

// Writes a weight sample into out (param_count floats), a pure function of its inputs: the first
// param_count - P floats are copied from map_params bit for bit, and the last P (the last layer)
// are theta_map + sqrt(scale) L z, L = V diag((lambda + prior)^{-1/2}) (L L^T = Sigma; kKronecker:
// V = U_G kron U_A, applied as U_G Z U_A^T), z ~ N(0, I_P) drawn in index order from
// Philox(seed). Requires param_count >= P, scale > 0 (debug-asserted). out may not alias map_params.
void DrawLastLayerSample(const LastLayerLaplace& laplace, const float* map_params,
                         int64_t param_count, uint64_t seed, double scale, float* out);

// The linearised predictive of each row's outputs: mean f = Theta_map^T phi (N x K) and variance
// v_k = phi^T Sigma_kk phi (N x K), Sigma_kk the block of Sigma between output k's entries. Only
// the variances are formed, not the K x K covariance.
struct LinearizedOutputs {
  MatrixD mean;
  MatrixD variance;
};
// Errors (kInvalidInput): features of the wrong width, or non-finite.
StatusOr<LinearizedOutputs> PredictLinearized(const LastLayerLaplace& laplace,
                                              const ConstMatrixRef& features);

// Classification, without sampling: p_k proportional to exp(mean_k / sqrt(1 + pi/8 variance_k)),
// rows summing to 1. For two classes with one logit held fixed this is MacKay's probit
// approximation of E[sigmoid(f)], f ~ N(mu, v) (MacKay 1992, "The evidence framework applied to
// classification networks", Neural Computation 4(5)), from sigmoid(a) ~ Phi(sqrt(pi/8) a). The
// multiclass form, which approximates E[softmax(f)] ignoring the logits' covariances, is the one
// Daxberger et al. (2021) use (its attribution to Lu et al. 2020 is from memory). mean, variance:
// N x K, variance >= 0.
MatrixD ProbitProbabilities(const MatrixD& mean, const MatrixD& variance);

// Regression, N x 2: column 0 the predictive mean mu, column 1 the variance e^{s} + v_mu, in
// standardised target units. The uncertainty of the log-variance weights is ignored (s is taken
// at theta_map).
MatrixD GaussianPredictive(const LinearizedOutputs& outputs);

// The prior precisions TunePriorPrecision tries: 10^{-4 + i/4}, i = 0..32 (1e-4 .. 1e4, four per
// decade), ascending.
std::vector<double> PriorPrecisionGrid();

// The grid value minimising the mean validation NLL of the probit predictive (classification,
// labels in [0, K)) or of the Gaussian predictive (regression, standardised targets); ties go to
// the larger precision. laplace.prior_precision is ignored. Holds 33 N K doubles of variances.
// Errors (kInvalidInput): the overload does not match laplace.task, no rows, labels or targets
// not one per row, a label out of range, a non-finite feature or target, features of the wrong
// width.
StatusOr<double> TunePriorPrecision(const LastLayerLaplace& laplace, const ConstMatrixRef& features,
                                    const std::vector<int32_t>& labels);
StatusOr<double> TunePriorPrecision(const LastLayerLaplace& laplace, const ConstMatrixRef& features,
                                    const std::vector<float>& targets);

// The Laplace approximation of the log marginal likelihood at laplace.prior_precision (MacKay
// 1992; Daxberger et al. 2021):
//   log Z ~ -train_nll_sum - (prior/2) |theta_map|^2 + (P/2) log prior - (1/2) sum_m log(lambda_m + prior)
// where train_nll_sum = -log p(D | theta_map), the loss summed over the training rows the
// approximation was fitted on. O(P) given the eigenvalues.
double LaplaceLogEvidence(const LastLayerLaplace& laplace, double train_nll_sum);

// The PriorPrecisionGrid value maximising LaplaceLogEvidence (MacKay 1992's evidence
// framework; Daxberger et al. 2021's choice when no validation data is held out); ties go to the
// larger precision. laplace.prior_precision is ignored.
double PriorPrecisionByEvidence(const LastLayerLaplace& laplace, double train_nll_sum);

}  // namespace chorus
