// Networks with a convolutional front (common/conv_front.h inside common/mlp.h): forward and
// backward against PyTorch 1.13 and against central differences, the fused SGD step, and the
// stage checks.
#include "common/conv_front.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "common/heads.h"
#include "common/mlp.h"
#include "common/rng.h"
#include "common/sgd.h"
#include "tests/testing/gradient_check.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace conv_front_test {

using testing::GradientCheckOptions;
using testing::GradientMatchesCentralDifferences;
using testing::LossFunction;
using testing::MakeTempDir;
using testing::ReadMatrixText;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

constexpr uint64_t kSeed = 20261203;  // every random draw below derives from it
// Rows per batch; workspaces from SmallChunks below cut them into chunks of 3 samples at the
// first stage (the last chunk short).
constexpr int kRows = 20;

struct Problem {
  std::string name;
  ImageShape image;
  std::vector<ConvStage> stages;
  std::vector<int> hidden;
  Activation activation;
  bool softmax;  // else the gaussian head (mean, log-variance)
  Mlp net;
  std::vector<float> params;
  Matrix x;
  std::vector<int32_t> labels;
  std::vector<float> targets;
};

Problem MakeProblem(std::string name, ImageShape image, std::vector<ConvStage> stages,
                    std::vector<int> hidden, Activation activation, bool softmax) {
  ConvFront front(image, stages, activation);
  std::vector<int> widths = {static_cast<int>(front.Outputs())};
  widths.insert(widths.end(), hidden.begin(), hidden.end());
  widths.push_back(softmax ? 3 : 2);
  Problem p{name, image, stages, hidden, activation, softmax, Mlp(widths, activation, front), {}, {}, {}, {}};
  p.params.resize(p.net.ParameterCount());
  p.net.Initialize(Derive(kSeed, name), p.params.data());
  Philox rng(Derive(Derive(kSeed, name), "data"));
  // Nonzero biases everywhere, so a bias that is dropped or misplaced changes the outputs.
  for (int s = 0; s < static_cast<int>(stages.size()); ++s) {
    float* b = p.params.data() + front.BiasOffset(s);
    for (int c = 0; c < stages[s].channels; ++c) b[c] = static_cast<float>(0.1 * rng.NextNormal());
  }
  for (int l = 0; l < p.net.layers(); ++l) {
    float* b = p.params.data() + p.net.BiasOffset(l);
    for (int j = 0; j < p.net.widths()[l + 1]; ++j) b[j] = static_cast<float>(0.1 * rng.NextNormal());
  }
  p.x.resize(kRows, image.size());
  for (int64_t i = 0; i < p.x.size(); ++i) p.x.data()[i] = static_cast<float>(rng.NextNormal());
  for (int i = 0; i < kRows; ++i) {
    p.labels.push_back(static_cast<int32_t>(rng.NextBelow(3)));
    p.targets.push_back(static_cast<float>(rng.NextNormal()));
  }
  return p;
}

// relu with max then average pooling, two chunks of samples, a hidden layer, softmax head.
Problem ReluTwoPools() {
  return MakeProblem("relu-two-pools", {2, 7, 6}, {{3, 3, Pooling::kMax}, {4, 3, Pooling::kAverage}},
                     {5}, Activation::kRelu, true);
}
// gelu, a 5 x 5 kernel as large as the image, no pooling, no hidden layer, gaussian head.
Problem GeluNoPool() {
  return MakeProblem("gelu-no-pool", {1, 5, 5}, {{4, 5, Pooling::kNone}}, {}, Activation::kGelu, false);
}
// tanh, three input channels, a 1 x 1 kernel with max pooling, then an unpooled 3 x 3 stage.
Problem TanhMixed() {
  return MakeProblem("tanh-mixed", {3, 4, 4}, {{2, 1, Pooling::kMax}, {3, 3, Pooling::kNone}}, {4},
                     Activation::kTanh, true);
}
// The same with average pooling: smooth everywhere, for central differences.
Problem TanhAverage() {
  return MakeProblem("tanh-average", {3, 4, 4}, {{2, 1, Pooling::kAverage}, {3, 3, Pooling::kNone}},
                     {4}, Activation::kTanh, true);
}

// tanh and max pooling over windows with tied values: inputs in {-1, 0, 1} and a kernel that
// reads only its centre tap, so equal inputs give equal pre-activations, while the winner's
// neighbours (which the other taps' gradients read) differ. PyTorch's max pooling passes the
// gradient to the first of equal values in window order; so must ours.
Problem TanhTiedWindows() {
  Problem p = MakeProblem("tanh-tied-windows", {1, 6, 6}, {{2, 3, Pooling::kMax}}, {}, Activation::kTanh, true);
  for (int64_t i = 0; i < p.x.size(); ++i) {
    p.x.data()[i] = std::round(std::clamp(p.x.data()[i], -1.0f, 1.0f)) + 0.0f;  // + 0: no -0
  }
  const ConvFront front(p.image, p.stages, p.activation);
  const ConvFront::Stage& g = front.stages()[0];
  const int64_t centre = int64_t{g.pad} * g.kernel + g.pad;  // row (dy k + dx) C_in + c, dy = dx = pad, c = 0
  for (int64_t row = 0; row < g.KernelRows(); ++row) {
    if (row == centre) continue;
    for (int o = 0; o < g.out_channels; ++o) p.params[front.WeightOffset(0) + row * g.out_channels + o] = 0.0f;
  }
  return p;
}

double HeadLoss(const Problem& p, const ConstMatrixRef& out, MatrixRef grad_out) {
  return p.softmax ? SoftmaxCrossEntropy(out, p.labels.data(), grad_out)
                   : GaussianNll(out, p.targets.data(), grad_out);
}

struct Pass {
  MatrixD outputs;
  double loss = 0;
  MatrixD grad;  // 1 x P
};

// A workspace whose chunks hold 3 samples at the first stage (the small test images would
// otherwise fit one chunk), so that the checks below cover the sums across chunks.
Mlp::Workspace SmallChunks(const Mlp& net, int64_t max_rows) {
  Mlp::Workspace ws = net.MakeWorkspace(max_rows);
  const ConvFront::Stage& g = net.front().stages()[0];
  ws.front = net.front().MakeWorkspace(max_rows, 3 * g.Pixels() * (g.KernelRows() + g.out_channels) * 4);
  return ws;
}

Pass ChorusPass(const Problem& p) {
  Mlp::Workspace ws = SmallChunks(p.net, kRows + 5);  // larger than the batch on purpose
  const MatrixRef out = p.net.Forward(p.params.data(), p.x, ws);
  Matrix grad_out(kRows, out.cols());
  Pass r;
  r.outputs = out.cast<double>();
  r.loss = HeadLoss(p, out, grad_out);
  std::vector<float> grad(p.net.ParameterCount(), NAN);  // an entry never written stays NaN
  p.net.Backward(p.params.data(), p.x, grad_out, ws, grad.data());
  r.grad = Eigen::Map<const Matrix>(grad.data(), 1, grad.size()).cast<double>();
  return r;
}

void WriteProblem(const Problem& p, const std::string& dir) {
  std::ofstream spec(dir + "/spec.txt");
  spec << p.image.channels << " " << p.image.height << " " << p.image.width << " "
       << ActivationName(p.activation) << " " << (p.softmax ? "softmax" : "gaussian") << "\n";
  for (const ConvStage& s : p.stages) spec << s.channels << " " << s.kernel << " " << PoolingName(s.pool) << "\n";
  spec << "dense";
  for (int w : p.net.widths()) spec << " " << w;
  spec << "\n";
  WriteMatrixText(dir + "/params.txt", Eigen::Map<const Matrix>(p.params.data(), 1, p.params.size()).cast<double>());
  WriteMatrixText(dir + "/x.txt", p.x.cast<double>());
  MatrixD y(kRows, 1);
  for (int i = 0; i < kRows; ++i) y(i, 0) = p.softmax ? p.labels[i] : p.targets[i];
  WriteMatrixText(dir + "/y.txt", y);
}

Pass ReadTorchPass(const std::string& dir, const std::string& dtype) {
  const auto read = [&](const std::string& what) { return ReadMatrixText(dir + "/" + dtype + "_" + what + ".txt"); };
  Pass r;
  r.outputs = read("outputs");
  const MatrixD loss = read("loss");
  r.loss = loss.size() == 1 ? loss(0, 0) : NAN;
  r.grad = read("grad");
  return r;
}

double MaxAbsDiff(const MatrixD& a, const MatrixD& b) {
  if (a.rows() != b.rows() || a.cols() != b.cols() || !(a - b).allFinite()) return HUGE_VAL;
  return a.size() == 0 ? 0.0 : (a - b).cwiseAbs().maxCoeff();
}

// float32 sums here run over up to k k C = 27 products per output and, for the kernel gradient,
// over rows x pixels = 840 terms; the worst-case bound n u sum|terms| is about 5e-5 of the scale,
// the typical error (random signs) about sqrt(n) u ~ 2e-6. Measured: chorus within 4.1e-7 of the
// scale, PyTorch's own float32 pass within 2.5e-7 (except its gaussian-head gradient, which is
// far off in float32; the bound is against float64). The bound 1e-5 keeps a twentyfold margin; a
// wrong layout, padding or pooling is off by about the scale itself.
constexpr double kTorchRelativeBound = 1e-5;

::testing::AssertionResult CloseToTorch(const MatrixD& ours, const MatrixD& t64, const MatrixD& t32) {
  const double scale = std::max(1.0, t64.size() ? t64.cwiseAbs().maxCoeff() : 0.0);
  const double ours_error = MaxAbsDiff(ours, t64), torch_error = MaxAbsDiff(t32, t64);
  if (ours_error <= kTorchRelativeBound * scale) return ::testing::AssertionSuccess();
  return ::testing::AssertionFailure() << "max |chorus - torch float64| = " << ours_error << " (scale "
                                       << scale << "); torch float32 is off by " << torch_error;
}

// Reference: PyTorch 1.13 (Debian python3-torch), tests/reference/torch_conv.py: F.conv2d with
// k / 2 padding, F.max_pool2d / F.avg_pool2d, F.linear, the activations and heads, autograd, in
// float64 and float32, from the same flat parameters.
TEST(ConvFrontTest, ForwardAndGradientsMatchTorch) {
  std::vector<Problem> problems = {ReluTwoPools(), GeluNoPool(), TanhMixed(), TanhTiedWindows()};
  std::vector<std::string> dirs;
  for (const Problem& p : problems) {
    dirs.push_back(MakeTempDir("chorus-torch-conv"));
    WriteProblem(p, dirs.back());
  }
  RunReferenceScript("torch_conv.py", dirs);
  for (size_t k = 0; k < problems.size(); ++k) {
    SCOPED_TRACE(problems[k].name);
    const Pass ours = ChorusPass(problems[k]);
    const Pass t64 = ReadTorchPass(dirs[k], "float64"), t32 = ReadTorchPass(dirs[k], "float32");
    EXPECT_TRUE(CloseToTorch(ours.outputs, t64.outputs, t32.outputs)) << "outputs";
    EXPECT_TRUE(CloseToTorch(MatrixD::Constant(1, 1, ours.loss), MatrixD::Constant(1, 1, t64.loss),
                             MatrixD::Constant(1, 1, t32.loss)))
        << "loss";
    EXPECT_TRUE(CloseToTorch(ours.grad, t64.grad, t32.grad)) << "gradient";
    std::filesystem::remove_all(dirs[k]);
  }
}

// Central differences in float32 at h = 1e-2, as in mlp_test.cc (the same error analysis: float32
// loss rounding ~5e-5 absolute after dividing by 2h, truncation up to ~3e-4 relative).
// Smooth networks only: relu's kink and max pooling's winner switches make a difference of step
// h cross a corner (measured: a 1 x 1 kernel's step changed ten max-pooling winners), so those are
// checked against PyTorch above.
TEST(ConvFrontTest, GradientMatchesCentralDifferences) {
  for (const Problem& p : {GeluNoPool(), TanhAverage()}) {
    SCOPED_TRACE(p.name);
    const Pass ours = ChorusPass(p);
    const std::vector<float> analytic(ours.grad.data(), ours.grad.data() + ours.grad.size());
    Mlp::Workspace ws = SmallChunks(p.net, kRows);
    Matrix grad_out(kRows, p.net.widths().back());
    const LossFunction loss = [&](const std::vector<float>& w) {
      return HeadLoss(p, p.net.Forward(w.data(), p.x, ws), grad_out);
    };
    EXPECT_TRUE(GradientMatchesCentralDifferences(loss, p.params, analytic, GradientCheckOptions{1e-2, 3e-4, 3e-3}));
  }
}

// The fused update (BackwardWithSgd) gives the bits of Backward followed by SgdStep.
TEST(ConvFrontTest, FusedSgdGivesTheBitsOfBackwardThenStep) {
  const Problem p = ReluTwoPools();
  OptimizerConfig opt;
  opt.momentum = 0.9;
  opt.weight_decay = 5e-4;
  const float lr = 0.05f;
  std::vector<float> velocity(p.params.size(), 0.0f);
  for (size_t i = 0; i < velocity.size(); ++i) velocity[i] = 0.01f * static_cast<float>(i % 7);
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  Matrix grad_out(kRows, p.net.widths().back());
  HeadLoss(p, p.net.Forward(p.params.data(), p.x, ws), grad_out);

  std::vector<float> grad(p.params.size()), separate = p.params, separate_v = velocity;
  p.net.Backward(separate.data(), p.x, grad_out, ws, grad.data());
  SgdStep(opt, lr, static_cast<int64_t>(grad.size()), grad.data(), separate.data(), separate_v.data());

  std::vector<float> fused = p.params, fused_v = velocity;
  p.net.Forward(p.params.data(), p.x, ws);
  p.net.BackwardWithSgd(fused.data(), p.x, grad_out, ws, grad.data(), opt, lr, fused_v.data());
  EXPECT_EQ(fused, separate);
  EXPECT_EQ(fused_v, separate_v);
  EXPECT_NE(fused, p.params);
}

// Rows are independent: the outputs of a batch are those of its rows one at a time.
TEST(ConvFrontTest, EachRowsOutputIsThatOfTheRowAlone) {
  const Problem p = ReluTwoPools();
  Mlp::Workspace ws = p.net.MakeWorkspace(kRows);
  const Matrix batch = p.net.Forward(p.params.data(), p.x, ws);
  for (int i = 0; i < kRows; ++i) {
    const Matrix row = p.net.Forward(p.params.data(), p.x.middleRows(i, 1), ws);
    EXPECT_EQ(MaxAbsDiff(row.cast<double>(), batch.row(i).cast<double>()), 0.0) << "row " << i;
  }
}

// Chunks of 3 samples and one chunk of the whole batch give the same outputs, bit for bit, and
// kernel gradients equal up to the order of the chunks' float32 sums.
TEST(ConvFrontTest, ChunkSizeChangesOnlyTheGradientsRounding) {
  const Problem p = ReluTwoPools();
  const ConvFront& front = p.net.front();
  Matrix grad_out(kRows, front.Outputs());
  Philox rng(kSeed);
  for (int64_t i = 0; i < grad_out.size(); ++i) grad_out.data()[i] = static_cast<float>(rng.NextNormal());
  std::vector<Matrix> outputs;
  std::vector<std::vector<float>> grads;
  for (const bool small : {false, true}) {
    ConvFront::Workspace ws = small ? SmallChunks(p.net, kRows).front : front.MakeWorkspace(kRows);
    EXPECT_EQ(ws.chunk_samples[0], small ? 3 : kRows);
    outputs.push_back(front.Forward(p.params.data(), p.x, ws));
    front.OutputGradient(ws, kRows) = grad_out;
    grads.emplace_back(front.ParameterCount(), NAN);
    std::vector<float> params = p.params;
    front.Backward(params.data(), p.x, ws, grads.back().data(), nullptr, 0.0f, nullptr);
  }
  EXPECT_EQ(MaxAbsDiff(outputs[0].cast<double>(), outputs[1].cast<double>()), 0.0);
  const auto as_matrix = [](const std::vector<float>& v) {
    return Eigen::Map<const Matrix>(v.data(), 1, static_cast<Eigen::Index>(v.size())).cast<double>();
  };
  // Sums of up to 840 float32 terms of order 1 in two orders: within 1e-4 (bound n u ~ 5e-5 of
  // the largest partial sum, with a factor 2 for terms up to about 2).
  const MatrixD a = as_matrix(grads[0]), b = as_matrix(grads[1]);
  EXPECT_LE(MaxAbsDiff(a, b), 1e-4 * std::max(1.0, a.cwiseAbs().maxCoeff()));
  EXPECT_GT(MaxAbsDiff(a, b), 0.0);  // the chunks really did sum in another order
}

// The element-wise passes are compiled twice, for baseline x86-64 and for AVX-512, and picked
// at run time; both forms give the same bits (outputs and parameter gradients) on every problem.
TEST(ConvFrontTest, BaselineAndAvx512PassesGiveTheSameBits) {
  if (!__builtin_cpu_supports("avx512f")) GTEST_SKIP() << "this CPU runs the baseline passes only";
  for (const Problem& p : {ReluTwoPools(), GeluNoPool(), TanhMixed(), TanhAverage(), TanhTiedWindows()}) {
    SCOPED_TRACE(p.name);
    std::vector<Pass> passes;
    for (const bool baseline : {false, true}) {
      ForceBaselineConvPasses(baseline);
      passes.push_back(ChorusPass(p));
    }
    ForceBaselineConvPasses(false);
    EXPECT_EQ(MaxAbsDiff(passes[0].outputs, passes[1].outputs), 0.0);
    EXPECT_EQ(MaxAbsDiff(passes[0].grad, passes[1].grad), 0.0);
  }
}

// The run's memory estimate (common/memory_estimate.h) counts a front's workspace with
// WorkspaceFloats, without allocating it; the count is what MakeWorkspace allocates, for small
// images in one chunk or several and for the Fashion-MNIST member's shape at batch 128.
TEST(ConvFrontTest, WorkspaceFloatsCountsWhatMakeWorkspaceHolds) {
  std::vector<ConvFront> fronts;
  for (const Problem& p : {ReluTwoPools(), GeluNoPool(), TanhMixed(), TanhAverage()}) fronts.push_back(p.net.front());
  fronts.emplace_back(ImageShape{1, 28, 28}, std::vector<ConvStage>{{16, 3, Pooling::kMax}, {32, 3, Pooling::kMax}},
                      Activation::kRelu);
  for (const ConvFront& front : fronts) {
    for (const int64_t rows : {int64_t{1}, int64_t{7}, int64_t{128}}) {
      for (const int64_t chunk_bytes : {ConvFront::kChunkBytes, int64_t{4096}}) {
        SCOPED_TRACE(::testing::Message() << front.stages().size() << " stages, rows " << rows << ", chunk bytes "
                                        << chunk_bytes);
        const ConvFront::Workspace ws = front.MakeWorkspace(rows, chunk_bytes);
        int64_t floats = ws.columns.size() + ws.chunk_grad.size();
        for (size_t s = 0; s < front.stages().size(); ++s) {
          const int64_t argmax_floats = (static_cast<int64_t>(ws.argmax[s].size()) + 3) / 4;
          floats += ws.pre[s].size() + ws.post[s].size() + ws.pooled[s].size() + ws.grad[s].size() +
                    ws.grad_pooled[s].size() + ws.argmax_z[s].size() + argmax_floats;
        }
        EXPECT_EQ(front.WorkspaceFloats(rows, chunk_bytes), floats);
      }
    }
  }
}

// He et al. 2015: kernels drawn with variance 2 / (k k C_in) for relu, 1 / (k k C_in) for tanh.
TEST(ConvFrontTest, KernelsAreDrawnWithTheirFanInVariance) {
  for (Activation a : {Activation::kRelu, Activation::kTanh}) {
    const ConvFront front({4, 8, 8}, {{64, 5, Pooling::kNone}}, a);
    std::vector<float> params(front.ParameterCount());
    Philox rng(kSeed);
    front.Initialize(rng, params.data());
    const int64_t n = front.stages()[0].KernelRows() * 64;  // 6400 draws
    double sum2 = 0;
    for (int64_t i = 0; i < n; ++i) sum2 += double{params[i]} * params[i];
    const double expected = (a == Activation::kRelu ? 2.0 : 1.0) / 100.0;
    // The sample variance of n normals has relative standard error sqrt(2 / n) = 1.8%; 4 of those.
    EXPECT_NEAR(sum2 / static_cast<double>(n) / expected, 1.0, 4 * std::sqrt(2.0 / static_cast<double>(n)));
    for (int64_t i = n; i < front.ParameterCount(); ++i) EXPECT_EQ(params[i], 0.0f);
  }
}

TEST(ConvFrontTest, StageChecksNameWhatIsWrong) {
  EXPECT_EQ(CheckConvStages({1, 28, 28}, {{16, 3, Pooling::kMax}, {32, 3, Pooling::kMax}}), "");
  EXPECT_EQ(ConvParameterCount({1, 28, 28}, {{16, 3, Pooling::kMax}}), 9 * 16 + 16);
  EXPECT_EQ(CheckConvStages({1, 28, 28}, {{16, 4, Pooling::kMax}}), "stage 1: expected an odd kernel in [1, 15]");
  EXPECT_EQ(CheckConvStages({1, 28, 28}, {{0, 3, Pooling::kMax}}), "stage 1: expected channels in [1, 4096]");
  EXPECT_EQ(CheckConvStages({1, 3, 3}, {{2, 3, Pooling::kMax}, {2, 3, Pooling::kAverage}}),
            "stage 2: its input is 1 x 1, too small to pool 2 x 2");
  EXPECT_EQ(CheckConvStages({0, 28, 28}, {{2, 3, Pooling::kMax}}),
            "image: expected channels, height and width each in [1, 65536]");
  EXPECT_EQ(CheckConvStages({1, 28, 28}, {}), "expected 1 to 8 stages");
  EXPECT_EQ(ConvParameterCount({1, 28, 28}, {}), -1);
}

}  // namespace conv_front_test
}  // namespace chorus
