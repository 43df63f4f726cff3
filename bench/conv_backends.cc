// chorus-bench-conv: the convolutional front of the Fashion-MNIST member
// (configs/fashion_mnist_conv.yaml: 1x28x28 -> 16 channels 3x3 -> relu -> max pool 2x2 ->
// 32 channels 3x3 -> relu -> max pool 2x2 -> 32x7x7) on one thread, two ways on the same shapes:
//   chorus: common/conv_front.h's ConvFront (im2col to chorus::Gemm, bias, relu and pooling
//           fused), Forward then Backward with no optimizer;
//   onednn: oneDNN's primitives with layouts of its own choosing (format_tag::any): per stage,
//           convolution forward with bias and a fused relu post-op, max pooling forward
//           (training, keeping its workspace); backward: max pooling backward, relu backward (from
//           the relu's output), convolution backward weights with the bias gradient and, for the
//           second stage only, backward data (chorus never forms the image's gradient either).
// The oneDNN timings include every reorder a drop-in replacement for ConvFront would run each
// step: the channel-major input rows (NCHW) and the kernels in chorus's parameter block (HWIO,
// which change every step) into oneDNN's layouts, kernel gradients back into chorus's gradient
// block, the front's output out to and its gradient in from channels-last rows (NHWC, what the
// first dense layer reads), and any reorder between two primitives whose chosen layouts differ.
// Before timing, both fronts run once on the same batch: the outputs and the parameter
// gradients must agree (max difference over max magnitude), else nothing is timed.
// A step's forward and backward are timed separately; each statistic is the median over
// kRepetitions steps after kWarmUp, the two backends taking turns step by step so that a slow
// spell of the shared machine falls on both.
// Usage: chorus-bench-conv [BATCH...]   (default 128)
// Output:
//   conv-machine cpu="..." nproc=P openblas_coretype=V|unset onednn=X.Y.Z omp_threads=T
//   conv-onednn batch=B stage=S conv_fwd=IMPL conv_bwd_weights=IMPL conv_bwd_data=IMPL|none
//   conv-onednn batch=B reorders_forward=N reorders_backward=N
//   conv-chorus batch=B columns=kept|chunked   (ConvFront keeps the unfolded inputs or not)
//   conv-check batch=B forward_max_abs_diff=D forward_rel=R grad_max_abs_diff=D grad_rel=R ok=yes|no
//   conv backend=NAME batch=B forward_ms=T backward_ms=T total_ms=T samples_per_s=R
#include <omp.h>
#include <oneapi/dnnl/dnnl.hpp>
#include <sched.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>
#include <unordered_map>
#include <vector>

#include "common/conv_front.h"
#include "common/rng.h"

namespace chorus {
namespace {

using Clock = std::chrono::steady_clock;
using dnnl::memory;
using Tag = memory::format_tag;

constexpr int kWarmUp = 3;
constexpr int kRepetitions = 21;
// Outputs: each value is a sum of 9 C_in products plus a bias, in a different order on each
// side; fp32 rounding stays near 1e-6 of the largest value. Gradients: each kernel entry sums
// batch x H x W products (100,000 at batch 128); rounding grows like sqrt(n) x 6e-8, about 2e-5.
constexpr double kForwardTolerance = 1e-4;
constexpr double kGradientTolerance = 1e-3;

// One primitive with its arguments, run in list order.
struct Step {
  dnnl::primitive primitive;
  std::unordered_map<int, memory> args;
};

// The front in oneDNN, reading x and the parameters from chorus's buffers and writing the
// output (rows x Outputs(), channels last) and the parameter gradient in chorus's layouts.
class OneDnnFront {
 public:
  OneDnnFront(const ConvFront& front, int64_t rows, const float* x, const float* params, float* grad);
  void Forward() { Run(forward_); }
  void Backward() { Run(backward_); }
  const float* output() const { return output_.data(); }
  float* output_gradient() { return output_gradient_.data(); }
  void Describe(int64_t batch) const;

 private:
  struct StageState {
    dnnl::convolution_forward::primitive_desc conv;
    dnnl::pooling_forward::primitive_desc pool;
    dnnl::eltwise_forward::primitive_desc relu_hint;  // never run: the post-op is the relu
    memory weights, src, activation, workspace, pooled;
  };
  memory User(const memory::dims& dims, Tag tag, const float* data) const {
    return memory({dims, memory::data_type::f32, tag}, engine_, const_cast<float*>(data));
  }
  // `have` in layout `want`: itself, or a new memory that a reorder appended to `steps` fills.
  memory Into(const memory& have, const memory::desc& want, std::vector<Step>& steps);
  // Where a primitive writes `produced` for `user`; FinishOutput copies it there if they differ.
  memory OutputFor(const memory& user, const memory::desc& produced) const {
    return user.get_desc() == produced ? user : memory(produced, engine_);
  }
  void FinishOutput(const memory& written, const memory& user, std::vector<Step>& steps);
  void BuildStage(const ConvFront& front, int s, int64_t rows, const memory& input, const float* params);
  memory BuildStageBackward(const ConvFront& front, int s, int64_t rows, const memory& pooled_grad,
                            const float* params, float* grad);
  void Run(std::vector<Step>& steps);

  dnnl::engine engine_{dnnl::engine::kind::cpu, 0};
  dnnl::stream stream_{engine_};
  std::vector<StageState> stages_;
  std::vector<Step> forward_, backward_;
  std::vector<float> output_, output_gradient_;
  std::vector<std::string> impl_lines_;
};

memory OneDnnFront::Into(const memory& have, const memory::desc& want, std::vector<Step>& steps) {
  if (have.get_desc() == want) return have;
  memory converted(want, engine_);
  steps.push_back({dnnl::reorder(have, converted), {{DNNL_ARG_FROM, have}, {DNNL_ARG_TO, converted}}});
  return converted;
}

void OneDnnFront::FinishOutput(const memory& written, const memory& user, std::vector<Step>& steps) {
  if (written == user) return;
  steps.push_back({dnnl::reorder(written, user), {{DNNL_ARG_FROM, written}, {DNNL_ARG_TO, user}}});
}

void OneDnnFront::BuildStage(const ConvFront& front, int s, int64_t rows, const memory& input,
                             const float* params) {
  const ConvFront::Stage& g = front.stages()[s];
  const memory::dims src{rows, g.in_channels, g.height, g.width};
  const memory::dims dst{rows, g.out_channels, g.height, g.width};
  const memory::dims kernel{g.out_channels, g.in_channels, g.kernel, g.kernel};
  const memory::dims pooled{rows, g.out_channels, g.out_height, g.out_width};
  const memory::dims pad{g.pad, g.pad};
  const auto f32 = memory::data_type::f32;
  dnnl::post_ops relu;
  relu.append_eltwise(1.0f, dnnl::algorithm::eltwise_relu, 0.0f, 0.0f);
  dnnl::primitive_attr attr;
  attr.set_post_ops(relu);
  StageState st;
  st.conv = dnnl::convolution_forward::primitive_desc(
      {dnnl::prop_kind::forward_training, dnnl::algorithm::convolution_direct, {src, f32, Tag::any},
       {kernel, f32, Tag::any}, {{g.out_channels}, f32, Tag::x}, {dst, f32, Tag::any}, {1, 1}, pad, pad},
      attr, engine_);
  st.src = Into(input, st.conv.src_desc(), forward_);
  st.weights = Into(User(kernel, Tag::hwio, params + front.WeightOffset(s)), st.conv.weights_desc(), forward_);
  st.activation = memory(st.conv.dst_desc(), engine_);
  forward_.push_back({dnnl::convolution_forward(st.conv),
                      {{DNNL_ARG_SRC, st.src}, {DNNL_ARG_WEIGHTS, st.weights},
                       {DNNL_ARG_BIAS, User({g.out_channels}, Tag::x, params + front.BiasOffset(s))},
                       {DNNL_ARG_DST, st.activation}}});
  st.relu_hint = dnnl::eltwise_forward::primitive_desc(
      {dnnl::prop_kind::forward_training, dnnl::algorithm::eltwise_relu_use_dst_for_bwd, st.conv.dst_desc(), 0.0f},
      engine_);
  st.pool = dnnl::pooling_forward::primitive_desc(
      {dnnl::prop_kind::forward_training, dnnl::algorithm::pooling_max, st.conv.dst_desc(),
       {pooled, f32, Tag::any}, {2, 2}, {2, 2}, {0, 0}, {0, 0}},
      engine_);
  st.workspace = memory(st.pool.workspace_desc(), engine_);
  const bool last = s + 1 == static_cast<int>(front.stages().size());
  const memory user_output = last ? User(pooled, Tag::nhwc, output_.data()) : memory();
  st.pooled = last ? OutputFor(user_output, st.pool.dst_desc()) : memory(st.pool.dst_desc(), engine_);
  forward_.push_back({dnnl::pooling_forward(st.pool),
                      {{DNNL_ARG_SRC, st.activation}, {DNNL_ARG_DST, st.pooled}, {DNNL_ARG_WORKSPACE, st.workspace}}});
  if (last) FinishOutput(st.pooled, user_output, forward_);
  impl_lines_.push_back("conv_fwd=" + std::string(st.conv.impl_info_str()));
  stages_.push_back(st);
}

// Appends stage s's backward to backward_ from dL/d(pooled output); returns dL/d(stage input),
// or an empty memory for the first stage.
memory OneDnnFront::BuildStageBackward(const ConvFront& front, int s, int64_t rows,
                                       const memory& pooled_grad, const float* params, float* grad) {
  const ConvFront::Stage& g = front.stages()[s];
  const StageState& st = stages_[s];
  const memory::dims src{rows, g.in_channels, g.height, g.width};
  const memory::dims dst{rows, g.out_channels, g.height, g.width};
  const memory::dims kernel{g.out_channels, g.in_channels, g.kernel, g.kernel};
  const memory::dims pad{g.pad, g.pad};
  const auto f32 = memory::data_type::f32;
  const dnnl::pooling_backward::primitive_desc pool(
      {dnnl::algorithm::pooling_max, st.conv.dst_desc(), st.pool.dst_desc(), {2, 2}, {2, 2}, {0, 0}, {0, 0}},
      engine_, st.pool);
  const memory activation_grad(st.conv.dst_desc(), engine_);
  backward_.push_back({dnnl::pooling_backward(pool),
                       {{DNNL_ARG_DIFF_DST, Into(pooled_grad, pool.diff_dst_desc(), backward_)},
                        {DNNL_ARG_DIFF_SRC, activation_grad}, {DNNL_ARG_WORKSPACE, st.workspace}}});
  const dnnl::eltwise_backward::primitive_desc relu(
      {dnnl::algorithm::eltwise_relu_use_dst_for_bwd, st.conv.dst_desc(), st.conv.dst_desc(), 0.0f}, engine_,
      st.relu_hint);
  const memory pre_grad(st.conv.dst_desc(), engine_);
  backward_.push_back({dnnl::eltwise_backward(relu),
                       {{DNNL_ARG_DST, st.activation}, {DNNL_ARG_DIFF_DST, activation_grad},
                        {DNNL_ARG_DIFF_SRC, pre_grad}}});
  const dnnl::convolution_backward_weights::primitive_desc weights(
      {dnnl::algorithm::convolution_direct, {src, f32, Tag::any}, {kernel, f32, Tag::any},
       {{g.out_channels}, f32, Tag::x}, {dst, f32, Tag::any}, {1, 1}, pad, pad},
      engine_, st.conv);
  const memory user_dkernel = User(kernel, Tag::hwio, grad + front.WeightOffset(s));
  const memory dkernel = OutputFor(user_dkernel, weights.diff_weights_desc());
  backward_.push_back({dnnl::convolution_backward_weights(weights),
                       {{DNNL_ARG_SRC, Into(st.src, weights.src_desc(), backward_)},
                        {DNNL_ARG_DIFF_DST, Into(pre_grad, weights.diff_dst_desc(), backward_)},
                        {DNNL_ARG_DIFF_WEIGHTS, dkernel},
                        {DNNL_ARG_DIFF_BIAS, User({g.out_channels}, Tag::x, grad + front.BiasOffset(s))}}});
  FinishOutput(dkernel, user_dkernel, backward_);
  impl_lines_[s] += " conv_bwd_weights=" + std::string(weights.impl_info_str());
  if (s == 0) {
    impl_lines_[s] += " conv_bwd_data=none";
    return memory();
  }
  const dnnl::convolution_backward_data::primitive_desc data(
      {dnnl::algorithm::convolution_direct, {src, f32, Tag::any}, {kernel, f32, Tag::any},
       {dst, f32, Tag::any}, {1, 1}, pad, pad},
      engine_, st.conv);
  const memory input_grad(data.diff_src_desc(), engine_);
  backward_.push_back({dnnl::convolution_backward_data(data),
                       {{DNNL_ARG_DIFF_DST, Into(pre_grad, data.diff_dst_desc(), backward_)},
                        {DNNL_ARG_WEIGHTS, Into(st.weights, data.weights_desc(), backward_)},
                        {DNNL_ARG_DIFF_SRC, input_grad}}});
  impl_lines_[s] += " conv_bwd_data=" + std::string(data.impl_info_str());
  return input_grad;
}

OneDnnFront::OneDnnFront(const ConvFront& front, int64_t rows, const float* x, const float* params,
                         float* grad)
    : output_(rows * front.Outputs()), output_gradient_(rows * front.Outputs()) {
  const ImageShape& in = front.input();
  memory input = User({rows, in.channels, in.height, in.width}, Tag::nchw, x);
  const int stages = static_cast<int>(front.stages().size());
  for (int s = 0; s < stages; ++s) {
    BuildStage(front, s, rows, input, params);
    input = stages_[s].pooled;
  }
  const ConvFront::Stage& last = front.stages().back();
  memory pooled_grad = User({rows, last.out_channels, last.out_height, last.out_width}, Tag::nhwc,
                            output_gradient_.data());
  for (int s = stages - 1; s >= 0; --s) pooled_grad = BuildStageBackward(front, s, rows, pooled_grad, params, grad);
}

void OneDnnFront::Run(std::vector<Step>& steps) {
  for (Step& step : steps) step.primitive.execute(stream_, step.args);
  stream_.wait();
}

void OneDnnFront::Describe(int64_t batch) const {
  auto reorders = [](const std::vector<Step>& steps) {
    return std::count_if(steps.begin(), steps.end(), [](const Step& st) {
      return st.primitive.get_kind() == dnnl::primitive::kind::reorder;
    });
  };
  for (size_t s = 0; s < impl_lines_.size(); ++s) {
    std::printf("conv-onednn batch=%lld stage=%zu %s\n", (long long)batch, s + 1, impl_lines_[s].c_str());
  }
  std::printf("conv-onednn batch=%lld reorders_forward=%ld reorders_backward=%ld\n", (long long)batch,
              (long)reorders(forward_), (long)reorders(backward_));
}

// Max |a - b| and that over max |b|.
std::pair<double, double> Difference(const float* a, const float* b, int64_t n) {
  double diff = 0, scale = 0;
  for (int64_t i = 0; i < n; ++i) {
    diff = std::max(diff, std::fabs(double{a[i]} - b[i]));
    scale = std::max(scale, std::fabs(double{b[i]}));
  }
  return {diff, scale > 0 ? diff / scale : diff};
}

double Median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v.size() % 2 ? v[v.size() / 2] : 0.5 * (v[v.size() / 2 - 1] + v[v.size() / 2]);
}

double Seconds(Clock::time_point a, Clock::time_point b) { return std::chrono::duration<double>(b - a).count(); }

struct Times {
  std::vector<double> forward, backward, total;
  void Add(double f, double b) {
    forward.push_back(f);
    backward.push_back(b);
    total.push_back(f + b);
  }
};

void Print(const char* backend, int64_t batch, const Times& t) {
  const double total = Median(t.total);
  std::printf("conv backend=%s batch=%lld forward_ms=%.3f backward_ms=%.3f total_ms=%.3f samples_per_s=%.0f\n",
              backend, (long long)batch, Median(t.forward) * 1e3, Median(t.backward) * 1e3, total * 1e3,
              batch / total);
}

// Returns false when the two fronts disagree.
bool MeasureBatch(int64_t batch) {
  const ConvFront front({1, 28, 28}, {{16, 3, Pooling::kMax}, {32, 3, Pooling::kMax}}, Activation::kRelu);
  Philox rng(Derive(1, "conv-bench"));
  std::vector<float> params(front.ParameterCount());
  front.Initialize(rng, params.data());
  for (int s = 0; s < 2; ++s) {  // nonzero biases, so that the check covers them
    for (int j = 0; j < front.stages()[s].out_channels; ++j) params[front.BiasOffset(s) + j] = 0.1f * rng.NextNormal();
  }
  Matrix x(batch, front.Inputs());
  for (int64_t i = 0; i < x.size(); ++i) x.data()[i] = rng.NextUniformFloat();
  std::vector<float> chorus_grad(params.size()), onednn_grad(params.size());
  ConvFront::Workspace ws = front.MakeWorkspace(batch);
  OneDnnFront onednn(front, batch, x.data(), params.data(), onednn_grad.data());
  onednn.Describe(batch);
  std::printf("conv-chorus batch=%lld chunk_samples=%lld,%lld\n", (long long)batch, (long long)ws.chunk_samples[0],
              (long long)ws.chunk_samples[1]);

  const auto out = front.Forward(params.data(), x, ws);
  onednn.Forward();
  const auto forward = Difference(onednn.output(), out.data(), out.size());
  auto out_grad = front.OutputGradient(ws, batch);
  for (int64_t i = 0; i < out_grad.size(); ++i) out_grad.data()[i] = static_cast<float>(rng.NextNormal());
  std::copy(out_grad.data(), out_grad.data() + out_grad.size(), onednn.output_gradient());
  front.Backward(params.data(), x, ws, chorus_grad.data(), nullptr, 0.0f, nullptr);
  onednn.Backward();
  const auto gradient = Difference(onednn_grad.data(), chorus_grad.data(), params.size());
  const bool ok = forward.second <= kForwardTolerance && gradient.second <= kGradientTolerance;
  std::printf("conv-check batch=%lld forward_max_abs_diff=%.3g forward_rel=%.3g grad_max_abs_diff=%.3g "
              "grad_rel=%.3g ok=%s\n",
              (long long)batch, forward.first, forward.second, gradient.first, gradient.second, ok ? "yes" : "no");
  if (!ok) return false;

  // The output gradient stays in place: neither front's Forward or Backward overwrites it.
  Times chorus, dnn;
  for (int rep = 0; rep < kWarmUp + kRepetitions; ++rep) {
    const auto t0 = Clock::now();
    front.Forward(params.data(), x, ws);
    const auto t1 = Clock::now();
    front.Backward(params.data(), x, ws, chorus_grad.data(), nullptr, 0.0f, nullptr);
    const auto t2 = Clock::now();
    onednn.Forward();
    const auto t3 = Clock::now();
    onednn.Backward();
    const auto t4 = Clock::now();
    if (rep < kWarmUp) continue;
    chorus.Add(Seconds(t0, t1), Seconds(t1, t2));
    dnn.Add(Seconds(t2, t3), Seconds(t3, t4));
  }
  Print("chorus", batch, chorus);
  Print("onednn", batch, dnn);
  std::fflush(stdout);
  return true;
}

std::string CpuModel() {
  std::ifstream in("/proc/cpuinfo");
  for (std::string line; std::getline(in, line);) {
    if (line.rfind("model name", 0) == 0) return line.substr(line.find(':') + 2);
  }
  return "unknown";
}

int Main(int argc, char** argv) {
  std::vector<int64_t> batches;
  for (int i = 1; i < argc; ++i) {
    const long long b = std::atoll(argv[i]);
    if (b < 1) {
      std::fprintf(stderr, "usage: chorus-bench-conv [BATCH...]   (batch sizes >= 1; default 128)\n");
      return 2;
    }
    batches.push_back(b);
  }
  if (batches.empty()) batches = {128};
  omp_set_num_threads(1);
  cpu_set_t cpus;
  const int nproc = sched_getaffinity(0, sizeof(cpus), &cpus) == 0 ? CPU_COUNT(&cpus) : -1;
  const char* coretype = std::getenv("OPENBLAS_CORETYPE");
  const dnnl::version_t* v = dnnl::version();
  std::printf("conv-machine cpu=\"%s\" nproc=%d openblas_coretype=%s onednn=%d.%d.%d omp_threads=%d\n",
              CpuModel().c_str(), nproc, coretype ? coretype : "unset", v->major, v->minor, v->patch,
              omp_get_max_threads());
  for (int64_t batch : batches) {
    if (!MeasureBatch(batch)) return 1;
  }
  return 0;
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) { return chorus::Main(argc, argv); }
