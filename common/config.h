// The run configuration as plain structs, one per YAML section, with in-class defaults.
// Each field says meaning, unit, valid range and default. The only code that reads YAML is
// coordinator/config_loader.cc; everything else sees these structs, already validated.
// Thread safety: plain values.
#pragma once

#include <cstdint>
#include <optional>
#include <memory>
#include <string>
#include <vector>

#include "common/product_precision.h"
#include "common/sgmcmc_step.h"

namespace chorus {

enum class Task { kClassification, kRegression };
enum class Activation { kRelu, kTanh, kGelu };
// Pooling after a convolution stage: none, or a 2 x 2 window at stride 2 (max or mean).
enum class Pooling { kNone, kMax, kAverage };
enum class ScheduleKind { kConstant, kCosine, kStep };
enum class Weighting { kUniform, kStacking, kGreedy };
enum class BasinMethod { kNone, kGaussianDiag, kGaussianLowRank, kLaplaceLastLayer, kCyclicalSgmcmc };
// The last-layer Laplace curvature (common/last_layer_laplace.h): the exact matrix, its
// Kronecker factorisation, or auto (exact up to kMaxExactLaplaceParameters last-layer weights).
enum class LaplaceHessian { kAuto, kFull, kKronecker };
// A setting that is on, off, or decided by the data's size (DataConfig::small_data_rows).
enum class Switch { kAuto, kOn, kOff };

struct RunConfig {
  std::string name = "run";       // run directory prefix: [A-Za-z0-9._-]+, required
  uint64_t seed = 0;              // root of every seed in the run; member i gets Derive(seed, i)
  std::string out_dir = "runs";   // parent of run directories; relative to the working directory
};

// A pair of IDX files (images or feature tensor, and labels/targets), MNIST-family format.
struct IdxFiles {
  std::string images;
  std::string labels;
};

struct DataConfig {
  // --- changes the trained model ---
  std::string format = "csv";     // csv | idx
  std::string train;              // csv: path of the training file (required for csv)
  std::string test;               // csv: path of the test file (required for csv)
  IdxFiles train_idx;             // idx: training images and labels (required for idx)
  IdxFiles test_idx;              // idx: test images and labels (required for idx)
  double validation_fraction = 0.1;  // share of train held out, in (0, 0.5]; ignored with a file
  std::string validation_file;    // csv: explicit validation file instead of a fraction
  IdxFiles validation_idx;        // idx: explicit validation files instead of a fraction
  std::string target;             // csv: name of the target column (required for csv)
  Task task = Task::kClassification;
  std::vector<std::string> categorical;  // csv: columns one-hot encoded with the train vocabulary
  int64_t max_train_rows = 0;     // use only the first N training rows (before the split); 0 = all
  int64_t max_test_rows = 0;      // use only the first N test rows; 0 = all
  // Training sets with fewer rows than this (before any split) count as small: `auto` settings
  // (cross-fitting, early stopping) switch on for them. >= 0.
  int64_t small_data_rows = 20000;
  // k-fold cross-fitting instead of a single holdout (common/folds.h): -1 = auto (5 folds for
  // small data, else the holdout), 0 = the holdout, 2..50 = that many folds. Not with a file.
  int folds = -1;
  // --- report only ---
  // Optional second test set of shifted or out-of-distribution inputs (CSV with the training
  // columns, or IDX images; labels ignored): the report gives how well each uncertainty score
  // tells its rows from the test rows (coordinator/shift_evaluation.h).
  std::string shift_test;
  std::string true_probabilities;  // optional csv of the test set's true class probabilities
                                   // (header = class names, one row per test row); lets the
                                   // report show the Bayes-optimal test NLL (invented data only)
};

// The shape of one input row seen as an image: channels x height x width, channel-major (the row
// holds channel 0's height x width pixels row by row, then channel 1's, ...).
struct ImageShape {
  int channels = 0;  // each in [1, 65536] when set; all zero = not an image
  int height = 0;
  int width = 0;
  int64_t size() const { return int64_t{channels} * height * width; }
  bool operator==(const ImageShape& o) const {
    return channels == o.channels && height == o.height && width == o.width;
  }
};

// One convolution stage (common/conv_front.h): a kernel x kernel convolution at stride 1 with
// "same" zero padding (kernel / 2 on each side), its bias and the model's activation, then the
// pooling.
struct ConvStage {
  int channels = 16;   // output channels, in [1, 4096]
  int kernel = 3;      // odd, in [1, 15]
  Pooling pool = Pooling::kMax;
  bool operator==(const ConvStage& o) const {
    return channels == o.channels && kernel == o.kernel && pool == o.pool;
  }
};

struct ModelConfig {
  // Optional convolution stages before the dense layers (at most kMaxConvStages); they need
  // `image`, whose size must equal the data's feature count.
  ImageShape image;
  std::vector<ConvStage> conv;
  std::vector<int> hidden = {64, 64};  // widths of hidden layers, each in [1, 65536]; may be empty
  Activation activation = Activation::kRelu;
};
inline constexpr int kMaxConvStages = 8;

struct ScheduleConfig {
  ScheduleKind kind = ScheduleKind::kCosine;  // multiplies optimizer.lr, per step
  int step_every_epochs = 10;   // step: epochs between decays, >= 1
  double step_factor = 0.1;     // step: multiplier at each decay, in (0, 1]
};

struct OptimizerConfig {
  double lr = 0.05;             // base learning rate, > 0
  double momentum = 0.9;        // heavy-ball coefficient, in [0, 1)
  bool nesterov = false;        // Nesterov form of momentum
  double weight_decay = 5e-4;   // L2 coefficient added to the gradient (lambda * w), >= 0
  double clip_norm = 0.0;       // rescale the gradient to this global L2 norm if larger; 0 = off
};

// Early stopping: after every epoch the member's validation NLL is measured; training stops once
// `patience` epochs have passed without a new lowest value, and the parameters of the best epoch
// are kept (and the basin phase, if any, starts from them).
struct EarlyStoppingConfig {
  Switch mode = Switch::kAuto;  // auto: on for small data (DataConfig::small_data_rows)
  int patience = 10;            // epochs without a new best before stopping, >= 1
};

struct TrainConfig {
  int epochs = 20;              // passes over the training split, >= 1
  int batch_size = 128;         // minibatch rows, >= 1; the last short batch of an epoch is used
  // Parts each minibatch is cut into, their gradients computed side by side when the worker has
  // idle threads and added in a fixed order (common/training_step.h); in [1, batch_size]. The
  // result depends on parts, never on the thread count.
  int parts = 1;
  // The training products' precision (common/product_precision.h): fp32, or bf16 where the CPU
  // has AVX512_BF16 (fp32 elsewhere, said at the start of the run). Validation, basin fits'
  // sampling, assembly and prediction stay fp32.
  ProductPrecision products = ProductPrecision::kFp32;
  OptimizerConfig optimizer;
  ScheduleConfig schedule;
  EarlyStoppingConfig early_stopping;
  // Regression only: beta of the beta-NLL loss (Seitzer et al., ICLR 2022): each row's Gaussian
  // NLL is weighted by its predicted variance to the power beta, held constant in the gradient;
  // 0 is the plain NLL, 1 gives the mean the gradient of squared error. In [0, 1].
  double beta_nll = 0.5;
  // Warm start (coordinator/warm_start.h): a bundle file, or a registry directory whose current
  // bundle is meant (none yet: a cold start); members start from its members' weights instead
  // of a random initialisation. Empty: a cold start. Absolute once loaded.
  std::string warm_start;
  // Epochs of a warm-started run (0: `epochs`); a run that starts cold (a registry without a
  // current bundle yet) trains for `epochs`.
  int warm_epochs = 0;
  // Filled by the coordinator from warm_start, never read from or written to YAML: one starting
  // weight vector per member of the warm-start bundle, in this run's standardisation; member i
  // starts from start_points[i mod size]. Empty: initialise from the member's seed.
  std::vector<std::shared_ptr<const std::vector<float>>> start_points;
};

// Basin fits (ensemble.basin): after normal training, SGD continues at the constant rate `lr` for
// `epochs`, taking `snapshots` evenly spaced snapshots of the weights, from which a Gaussian is fitted
// (common/basin_fit.h) and `samples` weight vectors are drawn, from seeds derived from the member's.
// laplace_last_layer instead fits a Gaussian over the last layer's weights from the curvature of
// the training loss at the trained point (no extra epochs; epochs, lr, snapshots and rank unused).
// cyclical_sgmcmc replaces the member's training itself: its train.epochs run under the cyclical
// step size of `sgmcmc` (train.schedule and early stopping unused) with SGLD or SGHMC noise in each
// cycle's sampling phase, and the weights at the sample steps are the member's samples
// (cycles x samples_per_cycle of them; samples, scale and the Gaussian keys unused).
struct BasinConfig {
  BasinMethod method = BasinMethod::kNone;  // none | gaussian_diag | gaussian_lowrank | laplace_last_layer
  int epochs = 5;               // extra epochs at the constant rate, >= 1
  double lr = 0.01;             // the constant rate, > 0
  int snapshots = 20;           // snapshots over those epochs, >= 2
  int rank = 10;                // gaussian_lowrank: deviation vectors kept, in [2, snapshots]
  int samples = 10;             // weight samples per member, >= 1
  double scale = 1.0;           // multiplies the fitted covariance, > 0
  bool tune_scale = false;      // "scale: tune": pick the scale on validation from a fixed grid
                                // (common/basin_scale.h); workers then sample at 1
  // laplace_last_layer only:
  LaplaceHessian hessian = LaplaceHessian::kAuto;  // auto | full | kronecker
  // Precision of the Gaussian prior N(0, I / p) on the last layer's weights; 0 = "tune": each job
  // picks it on its validation rows (common/last_layer_laplace.h TunePriorPrecision). >= 0.
  double prior_precision = 0;
  // cyclical_sgmcmc only (common/sgmcmc_step.h): sampler, cycles, exploration fraction, samples
  // per cycle, posterior temperature and SGHMC friction.
  SgmcmcConfig sgmcmc;
};

// laplace_last_layer with hessian auto: the exact curvature up to this many last-layer weights
// (its eigenvectors take 8 bytes x this squared: 8 MiB), the Kronecker factors above.
constexpr int64_t kMaxExactLaplaceParameters = 1024;

struct EnsembleConfig {
  int members = 5;              // independently seeded trainings, >= 1
  int min_members = 1;          // fewest finished members for assembly to go ahead, in [1, members]
  BasinConfig basin;
  // uniform | stacking (Yao et al. 2018) | greedy (Caruana et al. 2004); learned on validation at
  // temperature 1, before the temperature is tuned on the weighted mixture.
  Weighting weighting = Weighting::kUniform;
  int greedy_rounds = 20;       // greedy: members added (with replacement), >= 1
  bool tune_temperature = true; // "tune": minimise validation NLL over log T
  double temperature = 1.0;     // used when tune_temperature is false; > 0
};

struct ReportConfig {
  int ece_bins = 15;            // equal-width confidence bins for ECE, in [1, 1000]
  int size_curve_subsets = 10;  // random member subsets per ensemble size, >= 1
  // The report recommends the cheapest size-grid point whose validation NLL is within this many
  // nats of the best point's (report/compute_advice.h); in [0, 100].
  double nll_tolerance = 0.01;
};

// A grid over training settings (top-level `search`), scored by validation NLL of one network per
// grid point (on every fold with cross-fitting), run as jobs before the members; the best point's
// settings are then used for every member. An empty list leaves that setting as configured.
struct SearchConfig {
  std::vector<double> weight_decay;        // train.optimizer.weight_decay values, each >= 0
  std::vector<double> lr;                  // train.optimizer.lr values, each > 0
  std::vector<std::vector<int>> hidden;    // model.hidden values
  std::vector<double> beta_nll;            // train.beta_nll values (regression), each in [0, 1]
  bool empty() const { return weight_decay.empty() && lr.empty() && hidden.empty() && beta_nll.empty(); }
};

struct ComputeConfig {
  // --- changes speed only ---
  int threads = 0;              // members trained at once (slot threads); 0 = all cores
};

// Where member jobs run (docs/design.md). With local_workers > 0 chorus run starts that many
// chorus-worker processes on loopback; with listen set, remote workers may join too; with
// local_workers 0 and no listen, members train in this process (compute.threads at once).
struct ClusterConfig {
  // --- changes speed only ---
  int local_workers = -1;       // worker processes to start; -1 = one per core; >= 0
  std::string listen;           // address for remote workers, e.g. "0.0.0.0:7070"; "" = loopback only
  std::string token_file;       // shared token (first line); required when listen is not loopback
  std::string tls_cert;         // PEM server certificate and key: TLS when both are set
  std::string tls_key;
  std::string tls_client_ca;    // PEM CA that client certificates must chain to (mutual TLS)
  double lease_seconds = 30;    // a lease lasts this long after its last heartbeat, > 0
  int max_attempts = 3;         // leases a job may use before it is recorded as failed, >= 1
  std::string metrics_listen;   // "HOST:PORT" serving Prometheus text at /metrics; "" = none
};

struct Config {
  RunConfig run;
  DataConfig data;
  ModelConfig model;
  TrainConfig train;
  EnsembleConfig ensemble;
  ReportConfig report;
  SearchConfig search;
  ComputeConfig compute;
  ClusterConfig cluster;
};

// Names used in YAML and messages, and their inverses (nullopt for an unknown name).
const char* TaskName(Task t);
const char* ActivationName(Activation a);
const char* PoolingName(Pooling p);
const char* ScheduleName(ScheduleKind s);
const char* ProductPrecisionName(ProductPrecision p);
const char* WeightingName(Weighting w);
const char* BasinMethodName(BasinMethod m);
const char* LaplaceHessianName(LaplaceHessian h);
const char* SwitchName(Switch s);
std::optional<Task> ParseTask(const std::string& s);
std::optional<Activation> ParseActivation(const std::string& s);
std::optional<Pooling> ParsePooling(const std::string& s);
std::optional<ScheduleKind> ParseSchedule(const std::string& s);
std::optional<ProductPrecision> ParseProductPrecision(const std::string& s);
std::optional<Weighting> ParseWeighting(const std::string& s);
std::optional<BasinMethod> ParseBasinMethod(const std::string& s);
std::optional<LaplaceHessian> ParseLaplaceHessian(const std::string& s);
std::optional<Switch> ParseSwitch(const std::string& s);

}  // namespace chorus
