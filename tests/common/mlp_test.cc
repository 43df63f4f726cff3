#include "common/mlp.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <functional>
#include <sstream>
#include <string>
#include <vector>

#include "common/heads.h"
#include "common/rng.h"
#include "common/sgd.h"
#include "tests/testing/gradient_check.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace mlp_test {

using testing::GradientCheckOptions;
using testing::GradientMatchesCentralDifferences;
using testing::LossFunction;
using testing::MakeTempDir;
using testing::ReadMatrixText;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

constexpr uint64_t kSeed = 20240611;  // every random draw below derives from it
constexpr int kRows = 16;             // batch rows
constexpr int kWorkspaceRows = 24;    // more than kRows: passes must use only the top rows

// Central differences in float32 at h = 1e-2. Each loss evaluation carries float32 rounding of
// about 1e-6 (loss terms of order 1 to 10, unit roundoff 6e-8); divided by 2h that is up to ~5e-5
// absolute. Truncation error h^2 / 6 |L'''| reaches ~3e-4 relative (the gaussian head, through
// exp(-s)). Measured worst over the six networks below: 4e-5 absolute on small entries, 3e-4
// relative on large ones. The bound 3e-4 + 0.3% keeps a sevenfold margin above that; a wrong
// derivative is off by about the entry itself.
constexpr GradientCheckOptions kFiniteDifference{1e-2, 3e-4, 3e-3};

enum class Head { kSoftmax, kGaussian };

const char* HeadName(Head h) { return h == Head::kSoftmax ? "softmax" : "gaussian"; }

Matrix RandomNormal(int rows, int cols, double sd, Philox& rng) {
  Matrix m(rows, cols);
  for (int i = 0; i < rows; ++i)
    for (int j = 0; j < cols; ++j) m(i, j) = static_cast<float>(sd * rng.NextNormal());
  return m;
}

// A network 7-12-9-K (K = 4 classes, or 2 for mean and log-variance), its parameters, one batch,
// and the batch's labels (softmax head) or targets (gaussian head).
struct Problem {
  Mlp net;
  Head head;
  std::vector<float> params;
  Matrix x;
  std::vector<int32_t> labels;
  std::vector<float> targets;
};

// Loss of the problem's head on `out`; writes dL/d(out) into grad_out.
double HeadLoss(const Problem& p, const ConstMatrixRef& out, MatrixRef grad_out) {
  return p.head == Head::kSoftmax ? SoftmaxCrossEntropy(out, p.labels.data(), grad_out)
                                  : GaussianNll(out, p.targets.data(), grad_out);
}

// The midpoint of the widest gap between consecutive values of z (at least two values).
float MidpointOfWidestGap(std::vector<float> z) {
  std::sort(z.begin(), z.end());
  size_t widest = 0;
  for (size_t i = 1; i + 1 < z.size(); ++i) {
    if (z[i + 1] - z[i] > z[widest + 1] - z[widest]) widest = i;
  }
  return 0.5f * (z[widest] + z[widest + 1]);
}

// Layer by layer, sets each hidden unit's bias to minus the midpoint of the widest gap between
// its batch's pre-activations. Every hidden unit then sees both signs across the batch, and no
// pre-activation lies within half that gap of zero, where relu has its kink.
void PlaceHiddenBiasesInGaps(Problem& p) {
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  for (int l = 0; l + 1 < p.net.layers(); ++l) {
    float* b = p.params.data() + p.net.BiasOffset(l);
    std::fill(b, b + p.net.widths()[l + 1], 0.0f);
    p.net.Forward(p.params.data(), p.x, ws);
    for (int j = 0; j < p.net.widths()[l + 1]; ++j) {
      const Eigen::VectorXf z = ws.pre[l].col(j).head(kRows);
      b[j] = -MidpointOfWidestGap(std::vector<float>(z.data(), z.data() + kRows));
    }
  }
}

// Shifts the log-variance output's bias so that the batch's mean log-variance s is 0: the
// precisions exp(-s), and with them the loss terms and their float32 rounding, stay of order 1.
void CenterLogVariance(Problem& p) {
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  const float mean = p.net.Forward(p.params.data(), p.x, ws).col(1).mean();
  p.params[p.net.BiasOffset(p.net.layers() - 1) + 1] -= mean;
}

Problem MakeProblem(Activation activation, Head head) {
  const int outputs = head == Head::kSoftmax ? 4 : 2;
  Problem p{Mlp({7, 12, 9, outputs}, activation), head, {}, {}, {}, {}};
  p.params.resize(p.net.ParameterCount());
  p.net.Initialize(Derive(kSeed, "init"), p.params.data());
  Philox rng(Derive(kSeed, "data"));
  p.x = RandomNormal(kRows, 7, 1.0, rng);
  for (int i = 0; i < kRows; ++i) {
    p.labels.push_back(static_cast<int32_t>(rng.NextBelow(outputs)));
    p.targets.push_back(static_cast<float>(rng.NextNormal()));
  }
  float* output_bias = p.params.data() + p.net.BiasOffset(p.net.layers() - 1);
  for (int k = 0; k < outputs; ++k) output_bias[k] = static_cast<float>(0.5 * rng.NextNormal());
  PlaceHiddenBiasesInGaps(p);
  if (head == Head::kGaussian) CenterLogVariance(p);
  return p;
}

// Loss and dL/dparams through Forward, the head and Backward, on a workspace larger than the
// batch. The gradient starts as NaN, so an entry Backward fails to write shows up.
double LossAndGradient(const Problem& p, std::vector<float>* grad) {
  Mlp::Workspace ws = p.net.MakeWorkspace(kWorkspaceRows);
  const MatrixRef out = p.net.Forward(p.params.data(), p.x, ws);
  Matrix grad_out(kRows, out.cols());
  const double loss = HeadLoss(p, out, grad_out);
  grad->assign(p.net.ParameterCount(), NAN);
  p.net.Backward(p.params.data(), p.x, grad_out, ws, grad->data());
  return loss;
}

// Whether each hidden pre-activation in `ws` is positive, after a Forward on kRows rows.
std::vector<bool> ActivePattern(const Mlp& net, const Mlp::Workspace& ws) {
  std::vector<bool> active;
  for (int l = 0; l + 1 < net.layers(); ++l)
    for (int i = 0; i < kRows; ++i)
      for (int j = 0; j < net.widths()[l + 1]; ++j) active.push_back(ws.pre[l](i, j) > 0.0f);
  return active;
}

// Every parameter of every layer, with both heads. The differences must not move any hidden
// pre-activation across zero (for relu that keeps the loss smooth along each difference).
void ExpectGradientMatchesCentralDifferences(Activation activation) {
  for (Head head : {Head::kSoftmax, Head::kGaussian}) {
    SCOPED_TRACE(std::string(HeadName(head)) + " head, seed " + std::to_string(kSeed));
    const Problem p = MakeProblem(activation, head);
    std::vector<float> analytic;
    LossAndGradient(p, &analytic);
    Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
    Matrix grad_out(kRows, p.net.widths().back());
    p.net.Forward(p.params.data(), p.x, ws);
    const std::vector<bool> baseline = ActivePattern(p.net, ws);
    int sign_changes = 0;
    const LossFunction loss = [&](const std::vector<float>& w) {
      const MatrixRef out = p.net.Forward(w.data(), p.x, ws);
      sign_changes += ActivePattern(p.net, ws) != baseline;
      return HeadLoss(p, out, grad_out);
    };
    EXPECT_TRUE(GradientMatchesCentralDifferences(loss, p.params, analytic, kFiniteDifference));
    EXPECT_EQ(sign_changes, 0) << "a difference crossed zero; the check would not be valid";
  }
}

TEST(MlpTest, ParameterLayoutIsWeightsThenBiasPerLayer) {
  const Mlp net({3, 5, 2}, Activation::kRelu);
  EXPECT_EQ(net.ParameterCount(), 3 * 5 + 5 + 5 * 2 + 2);
  EXPECT_EQ(net.WeightOffset(0), 0);
  EXPECT_EQ(net.BiasOffset(0), 15);
  EXPECT_EQ(net.WeightOffset(1), 20);
  EXPECT_EQ(net.BiasOffset(1), 30);
}

TEST(MlpTest, ReluGradientMatchesCentralDifferences) {
  ExpectGradientMatchesCentralDifferences(Activation::kRelu);
}

TEST(MlpTest, TanhGradientMatchesCentralDifferences) {
  ExpectGradientMatchesCentralDifferences(Activation::kTanh);
}

TEST(MlpTest, GeluGradientMatchesCentralDifferences) {
  ExpectGradientMatchesCentralDifferences(Activation::kGelu);
}

// The checker's tolerance is tight enough to see a 2% error in one entry of the gradient.
TEST(MlpTest, GradientCheckRejectsASlightlyWrongGradient) {
  const Problem p = MakeProblem(Activation::kTanh, Head::kSoftmax);
  std::vector<float> analytic;
  LossAndGradient(p, &analytic);
  auto largest = std::max_element(analytic.begin(), analytic.end(),
                                  [](float a, float b) { return std::abs(a) < std::abs(b); });
  *largest *= 1.02f;
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  Matrix grad_out(kRows, p.net.widths().back());
  const LossFunction loss = [&](const std::vector<float>& w) {
    return HeadLoss(p, p.net.Forward(w.data(), p.x, ws), grad_out);
  };
  EXPECT_FALSE(GradientMatchesCentralDifferences(loss, p.params, analytic, kFiniteDifference));
}

// One network pass: the output, the loss, and the gradient per layer (weights inputs x outputs,
// biases 1 x outputs).
struct PassResult {
  MatrixD outputs;
  double loss = 0;
  std::vector<MatrixD> dw, db;
};

MatrixD WeightBlock(const Mlp& net, const float* v, int l) {
  return Eigen::Map<const Matrix>(v + net.WeightOffset(l), net.widths()[l], net.widths()[l + 1])
      .cast<double>();
}

MatrixD BiasBlock(const Mlp& net, const float* v, int l) {
  return Eigen::Map<const Matrix>(v + net.BiasOffset(l), 1, net.widths()[l + 1]).cast<double>();
}

PassResult ChorusPass(const Problem& p) {
  PassResult r;
  std::vector<float> grad;
  r.loss = LossAndGradient(p, &grad);
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  r.outputs = p.net.Forward(p.params.data(), p.x, ws).cast<double>();
  for (int l = 0; l < p.net.layers(); ++l) {
    r.dw.push_back(WeightBlock(p.net, grad.data(), l));
    r.db.push_back(BiasBlock(p.net, grad.data(), l));
  }
  return r;
}

// Writes the problem in the input format of tests/reference/torch_mlp.py.
void WriteProblem(const Problem& p, const std::string& dir) {
  WriteMatrixText(dir + "/x.txt", p.x.cast<double>());
  MatrixD y(kRows, 1);
  for (int i = 0; i < kRows; ++i) y(i, 0) = p.head == Head::kSoftmax ? p.labels[i] : p.targets[i];
  WriteMatrixText(dir + "/y.txt", y);
  for (int l = 0; l < p.net.layers(); ++l) {
    WriteMatrixText(dir + "/w" + std::to_string(l) + ".txt",
                    WeightBlock(p.net, p.params.data(), l));
    WriteMatrixText(dir + "/b" + std::to_string(l) + ".txt", BiasBlock(p.net, p.params.data(), l));
  }
}

PassResult ReadTorchPass(const std::string& dir, const std::string& dtype, int layers) {
  const auto read = [&](const std::string& name) {
    return ReadMatrixText(dir + "/" + dtype + "_" + name + ".txt");
  };
  PassResult r;
  r.outputs = read("outputs");
  const MatrixD loss = read("loss");
  r.loss = loss.size() == 1 ? loss(0, 0) : NAN;
  for (int l = 0; l < layers; ++l) {
    r.dw.push_back(read("dw" + std::to_string(l)));
    r.db.push_back(read("db" + std::to_string(l)));
  }
  return r;
}

// max |a - b| over all entries; infinity when shapes differ or an entry is not finite.
double MaxAbsDiff(const MatrixD& a, const MatrixD& b) {
  if (a.rows() != b.rows() || a.cols() != b.cols() || !(a - b).allFinite()) return HUGE_VAL;
  return a.size() == 0 ? 0.0 : (a - b).cwiseAbs().maxCoeff();
}

// Values computed in float32 through three layers of width <= 12 carry a rounding error of a few
// units of 6e-8 relative to the largest value involved (worst-case bound n u sum|terms| ~ 1e-6
// for n = 12). Measured: <= 3e-7 of the reference's scale, as for PyTorch's own float32 pass
// (<= 4e-7). The bound 1e-5 of the scale leaves a thirtyfold margin; a wrong formula or layout is
// off by about the scale itself.
constexpr double kTorchRelativeBound = 1e-5;

// Passes when max|ours - t64| <= kTorchRelativeBound * max(1, max|t64|); the message gives the
// same distance for PyTorch's float32 pass t32, for scale.
::testing::AssertionResult CloseToTorch(const MatrixD& ours, const MatrixD& t64,
                                        const MatrixD& t32) {
  const double scale = std::max(1.0, t64.size() ? t64.cwiseAbs().maxCoeff() : 0.0);
  const double ours_error = MaxAbsDiff(ours, t64), torch_error = MaxAbsDiff(t32, t64);
  if (ours_error <= kTorchRelativeBound * scale) return ::testing::AssertionSuccess();
  return ::testing::AssertionFailure()
         << "max |chorus - torch float64| = " << ours_error << " (scale " << scale
         << "); torch float32 is off by " << torch_error;
}

MatrixD Scalar(double v) { return MatrixD::Constant(1, 1, v); }

void ExpectCloseToTorch(const PassResult& ours, const PassResult& t64, const PassResult& t32) {
  EXPECT_TRUE(CloseToTorch(ours.outputs, t64.outputs, t32.outputs)) << "outputs";
  EXPECT_TRUE(CloseToTorch(Scalar(ours.loss), Scalar(t64.loss), Scalar(t32.loss))) << "loss";
  for (size_t l = 0; l < ours.dw.size(); ++l) {
    EXPECT_TRUE(CloseToTorch(ours.dw[l], t64.dw[l], t32.dw[l])) << "layer " << l << " weights";
    EXPECT_TRUE(CloseToTorch(ours.db[l], t64.db[l], t32.db[l])) << "layer " << l << " biases";
  }
}

// Reference: PyTorch 1.13 (Debian python3-torch), tests/reference/torch_mlp.py: nn.Linear layers
// with the same weights (transposed to out x in), nn.ReLU / nn.Tanh / nn.GELU, F.cross_entropy or
// F.gaussian_nll_loss(full=True), autograd, in float64 and float32.
void ExpectForwardBackwardMatchTorch(Activation activation) {
  std::vector<Problem> problems;
  std::vector<std::string> dirs, args;
  for (Head head : {Head::kSoftmax, Head::kGaussian}) {
    problems.push_back(MakeProblem(activation, head));
    dirs.push_back(MakeTempDir("chorus-torch-mlp"));
    WriteProblem(problems.back(), dirs.back());
    args.insert(args.end(), {dirs.back(), ActivationName(activation), HeadName(head)});
  }
  RunReferenceScript("torch_mlp.py", args);
  for (size_t k = 0; k < problems.size(); ++k) {
    SCOPED_TRACE(std::string(HeadName(problems[k].head)) + " head, seed " + std::to_string(kSeed));
    const int layers = problems[k].net.layers();
    ExpectCloseToTorch(ChorusPass(problems[k]), ReadTorchPass(dirs[k], "float64", layers),
                       ReadTorchPass(dirs[k], "float32", layers));
    std::filesystem::remove_all(dirs[k]);
  }
}

TEST(MlpTest, ReluForwardBackwardMatchTorch) { ExpectForwardBackwardMatchTorch(Activation::kRelu); }

TEST(MlpTest, TanhForwardBackwardMatchTorch) { ExpectForwardBackwardMatchTorch(Activation::kTanh); }

TEST(MlpTest, GeluForwardBackwardMatchTorch) { ExpectForwardBackwardMatchTorch(Activation::kGelu); }

// dL/d(outputs) of a head against central differences of its loss over the flattened outputs.
void ExpectHeadGradientMatchesCentralDifferences(
    const Matrix& outputs, const std::function<double(const ConstMatrixRef&, MatrixRef)>& head) {
  Matrix grad(outputs.rows(), outputs.cols());
  head(outputs, grad);
  const std::vector<float> analytic(grad.data(), grad.data() + grad.size());
  Matrix scratch(outputs.rows(), outputs.cols());
  const LossFunction loss = [&](const std::vector<float>& z) {
    return head(Eigen::Map<const Matrix>(z.data(), outputs.rows(), outputs.cols()), scratch);
  };
  const std::vector<float> point(outputs.data(), outputs.data() + outputs.size());
  EXPECT_TRUE(GradientMatchesCentralDifferences(loss, point, analytic, kFiniteDifference));
}

TEST(HeadsTest, SoftmaxCrossEntropyGradientMatchesCentralDifferences) {
  Philox rng(Derive(kSeed, "softmax"));
  const Matrix logits = RandomNormal(8, 5, 2.0, rng);
  std::vector<int32_t> labels(8);
  for (auto& y : labels) y = static_cast<int32_t>(rng.NextBelow(5));
  ExpectHeadGradientMatchesCentralDifferences(logits, [&](const ConstMatrixRef& z, MatrixRef g) {
    return SoftmaxCrossEntropy(z, labels.data(), g);
  });
}

TEST(HeadsTest, GaussianNllGradientMatchesCentralDifferences) {
  Philox rng(Derive(kSeed, "gaussian"));
  const Matrix outputs = RandomNormal(8, 2, 1.0, rng);
  std::vector<float> targets(8);
  for (auto& y : targets) y = static_cast<float>(rng.NextNormal());
  ExpectHeadGradientMatchesCentralDifferences(outputs, [&](const ConstMatrixRef& z, MatrixRef g) {
    return GaussianNll(z, targets.data(), g);
  });
}

// beta-NLL (Seitzer et al., ICLR 2022) holds the weight (sigma^2)^beta constant in the gradient,
// so its gradient is w_i times the plain NLL's gradient for row i: checked against central
// differences of the plain NLL, scaled row by row with w_i = exp(beta s_i).
TEST(HeadsTest, BetaNllGradientIsThePlainGradientWeightedByTheVariancePowerBeta) {
  Philox rng(Derive(kSeed, "beta_nll"));
  const Matrix outputs = RandomNormal(8, 2, 1.0, rng);
  std::vector<float> targets(8);
  for (auto& y : targets) y = static_cast<float>(rng.NextNormal());
  const float beta = 0.5f;
  Matrix grad(8, 2);
  GaussianNll(outputs, targets.data(), grad, 0, beta);
  Matrix plain(8, 2);
  GaussianNll(outputs, targets.data(), plain);
  ExpectHeadGradientMatchesCentralDifferences(outputs, [&](const ConstMatrixRef& z, MatrixRef g) {
    return GaussianNll(z, targets.data(), g);
  });
  for (int i = 0; i < 8; ++i) {
    const float w = std::exp(beta * outputs(i, 1));
    EXPECT_NEAR(grad(i, 0), w * plain(i, 0), 1e-6f * (1 + std::abs(grad(i, 0))));
    EXPECT_NEAR(grad(i, 1), w * plain(i, 1), 1e-6f * (1 + std::abs(grad(i, 1))));
  }
}

// Seitzer et al. (2022, section 4): at beta = 1 the mean's gradient is that of the squared error,
// -(y - mu) / B, whatever variance is predicted; at beta = 0 the loss is the plain NLL.
TEST(HeadsTest, BetaNllAtOneGivesTheMeanTheSquaredErrorGradientAndAtZeroIsPlain) {
  Matrix out(2, 2);
  out << 1.0f, 3.0f, -2.0f, -4.0f;  // large and small predicted variances
  const float targets[] = {2.5f, -1.0f};
  Matrix at_one(2, 2), at_zero(2, 2), plain(2, 2);
  GaussianNll(out, targets, at_one, 0, 1.0f);
  EXPECT_NEAR(at_one(0, 0), -(2.5f - 1.0f) / 2, 1e-6f);
  EXPECT_NEAR(at_one(1, 0), -(-1.0f + 2.0f) / 2, 1e-6f);
  EXPECT_EQ(GaussianNll(out, targets, at_zero, 0, 0.0f), GaussianNll(out, targets, plain));
  EXPECT_TRUE(at_zero == plain);
  EXPECT_NEAR(GaussianNllValue(out, targets), GaussianNll(out, targets, plain), 1e-6);
}

// Logits on a grid of quarters stay exact when shifted by 1000, so a max-subtracting softmax
// gives identical results; exp(1000) would overflow without it.
TEST(HeadsTest, SoftmaxCrossEntropyIsShiftInvariantAtHugeLogits) {
  Matrix logits(2, 3);
  logits << 0.25f, -1.5f, 2.0f, 3.0f, 3.0f, -0.75f;
  const int32_t labels[] = {2, 0};
  Matrix grad(2, 3), grad_shifted(2, 3);
  const double loss = SoftmaxCrossEntropy(logits, labels, grad);
  const Matrix shifted = logits.array() + 1000.0f;
  const double loss_shifted = SoftmaxCrossEntropy(shifted, labels, grad_shifted);
  EXPECT_NEAR(loss_shifted, loss, 1e-6);
  EXPECT_TRUE(grad_shifted.allFinite());
  EXPECT_LE((grad_shifted - grad).cwiseAbs().maxCoeff(), 1e-7f);
}

// Hand-computed: mu = 1, s = ln 4, y = 3: loss = 0.5 (ln 4 + 4 / 4 + ln 2 pi),
// dL/dmu = -(3 - 1) / 4 = -0.5, dL/ds = 0.5 (1 - 4 / 4) = 0 (one row, B = 1).
TEST(HeadsTest, GaussianNllMatchesHandComputedValue) {
  Matrix out(1, 2);
  out << 1.0f, static_cast<float>(std::log(4.0));
  const float target = 3.0f;
  Matrix grad(1, 2);
  const double loss = GaussianNll(out, &target, grad);
  EXPECT_NEAR(loss, 0.5 * (std::log(4.0) + 1.0 + std::log(2.0 * M_PI)), 1e-6);
  EXPECT_NEAR(grad(0, 0), -0.5f, 1e-6f);
  EXPECT_NEAR(grad(0, 1), 0.0f, 1e-6f);
}

// Weights after each of grads.rows() SgdStep calls, step t at rate lrs(t, 0); w0 is 1 x n.
MatrixD ChorusSgdTrajectory(const OptimizerConfig& opt, const Matrix& w0, const Matrix& grads,
                            const MatrixD& lrs) {
  std::vector<float> w(w0.data(), w0.data() + w0.size()), velocity(w.size(), 0.0f);
  MatrixD history(grads.rows(), w0.size());
  for (Eigen::Index t = 0; t < grads.rows(); ++t) {
    SgdStep(opt, static_cast<float>(lrs(t, 0)), w0.size(), grads.row(t).data(), w.data(),
            velocity.data());
    history.row(t) = Eigen::Map<const Eigen::RowVectorXf>(w.data(), w.size()).cast<double>();
  }
  return history;
}

// Reference: PyTorch 1.13 (Debian python3-torch) torch.optim.SGD, dampening 0, float32, via
// tests/reference/torch_sgd.py. The rate changes between steps, so the test also pins where the
// rate enters (torch keeps it out of the velocity). Both sides do the same float32 operations;
// after 6 steps on weights of order 1 they agree to a few units of the last place (measured:
// 2.4e-7, one unit at |w| in [2, 4)); a convention difference (dampening, rate inside the
// velocity) moves weights by more than 1e-3.
void ExpectSgdMatchesTorch(bool nesterov) {
  OptimizerConfig opt;
  opt.momentum = 0.9;
  opt.weight_decay = 0.05;
  opt.nesterov = nesterov;
  Philox rng(Derive(kSeed, "sgd"));
  const Matrix w0 = RandomNormal(1, 40, 1.0, rng), grads = RandomNormal(6, 40, 1.0, rng);
  MatrixD lrs(6, 1);
  lrs << 0.1, 0.05, 0.2, 0.1, 0.02, 0.3;
  const std::string dir = MakeTempDir("chorus-torch-sgd");
  WriteMatrixText(dir + "/w0.txt", w0.cast<double>());
  WriteMatrixText(dir + "/grads.txt", grads.cast<double>());
  WriteMatrixText(dir + "/lrs.txt", lrs);
  RunReferenceScript("torch_sgd.py", {"sgd", dir, "0.9", "0.05", nesterov ? "1" : "0"});
  EXPECT_LE(
      MaxAbsDiff(ChorusSgdTrajectory(opt, w0, grads, lrs), ReadMatrixText(dir + "/weights.txt")),
      2e-6);
  std::filesystem::remove_all(dir);
}

TEST(SgdTest, MomentumStepsMatchTorchSgd) { ExpectSgdMatchesTorch(false); }

TEST(SgdTest, NesterovStepsMatchTorchSgd) { ExpectSgdMatchesTorch(true); }

// Reference: PyTorch 1.13 (Debian python3-torch) torch.optim.lr_scheduler.CosineAnnealingLR with
// T_max = total steps and eta_min = 0, at every step 0..T_max. Torch updates the rate
// recursively in double, which drifts from the closed form by rounding only (measured: <= 1.4e-17);
// an off-by-one in the step count would move the rate by ~1e-4.
TEST(SgdTest, CosineScheduleMatchesTorchCosineAnnealingLr) {
  TrainConfig train;
  train.epochs = 3;
  train.optimizer.lr = 0.1;
  train.schedule.kind = ScheduleKind::kCosine;
  const int steps_per_epoch = 7, total = 21;
  std::istringstream torch(RunReferenceScript("torch_sgd.py", {"cosine", "0.1", "21"}));
  for (int step = 0; step <= total; ++step) {
    std::string name;
    double lr = NAN;
    torch >> name >> lr;
    ASSERT_EQ(name, "lr") << "step " << step;
    EXPECT_NEAR(ScheduledLearningRate(train, step, steps_per_epoch), lr, 1e-12) << "step " << step;
  }
}

// Reference: PyTorch 1.13 (Debian python3-torch) torch.nn.utils.clip_grad_norm_ over two
// parameters holding the two halves of the vector (the norm is global). Torch sums in float32 and
// divides by (norm + 1e-6), 2e-7 relative here. Measured: norms differ by 2e-8 relative, clipped
// entries (of order 0.5) by 6e-8; bounds 1e-6 relative and 1e-6 absolute.
TEST(SgdTest, ClipGradientNormMatchesTorchClipGradNorm) {
  Philox rng(Derive(kSeed, "clip"));
  const Matrix g = RandomNormal(1, 40, 1.0, rng);
  const std::string dir = MakeTempDir("chorus-torch-clip");
  WriteMatrixText(dir + "/g.txt", g.cast<double>());
  std::istringstream torch(RunReferenceScript("torch_sgd.py", {"clip", dir, "1.5", "15"}));
  std::string name;
  double torch_norm = NAN;
  torch >> name >> torch_norm;
  Matrix clipped = g;
  const double norm = ClipGradientNorm(clipped.data(), clipped.size(), 1.5);
  EXPECT_NEAR(norm, torch_norm, 1e-6 * torch_norm);
  EXPECT_LE(MaxAbsDiff(clipped.cast<double>(), ReadMatrixText(dir + "/clipped.txt")), 1e-6);
  EXPECT_NEAR(clipped.norm(), 1.5, 1e-5);
  std::filesystem::remove_all(dir);
}

TEST(SgdTest, ClipGradientNormLeavesSmallGradientsAndDisabledClippingAlone) {
  float g[] = {3.0f, 4.0f};
  EXPECT_DOUBLE_EQ(ClipGradientNorm(g, 2, 10.0), 5.0);
  EXPECT_DOUBLE_EQ(ClipGradientNorm(g, 2, 0.0), 5.0);
  EXPECT_EQ(g[0], 3.0f);
  EXPECT_EQ(g[1], 4.0f);
}

}  // namespace mlp_test
}  // namespace chorus
