// Linear baselines for the report: the simplest honest models a statistician would fit to the same
// preprocessed features the networks see, each with the predictive uncertainty its posterior gives.
//   Regression: Bayesian linear regression whose prior and noise precisions maximise the evidence
//     (Bishop, Pattern Recognition and Machine Learning, 2006, section 3.5; MacKay 1992).
//   Classification: L2 logistic / softmax regression with a Laplace posterior and a probit
//     predictive, its prior precision chosen by the Laplace evidence (Bishop sections 4.3-4.5).
// Inputs are float row-major (rows = inputs, columns = features); all arithmetic is in double.
// Thread safety: free functions, reentrant.
#pragma once

#include <Eigen/Core>
#include <cstdint>

#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

// The posterior of y = b + w^T (x - feature_mean) + e, e ~ N(0, 1/beta), w ~ N(0, I/alpha), with a
// flat prior on the intercept b (so b's posterior mean is target_mean, its variance 1/(beta N)).
// Names follow Bishop; scikit-learn's BayesianRidge calls alpha lambda_ and beta alpha_.
struct BayesianLinearRegression {
  Eigen::VectorXd feature_mean;     // centring of x (train means), features
  double target_mean = 0;           // centring of y (train mean)
  Eigen::VectorXd weights;          // posterior mean m_N on centred features, features
  Eigen::MatrixXd covariance;       // posterior covariance S_N of the weights, features x features
  double alpha = 0;                 // prior precision of the weights, in 1 / units(w)^2
  double beta = 0;                  // noise precision, in 1 / units(y)^2
  double effective_parameters = 0;  // gamma, Bishop eq. 3.91, in [0, features]
  double log_evidence = 0;          // ln p(t | alpha, beta), Bishop eq. 3.86, on the centred data
  int iterations = 0;               // re-estimation rounds run
  bool converged = false;           // alpha and beta settled (relative change < 1e-10)
  int64_t rows = 0;                 // training rows N
};

// Fits x (rows x features, any scale; constant features and features > rows are fine) to the
// targets y[0 .. rows): centres both with their train means, then iterates Bishop's re-estimation
// of alpha and beta (eqs. 3.91, 3.92, 3.95) until both change by less than 1e-10 relatively, or
// for 1000 rounds. Like BayesianRidge's defaults it maximises ln p(t | alpha, beta)
// + 1e-6 (ln alpha - alpha) + 1e-6 (ln beta - beta) (Gamma hyperpriors), not the bare evidence:
// this adds 2e-6 to each side of eqs. 3.92 and 3.95, in the data's units, which matters only when
// m_N^T m_N or the residual sum of squares is that small, as when the features fit the centred
// targets exactly (features >= rows - 1); there it is what keeps beta finite (about 1 / 2e-6).
// Fails with InvalidInput if rows < 2, features < 1 or any input is not finite.
StatusOr<BayesianLinearRegression> FitBayesianLinearRegression(const ConstMatrixRef& x,
                                                               const float* y);

// Predictive distribution of each row of x (rows x features, the fit's features), Bishop eqs.
// 3.58-3.59 plus the intercept's posterior variance:
//   mean_i = target_mean + m_N^T phi_i,  stddev_i^2 = 1/beta + phi_i^T S_N phi_i + 1/(beta N),
// phi_i = x_i - feature_mean. Resizes *mean and *stddev to rows.
void PredictBayesianLinearRegression(const BayesianLinearRegression& m, const ConstMatrixRef& x,
                                     Eigen::VectorXd* mean, Eigen::VectorXd* stddev);

// The exact Hessian holds parameters^2 doubles; beyond this many parameters it would not fit.
constexpr int64_t kMaxLaplaceParameters = 4096;

// A Laplace posterior N(weights, covariance) over logistic (two classes) or softmax weights on the
// standardised features s(x) = (x - feature_mean) / feature_scale:
//   two classes: the logit of class 1, a = w^T s(x) + b;  more: logits a_k = w_k^T s(x) + b_k.
// Prior: w ~ N(0, I/alpha) on the feature weights, N(0, 1/bias_precision) on each bias.
struct LaplaceLogisticRegression {
  int classes = 0;
  Eigen::VectorXd feature_mean;   // train means, features
  Eigen::VectorXd feature_scale;  // train standard deviations (1/N), 1 where a feature is constant
  Eigen::MatrixXd weights;        // (features + 1) x outputs, the MAP, the last row the biases;
                                  // outputs = 1 for two classes, = classes otherwise
  Eigen::MatrixXd covariance;     // inverse Hessian of the objective at the MAP over vec(weights):
                                  // parameter k (features + 1) + j is weights(j, k)
  double alpha = 0;               // prior precision of the feature weights
  double bias_precision = 0;      // prior precision of the biases
  double log_evidence = 0;        // Laplace ln p(labels | alpha), Bishop eq. 4.137
  int newton_iterations = 0;      // Newton steps, summed over every alpha tried
};

// What FitLaplaceLogisticRegression may be told instead of choosing.
struct LaplaceLogisticOptions {
  // > 0: use this prior precision. 0: choose it by maximising the Laplace evidence over ln alpha:
  // first on the grid alpha = 10^6, 10^5, ..., 10^-6 (stopped two points past the best), then by
  // golden section, to 0.1 in ln alpha, between the best grid point's neighbours.
  double alpha = 0;
  // Precision of the biases' weak Gaussian prior, > 0. It keeps the evidence proper and, for
  // softmax, pins the biases' common shift (which the likelihood cannot see) to sum_k b_k = 0.
  double bias_precision = 1e-4;
};

// Fits the MAP of sum_i -ln p(labels[i] | x_i) + alpha/2 ||w||^2 + bias_precision/2 ||b||^2 by
// Newton's method with the exact Hessian (Bishop 4.3.3, IRLS; Cholesky; the step halved while the
// objective would rise), warm-started from the previous alpha, and its Laplace posterior (Bishop
// 4.4). Standardising the features first makes one alpha mean the same for every feature.
// Separable data and rare or absent classes are fine: the prior keeps the MAP finite. But on
// (nearly) separable data the evidence favours a weak prior, the likelihood is far from Gaussian
// and the Laplace posterior is too broad, so its predictive is underconfident (wine, 133 training
// rows: alpha 3.7e-4, held-out accuracy 1 but NLL 0.76; the MAP plug-in's NLL is 1e-4).
// labels[0 .. rows) must lie in [0, classes). Fails with InvalidInput if rows < 1, features < 1,
// classes < 2, a label is out of range, an input is not finite, options are out of range or
// (features + 1) * outputs > kMaxLaplaceParameters; with Diverged if Newton's method fails (100
// steps at one alpha without converging) or the evidence is not finite.
StatusOr<LaplaceLogisticRegression> FitLaplaceLogisticRegression(
    const ConstMatrixRef& x, const int32_t* labels, int classes,
    const LaplaceLogisticOptions& options = {});

// Predictive class probabilities, rows x classes, for x (rows x features, the fit's features).
// Two classes: Bishop eq. 4.155, p(class 1) = sigma(kappa(s^2) mu) with the logit's posterior mean
// mu and variance s^2 and kappa(s^2) = (1 + pi s^2 / 8)^(-1/2) (eq. 4.154).
// More classes: the generalised probit approximation (Lu et al. 2020; Daxberger et al. 2021,
// "Laplace Redux"), p_k = softmax_k(kappa(s_k^2) mu_k), applied to the logits centred across
// classes, a_k - mean_j a_j: softmax cannot see a common shift of the logits, and the centred
// logits' variances s_k^2 leave out that shift's variance, which only the prior determines.
MatrixD PredictLaplaceLogisticRegression(const LaplaceLogisticRegression& m,
                                         const ConstMatrixRef& x);

}  // namespace chorus
