#include "common/linear_baseline.h"

#include <Eigen/Cholesky>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

namespace chorus {
namespace {


Status CheckFinite(const ConstMatrixRef& x) {
  if (!x.allFinite()) return Status::InvalidInput("linear baseline: input is not finite");
  return Status::Ok();
}

// ---- Bayesian linear regression ----------------------------------------------------------------

// scikit-learn BayesianRidge's Gamma hyperprior terms (alpha_1 = alpha_2 = lambda_1 = lambda_2 =
// 1e-6); stopping rule on the relative change of alpha and beta.
constexpr double kHyperprior = 1e-6;
constexpr double kRelativeTolerance = 1e-10;
constexpr int kMaxRounds = 1000;

// The centred training data, Phi = x - mean(x), t = y - mean(y), and the eigen-decomposition
// Phi^T Phi = V diag(s) V^T, done once: the eigenvalues of beta Phi^T Phi are beta s_i.
struct RegressionData {
  Eigen::MatrixXd phi;
  Eigen::VectorXd t;
  Eigen::MatrixXd v;
  Eigen::VectorXd s;
  Eigen::VectorXd v_phi_t;  // V^T Phi^T t
};

// Posterior mean and effective parameter count at (alpha, beta), in the eigenbasis:
//   m_N = beta S_N Phi^T t = V diag(beta / (alpha + beta s_i)) V^T Phi^T t   (eqs. 3.53-3.54)
//   gamma = sum_i beta s_i / (alpha + beta s_i)                               (eq. 3.91)
void PosteriorMean(const RegressionData& d, double alpha, double beta, Eigen::VectorXd* m,
                   double* gamma) {
  const Eigen::ArrayXd denom = alpha + beta * d.s.array();
  *m = d.v * (beta * d.v_phi_t.array() / denom).matrix();
  *gamma = (beta * d.s.array() / denom).sum();
}

// Bishop eq. 3.86 at the posterior mean m:
//   ln p(t | alpha, beta) = M/2 ln alpha + N/2 ln beta - E(m_N) - 1/2 ln|A| - N/2 ln 2 pi,
//   E(m) = beta/2 ||t - Phi m||^2 + alpha/2 m^T m,  ln|A| = sum_i ln(alpha + beta s_i).
double LogEvidence(const RegressionData& d, double alpha, double beta, const Eigen::VectorXd& m) {
  const double n = static_cast<double>(d.t.size()), features = static_cast<double>(m.size());
  const double energy =
      0.5 * beta * (d.t - d.phi * m).squaredNorm() + 0.5 * alpha * m.squaredNorm();
  const double log_det = (alpha + beta * d.s.array()).log().sum();
  return 0.5 * features * std::log(alpha) + 0.5 * n * std::log(beta) - energy - 0.5 * log_det -
         0.5 * n * std::log(2 * M_PI);
}

// Centres x and y with their means (recorded in *out) and decomposes Phi^T Phi.
RegressionData CentreRegression(const ConstMatrixRef& x, const float* y,
                                BayesianLinearRegression* out) {
  RegressionData d;
  const Eigen::Index n = x.rows();
  const Eigen::MatrixXd xd = x.cast<double>();
  out->feature_mean = xd.colwise().mean().transpose();
  d.phi = xd.rowwise() - out->feature_mean.transpose();
  d.t = Eigen::Map<const Eigen::VectorXf>(y, n).cast<double>();
  out->target_mean = d.t.mean();
  d.t.array() -= out->target_mean;
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eig(d.phi.transpose() * d.phi);
  d.v = eig.eigenvectors();
  d.s = eig.eigenvalues();
  d.v_phi_t = d.v.transpose() * (d.phi.transpose() * d.t);
  // Directions with s_i at the rounding level (constant features, features > rows) carry no data.
  const double floor = std::numeric_limits<double>::epsilon() * static_cast<double>(d.s.size()) *
                       d.s.cwiseAbs().maxCoeff();
  for (Eigen::Index i = 0; i < d.s.size(); ++i) {
    if (d.s(i) <= floor) d.s(i) = 0, d.v_phi_t(i) = 0;
  }
  return d;
}

}  // namespace

StatusOr<BayesianLinearRegression> FitBayesianLinearRegression(const ConstMatrixRef& x,
                                                               const float* y) {
  if (x.rows() < 2 || x.cols() < 1) {
    return Status::InvalidInput("linear regression needs at least 2 rows and 1 feature");
  }
  CHORUS_RETURN_IF_ERROR(CheckFinite(x));
  if (!Eigen::Map<const Eigen::VectorXf>(y, x.rows()).allFinite()) {
    return Status::InvalidInput("linear regression: a target is not finite");
  }
  BayesianLinearRegression out;
  out.rows = x.rows();
  const RegressionData d = CentreRegression(x, y, &out);
  const double n = static_cast<double>(out.rows);
  // BayesianRidge's start: alpha (weights) 1, beta 1 / var(t).
  double alpha = 1.0;
  double beta = 1.0 / (d.t.squaredNorm() / n + std::numeric_limits<double>::epsilon());
  Eigen::VectorXd m;
  double gamma = 0;
  while (out.iterations < kMaxRounds && !out.converged) {
    PosteriorMean(d, alpha, beta, &m, &gamma);
    // alpha = gamma / m^T m (eq. 3.92), 1/beta = ||t - Phi m||^2 / (N - gamma) (eq. 3.95), each
    // with the hyperprior's 2e-6 added to numerator and denominator.
    const double next_alpha = (gamma + 2 * kHyperprior) / (m.squaredNorm() + 2 * kHyperprior);
    const double next_beta =
        (n - gamma + 2 * kHyperprior) / ((d.t - d.phi * m).squaredNorm() + 2 * kHyperprior);
    out.converged = std::abs(next_alpha - alpha) < kRelativeTolerance * alpha &&
                    std::abs(next_beta - beta) < kRelativeTolerance * beta;
    alpha = next_alpha, beta = next_beta;
    ++out.iterations;
  }
  PosteriorMean(d, alpha, beta, &out.weights, &out.effective_parameters);
  // S_N = (alpha I + beta Phi^T Phi)^-1 = V diag(1 / (alpha + beta s_i)) V^T (eq. 3.54).
  out.covariance = d.v * (alpha + beta * d.s.array()).inverse().matrix().asDiagonal() *
                   d.v.transpose();
  out.alpha = alpha, out.beta = beta;
  out.log_evidence = LogEvidence(d, alpha, beta, out.weights);
  return out;
}

void PredictBayesianLinearRegression(const BayesianLinearRegression& m, const ConstMatrixRef& x,
                                     Eigen::VectorXd* mean, Eigen::VectorXd* stddev) {
  const Eigen::MatrixXd phi = x.cast<double>().rowwise() - m.feature_mean.transpose();
  // mean = target_mean + m_N^T phi (eq. 3.58);
  // var = 1/beta + phi^T S_N phi (eq. 3.59) + 1/(beta N) (the intercept's posterior variance).
  *mean = (phi * m.weights).array() + m.target_mean;
  const Eigen::ArrayXd quad = ((phi * m.covariance).array() * phi.array()).rowwise().sum();
  *stddev = (quad + 1.0 / m.beta + 1.0 / (m.beta * static_cast<double>(m.rows))).sqrt().matrix();
}

namespace {

// ---- Laplace logistic regression ---------------------------------------------------------------

// Newton's near-MAP and stopping thresholds on the decrement g^T H^-1 g, relative to 1 + |f|.
constexpr double kNearMap = 1e-8;
constexpr double kConverged = 1e-20;
constexpr int kMaxNewtonSteps = 100;
constexpr int kMaxHalvings = 40;
// Evidence search: grid ln alpha = i ln 10 for i = kGridHi down to kGridLo, then golden section.
constexpr int kGridHi = 6, kGridLo = -6;
constexpr double kLogAlphaTolerance = 0.1;

// The training problem: design = [s(x), 1] (rows x (features + 1)), targets = indicator of class 1
// (two classes) or one-hot labels (rows x outputs), per-parameter prior precision over vec(W).
struct LogisticProblem {
  Eigen::MatrixXd design;
  Eigen::MatrixXd targets;
  Eigen::VectorXd precision;
};

// [s(x), 1]: the standardised features and a column of ones for the bias.
Eigen::MatrixXd Design(const LaplaceLogisticRegression& m, const ConstMatrixRef& x) {
  Eigen::MatrixXd design(x.rows(), x.cols() + 1);
  design.leftCols(x.cols()) = ((x.cast<double>().rowwise() - m.feature_mean.transpose()).array()
                                   .rowwise() / m.feature_scale.transpose().array()).matrix();
  design.col(x.cols()).setOnes();
  return design;
}

// ln(1 + e^a), without overflow.
double Softplus(double a) { return std::max(a, 0.0) + std::log1p(std::exp(-std::abs(a))); }

// Objective and class probabilities at logits A = design W:
//   two classes: f = sum_i softplus(a_i) - y_i a_i,  p_i = sigma(a_i)            (eq. 4.90)
//   softmax:     f = sum_i logsumexp_k(a_ik) - a_i,y_i,  p_ik = softmax_k(a_i)   (eq. 4.108)
// plus the prior 1/2 sum_j precision_j theta_j^2.
double Objective(const LogisticProblem& p, const Eigen::VectorXd& theta, Eigen::MatrixXd* probs) {
  const Eigen::Index outputs = p.targets.cols();
  const Eigen::MatrixXd a =
      p.design * Eigen::Map<const Eigen::MatrixXd>(theta.data(), p.design.cols(), outputs);
  double f = 0.5 * (p.precision.array() * theta.array().square()).sum();
  probs->resize(a.rows(), outputs);
  for (Eigen::Index i = 0; i < a.rows(); ++i) {
    if (outputs == 1) {
      f += Softplus(a(i, 0)) - p.targets(i, 0) * a(i, 0);
      (*probs)(i, 0) = 1.0 / (1.0 + std::exp(-a(i, 0)));
      continue;
    }
    const double max = a.row(i).maxCoeff();
    const Eigen::RowVectorXd e = (a.row(i).array() - max).exp().matrix();
    f += max + std::log(e.sum()) - a.row(i).dot(p.targets.row(i));
    probs->row(i) = e / e.sum();
  }
  return f;
}

// Gradient of the objective (eqs. 4.96, 4.109), per output block k:
//   g_k = design^T (p_k - y_k) + precision_k theta_k.
void Gradient(const LogisticProblem& p, const Eigen::VectorXd& theta, const Eigen::MatrixXd& probs,
              Eigen::VectorXd* g) {
  const Eigen::Index width = p.design.cols();
  g->resize(theta.size());
  for (Eigen::Index k = 0; k < probs.cols(); ++k) {
    g->segment(k * width, width) = p.design.transpose() * (probs.col(k) - p.targets.col(k));
  }
  *g += p.precision.cwiseProduct(theta);
}

// Hessian of the negative log likelihood (eqs. 4.97, 4.110), per output block k, l:
//   H_kl = design^T diag(p_k [k = l] - p_k p_l) design
// (two classes: the k = l = 1 case, p (1 - p)). Each H_kl is symmetric, so only its lower triangle
// is computed, as a rank update with rows scaled by sqrt(p_k (1 - p_k)) or, with sign -1,
// sqrt(p_k p_l).
void LikelihoodHessian(const LogisticProblem& p, const Eigen::MatrixXd& probs, Eigen::MatrixXd* h) {
  const Eigen::Index outputs = probs.cols(), width = p.design.cols();
  h->resize(width * outputs, width * outputs);
  Eigen::MatrixXd block(width, width), scaled(p.design.rows(), width);
  for (Eigen::Index k = 0; k < outputs; ++k) {
    for (Eigen::Index l = k; l < outputs; ++l) {
      const Eigen::ArrayXd other =
          k == l ? Eigen::ArrayXd(1 - probs.col(k).array()) : Eigen::ArrayXd(probs.col(l));
      scaled = (probs.col(k).array() * other).sqrt().matrix().asDiagonal() * p.design;
      block.setZero();
      block.selfadjointView<Eigen::Lower>().rankUpdate(scaled.transpose(), k == l ? 1.0 : -1.0);
      h->block(l * width, k * width, width, width) = block.selfadjointView<Eigen::Lower>();
    }
  }
  *h = h->selfadjointView<Eigen::Lower>();
}

// A MAP fit in progress: theta, the objective there, the likelihood's Hessian at theta (valid when
// `current`; it does not depend on alpha) and the Cholesky factor of the objective's Hessian.
struct MapFit {
  Eigen::VectorXd theta;
  double objective = 0;
  Eigen::MatrixXd likelihood_hessian;
  bool current = false;
  Eigen::LLT<Eigen::MatrixXd> hessian;
  int steps = 0;
};

// Moves fit->theta to fit->theta + t delta: t = 1 when `whole`, else the first of 1, 1/2, 1/4, ...
// at which the objective does not increase. Fails if 40 halvings do not find one.
Status TakeStep(const LogisticProblem& p, const Eigen::VectorXd& delta, bool whole, MapFit* fit,
                Eigen::MatrixXd* probs) {
  Eigen::MatrixXd trial_probs;
  double t = 1;
  for (int halving = 0; halving <= kMaxHalvings; ++halving, t *= 0.5) {
    Eigen::VectorXd next = fit->theta + t * delta;
    const double f = Objective(p, next, &trial_probs);
    if (whole || f <= fit->objective) {
      fit->theta.swap(next), fit->objective = f, probs->swap(trial_probs);
      fit->current = false;
      ++fit->steps;
      return Status::Ok();
    }
  }
  return Status::Diverged("logistic regression: the objective rises along Newton's direction");
}

// Newton's method from fit->theta, step delta = -H^-1 g with decrement g^T H^-1 g. Far from the MAP
// the step is halved until the objective does not increase; near it (decrement <= 1e-8 (1 + |f|))
// the step is whole, since f cannot resolve it, and the iteration stops at the first near step
// whose decrement is below 1e-20 (1 + |f|) or has not fallen 4-fold since the previous near step
// (Newton's quadratic convergence has reached rounding). fit->hessian is then the factor of the
// objective's Hessian at fit->theta.
Status Newton(const LogisticProblem& p, MapFit* fit) {
  Eigen::MatrixXd probs, h;
  Eigen::VectorXd g;
  fit->objective = Objective(p, fit->theta, &probs);
  double last_near = std::numeric_limits<double>::infinity();
  for (int step = 0; step <= kMaxNewtonSteps; ++step) {
    if (!fit->current) LikelihoodHessian(p, probs, &fit->likelihood_hessian);
    fit->current = true;
    h = fit->likelihood_hessian;
    h.diagonal() += p.precision;
    fit->hessian.compute(h);
    if (fit->hessian.info() != Eigen::Success) {
      return Status::Diverged("logistic regression: Hessian not positive definite");
    }
    Gradient(p, fit->theta, probs, &g);
    const Eigen::VectorXd delta = -fit->hessian.solve(g);
    const double decrement = -g.dot(delta), scale = 1 + std::abs(fit->objective);
    const bool near = decrement <= kNearMap * scale;
    if (near && (decrement <= kConverged * scale || decrement > last_near / 4)) return Status::Ok();
    CHORUS_RETURN_IF_ERROR(TakeStep(p, delta, near, fit, &probs));
    last_near = near ? decrement : std::numeric_limits<double>::infinity();
  }
  return Status::Diverged("logistic regression: Newton's method did not converge in 100 steps");
}

// The best prior the search has probed: ln alpha, its evidence, MAP and Hessian factor.
struct AlphaSearch {
  double log_alpha = 0;
  double evidence = -std::numeric_limits<double>::infinity();
  Eigen::VectorXd theta;
  Eigen::LLT<Eigen::MatrixXd> hessian;
};

// Sets the weights' prior precision to exp(log_alpha), refits from fit->theta, records the fit in
// *best if its evidence is higher and returns the Laplace evidence (eq. 4.137)
//   ln p(D) ~ ln p(D | theta*) + ln p(theta*) + P/2 ln 2 pi - 1/2 ln|H|,
// which for the Gaussian prior is -f(theta*) + 1/2 sum_j ln precision_j - 1/2 ln|H|.
StatusOr<double> Probe(LogisticProblem* p, double log_alpha, MapFit* fit, AlphaSearch* best) {
  const Eigen::Index width = p->design.cols();
  for (Eigen::Index j = 0; j < p->precision.size(); ++j) {
    if (j % width != width - 1) p->precision(j) = std::exp(log_alpha);
  }
  CHORUS_RETURN_IF_ERROR(Newton(*p, fit));
  const double log_det = 2 * fit->hessian.matrixLLT().diagonal().array().log().sum();
  const double evidence = -fit->objective + 0.5 * p->precision.array().log().sum() - 0.5 * log_det;
  if (!std::isfinite(evidence)) return Status::Diverged("logistic regression: evidence not finite");
  if (evidence > best->evidence) {
    best->log_alpha = log_alpha, best->evidence = evidence;
    best->theta = fit->theta, best->hessian = fit->hessian;
  }
  return evidence;
}

// Grid ln alpha = i ln 10, i = 6, 5, ..., -6, stopped two points past the best, then golden
// section (probes c = b - r (b - a), d = a + r (b - a), r = (sqrt 5 - 1) / 2) between the best
// point's neighbours, to kLogAlphaTolerance.
Status SearchAlpha(LogisticProblem* p, MapFit* fit, AlphaSearch* best) {
  const double decade = std::log(10.0);
  int best_i = kGridHi;
  for (int i = kGridHi; i >= kGridLo && i >= best_i - 2; --i) {
    CHORUS_RETURN_IF_ERROR(Probe(p, i * decade, fit, best).status());
    if (best->log_alpha == i * decade) best_i = i;
  }
  const double r = 0.5 * (std::sqrt(5.0) - 1.0);
  double a = std::max(best_i - 1, kGridLo) * decade, b = std::min(best_i + 1, kGridHi) * decade;
  double c = b - r * (b - a), d = a + r * (b - a);
  CHORUS_ASSIGN_OR_RETURN(double fc, Probe(p, c, fit, best));
  CHORUS_ASSIGN_OR_RETURN(double fd, Probe(p, d, fit, best));
  while (b - a > kLogAlphaTolerance) {
    if (fc >= fd) {
      b = d, d = c, fd = fc, c = b - r * (b - a);
      CHORUS_ASSIGN_OR_RETURN(fc, Probe(p, c, fit, best));
    } else {
      a = c, c = d, fc = fd, d = a + r * (b - a);
      CHORUS_ASSIGN_OR_RETURN(fd, Probe(p, d, fit, best));
    }
  }
  return Status::Ok();
}

// The input checks FitLaplaceLogisticRegression's contract lists.
Status CheckLogistic(const ConstMatrixRef& x, const int32_t* labels, int classes,
                     const LaplaceLogisticOptions& options) {
  if (x.rows() < 1 || x.cols() < 1 || classes < 2) {
    return Status::InvalidInput("logistic regression needs rows, features >= 1, classes >= 2");
  }
  const int64_t outputs = classes == 2 ? 1 : classes;
  if ((x.cols() + 1) * outputs > kMaxLaplaceParameters) {
    return Status::InvalidInput("logistic regression: " + std::to_string((x.cols() + 1) * outputs) +
                                " parameters, more than the exact Hessian allows (" +
                                std::to_string(kMaxLaplaceParameters) + ")");
  }
  if (!(options.alpha >= 0) || !(options.bias_precision > 0) || !std::isfinite(options.alpha)) {
    return Status::InvalidInput("logistic regression: alpha must be >= 0, bias_precision > 0");
  }
  for (Eigen::Index i = 0; i < x.rows(); ++i) {
    if (labels[i] < 0 || labels[i] >= classes) {
      return Status::InvalidInput("logistic regression: label " + std::to_string(labels[i]) +
                                  " at row " + std::to_string(i) + " not in [0, classes)");
    }
  }
  return CheckFinite(x);
}

// Standardises x (recording mean and scale in *m), builds targets and sets every prior precision
// to bias_precision (Probe sets the feature weights' to alpha).
LogisticProblem MakeProblem(const ConstMatrixRef& x, const int32_t* labels,
                            const LaplaceLogisticOptions& options, LaplaceLogisticRegression* m) {
  const Eigen::MatrixXd xd = x.cast<double>();
  m->feature_mean = xd.colwise().mean().transpose();
  m->feature_scale =
      ((xd.rowwise() - m->feature_mean.transpose()).colwise().squaredNorm() / xd.rows())
          .cwiseSqrt().transpose();
  for (Eigen::Index j = 0; j < x.cols(); ++j) {
    if (!(m->feature_scale(j) > 0)) m->feature_scale(j) = 1;
  }
  LogisticProblem p;
  p.design = Design(*m, x);
  const int outputs = m->classes == 2 ? 1 : m->classes;
  p.targets = Eigen::MatrixXd::Zero(x.rows(), outputs);
  for (Eigen::Index i = 0; i < x.rows(); ++i) {
    if (outputs == 1) p.targets(i, 0) = labels[i];
    else p.targets(i, labels[i]) = 1;
  }
  p.precision = Eigen::VectorXd::Constant(p.design.cols() * outputs, options.bias_precision);
  return p;
}

// Per row i, the posterior variance of each logit, C_kk, or with K > 1 outputs that of each logit
// centred across classes, a_k - mean_j a_j:
//   s_k^2 = C_kk - 2/K sum_l C_kl + 1/K^2 sum_l,m C_lm,  C_kl = design_i^T Sigma_kl design_i.
Eigen::MatrixXd LogitVariance(const Eigen::MatrixXd& design, const Eigen::MatrixXd& covariance,
                              Eigen::Index outputs) {
  const Eigen::Index width = design.cols();
  Eigen::MatrixXd diagonal(design.rows(), outputs);
  Eigen::MatrixXd sums = Eigen::MatrixXd::Zero(design.rows(), outputs);
  for (Eigen::Index k = 0; k < outputs; ++k) {
    for (Eigen::Index l = k; l < outputs; ++l) {
      const Eigen::VectorXd c =
          ((design * covariance.block(k * width, l * width, width, width)).array() *
           design.array()).rowwise().sum().matrix();
      sums.col(k) += c;
      if (k == l) diagonal.col(k) = c;
      else sums.col(l) += c;
    }
  }
  if (outputs == 1) return diagonal;
  const double inv_k = 1.0 / static_cast<double>(outputs);
  const Eigen::VectorXd total = sums.rowwise().sum() * inv_k * inv_k;
  return (diagonal - 2 * inv_k * sums).colwise() + total;
}

}  // namespace

StatusOr<LaplaceLogisticRegression> FitLaplaceLogisticRegression(
    const ConstMatrixRef& x, const int32_t* labels, int classes,
    const LaplaceLogisticOptions& options) {
  CHORUS_RETURN_IF_ERROR(CheckLogistic(x, labels, classes, options));
  LaplaceLogisticRegression m;
  m.classes = classes;
  m.bias_precision = options.bias_precision;
  LogisticProblem p = MakeProblem(x, labels, options, &m);
  MapFit fit;
  fit.theta = Eigen::VectorXd::Zero(p.precision.size());
  AlphaSearch best;
  if (options.alpha > 0) {
    CHORUS_RETURN_IF_ERROR(Probe(&p, std::log(options.alpha), &fit, &best).status());
  } else {
    CHORUS_RETURN_IF_ERROR(SearchAlpha(&p, &fit, &best));
  }
  m.alpha = std::exp(best.log_alpha);
  m.log_evidence = best.evidence;
  m.weights = Eigen::Map<const Eigen::MatrixXd>(best.theta.data(), p.design.cols(),
                                                p.targets.cols());
  const Eigen::Index params = best.theta.size();
  m.covariance = best.hessian.solve(Eigen::MatrixXd::Identity(params, params));
  m.newton_iterations = fit.steps;
  return m;
}

MatrixD PredictLaplaceLogisticRegression(const LaplaceLogisticRegression& m,
                                         const ConstMatrixRef& x) {
  const Eigen::MatrixXd design = Design(m, x);
  const Eigen::MatrixXd mu = design * m.weights;
  // kappa(s^2) = (1 + pi s^2 / 8)^(-1/2) (eq. 4.154).
  const Eigen::ArrayXXd variance = LogitVariance(design, m.covariance, m.weights.cols());
  const Eigen::ArrayXXd kappa = (1 + M_PI / 8 * variance).sqrt().inverse();
  MatrixD probs(x.rows(), m.classes);
  if (m.weights.cols() == 1) {
    // p(class 1) = sigma(kappa(s^2) mu) (eq. 4.155), p(class 0) = sigma(-kappa(s^2) mu).
    probs.col(1) = (1 + (-kappa * mu.array()).exp()).inverse().matrix();
    probs.col(0) = (1 + (kappa * mu.array()).exp()).inverse().matrix();
    return probs;
  }
  // p_k = softmax_k(kappa(s_k^2) (mu_k - mean_j mu_j)).
  const Eigen::ArrayXXd z = kappa * (mu.colwise() - mu.rowwise().mean()).array();
  probs = (z.colwise() - z.rowwise().maxCoeff()).exp().matrix();
  probs.array().colwise() /= probs.array().rowwise().sum();
  return probs;
}

}  // namespace chorus
