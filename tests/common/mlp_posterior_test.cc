#include "common/mlp_posterior.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/gradient_check.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace mlp_posterior_test {

using testing::GradientCheckOptions;
using testing::GradientMatchesCentralDifferences;
using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::ReadMatrixText;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

constexpr uint64_t kSeed = 20250303;  // every random draw below derives from it
constexpr int kRows = 20;
constexpr double kPriorVariance = 0.5;

// A 3-6-K tanh network (K = 3 classes, or 2 for mean and log-variance) and 20 rows of data.
struct Problem {
  Task task;
  Mlp net;
  Split data;
};

Problem MakeProblem(Task task) {
  Problem p{task, Mlp({3, 6, task == Task::kClassification ? 3 : 2}, Activation::kTanh), Split{}};
  Philox rng(Derive(kSeed, task == Task::kClassification ? "classification" : "regression"));
  p.data.x.resize(kRows, 3);
  for (int i = 0; i < kRows; ++i) {
    for (int j = 0; j < 3; ++j) p.data.x(i, j) = static_cast<float>(rng.NextNormal());
    if (task == Task::kClassification) p.data.labels.push_back(static_cast<int32_t>(rng.NextBelow(3)));
    else p.data.targets.push_back(static_cast<float>(rng.NextNormal()));
  }
  return p;
}

// Parameters near the network's initialisation, in double (each exactly a float32), so that the
// float network sees them unrounded.
std::vector<double> Draw(const Mlp& net, uint64_t seed) {
  std::vector<float> init(net.ParameterCount());
  net.Initialize(seed, init.data());
  Philox rng(Derive(seed, "jitter"));
  std::vector<double> theta(init.size());
  for (size_t i = 0; i < init.size(); ++i)
    theta[i] = static_cast<float>(init[i] + 0.3 * rng.NextNormal());
  return theta;
}

TEST(MlpPosteriorTest, GradientMatchesCentralDifferences) {
  // Reference: central finite differences of the log posterior (tests/testing/gradient_check.h).
  // Chunks of 7 rows (3 chunks for 20 rows) exercise the accumulation across chunks.
  // Tolerance: the value is a float32 network summed over 20 rows, ~1e-7 absolute rounding per
  // evaluation; divided by 2h = 0.02 that is ~1e-5. Truncation h^2/6 |f'''| adds ~1e-4 relative
  // (the gaussian head, through e^-s). Measured worst: 4e-5 absolute (softmax head, entries ~1)
  // and 1.4e-4 relative (gaussian head, entries up to ~120). The bound 2e-4 + 0.1% keeps a
  // margin of about five; a wrong derivative is off by about the entry itself.
  const GradientCheckOptions options{1e-2, 2e-4, 1e-3};
  for (Task task : {Task::kClassification, Task::kRegression}) {
    Problem p = MakeProblem(task);
    auto posterior = MlpLogPosterior::Create(p.net, task, p.data, kPriorVariance, 7);
    ASSERT_TRUE(posterior.ok()) << posterior.status().ToString();
    const std::vector<double> theta = Draw(p.net, Derive(kSeed, "theta"));
    std::vector<double> grad;
    posterior.value()(theta, grad);
    // The checker minimises a loss: -log posterior, with gradient -grad.
    std::vector<float> params(theta.begin(), theta.end()), analytic(grad.size());
    for (size_t i = 0; i < grad.size(); ++i) analytic[i] = static_cast<float>(-grad[i]);
    const testing::LossFunction loss = [&](const std::vector<float>& w) {
      std::vector<double> g;
      return -posterior.value()(std::vector<double>(w.begin(), w.end()), g);
    };
    EXPECT_TRUE(GradientMatchesCentralDifferences(loss, params, analytic, options))
        << TaskName(task);
  }
}

// Three draws near the initialisation, as two chains of 2 and 1 rows.
std::vector<MatrixD> ThreeDraws(const Mlp& net) {
  std::vector<MatrixD> draws = {MatrixD(2, net.ParameterCount()), MatrixD(1, net.ParameterCount())};
  for (int s = 0; s < 3; ++s) {
    const std::vector<double> theta = Draw(net, Derive(kSeed, s));
    (s < 2 ? draws[0].row(s) : draws[1].row(0)) =
        Eigen::Map<const Eigen::RowVectorXd>(theta.data(), theta.size());
  }
  return draws;
}

// Writes x.txt, y.txt and draws.txt in the input format of numpy_mlp_posterior.py.
void WriteProblem(const std::string& dir, const Problem& p, const std::vector<MatrixD>& draws) {
  std::filesystem::create_directories(dir);
  MatrixD all(3, p.net.ParameterCount());
  all << draws[0], draws[1];
  WriteMatrixText(dir + "/draws.txt", all);
  WriteMatrixText(dir + "/x.txt", p.data.x.cast<double>());
  MatrixD y(kRows, 1);
  for (int i = 0; i < kRows; ++i)
    y(i, 0) = p.task == Task::kClassification ? p.data.labels[i] : p.data.targets[i];
  WriteMatrixText(dir + "/y.txt", y);
}

TEST(MlpPosteriorTest, ValueAndPredictiveMatchNumpy) {
  // Reference: tests/reference/numpy_mlp_posterior.py, the same network, likelihood and prior in
  // float64 NumPy/SciPy (scipy.special.log_softmax, the Gaussian log density), and the
  // predictive as the mean of softmax probabilities / the mixture's first two moments.
  // Tolerances: chorus runs the network in float32, so outputs differ by a few float ulps (~1e-7
  // relative); summed over 20 rows the log posterior (magnitude ~40) may differ by ~1e-6
  // (measured 5e-7): 1e-5 absolute. Probabilities and moments (measured 1e-7): 2e-6 relative to
  // max(1, |value|). Leaving out the prior would move the value by ~10, a wrong mixture variance
  // the moments by ~1.
  const std::vector<Problem> problems = {MakeProblem(Task::kClassification),
                                         MakeProblem(Task::kRegression)};
  const std::string dir = MakeTempDir("mlp-posterior");
  std::vector<std::string> args = {std::to_string(kPriorVariance)};
  for (size_t k = 0; k < problems.size(); ++k) {
    const bool classification = problems[k].task == Task::kClassification;
    WriteProblem(dir + "/" + std::to_string(k), problems[k], ThreeDraws(problems[k].net));
    args.insert(args.end(), {dir + "/" + std::to_string(k), classification ? "3,6,3" : "3,6,2",
                             "tanh", classification ? "softmax" : "gaussian"});
  }
  auto ref = ParseReferenceOutput(RunReferenceScript("numpy_mlp_posterior.py", args));
  ASSERT_EQ(ref["log_posterior"].size(), problems.size());
  for (size_t k = 0; k < problems.size(); ++k) {
    const Problem& p = problems[k];
    auto posterior = MlpLogPosterior::Create(p.net, p.task, p.data, kPriorVariance);
    ASSERT_TRUE(posterior.ok()) << posterior.status().ToString();
    const std::vector<MatrixD> draws = ThreeDraws(p.net);
    const std::vector<double> first(draws[0].row(0).data(), draws[0].row(0).data() + draws[0].cols());
    std::vector<double> grad;
    EXPECT_NEAR(posterior.value()(first, grad), ref["log_posterior"][k], 1e-5) << TaskName(p.task);
    const MatrixD expected = ReadMatrixText(dir + "/" + std::to_string(k) + "/predictive.txt");
    const MatrixD predictive = PosteriorPredictive(p.net, p.task, draws, p.data.x, 8);
    ASSERT_EQ(predictive.rows(), expected.rows());
    ASSERT_EQ(predictive.cols(), expected.cols());
    const MatrixD scale = expected.cwiseAbs().cwiseMax(1.0);
    EXPECT_LE(((predictive - expected).cwiseAbs().cwiseQuotient(scale)).maxCoeff(), 2e-6)
        << TaskName(p.task);
  }
  std::filesystem::remove_all(dir);
}

TEST(MlpPosteriorTest, CreateRejectsDataThatDoesNotFit) {
  Problem p = MakeProblem(Task::kClassification);
  const auto code = [&](Task task, const Split& data, double prior_variance) {
    return MlpLogPosterior::Create(p.net, task, data, prior_variance).status().code();
  };
  EXPECT_EQ(code(Task::kClassification, p.data, 1.0), Status::Code::kOk);
  EXPECT_EQ(code(Task::kClassification, p.data, 0.0), Status::Code::kInvalidInput);
  EXPECT_EQ(code(Task::kRegression, p.data, 1.0), Status::Code::kInvalidInput);  // 3 outputs
  Split bad = p.data;
  bad.labels[4] = 3;  // classes are 0..2
  EXPECT_EQ(code(Task::kClassification, bad, 1.0), Status::Code::kInvalidInput);
  bad = p.data;
  bad.x.conservativeResize(kRows, 2);
  EXPECT_EQ(code(Task::kClassification, bad, 1.0), Status::Code::kInvalidInput);
}

}  // namespace mlp_posterior_test
}  // namespace chorus
