// chorus-bench-gemm: the GEMM limit of training a 784-512-512-10 MLP on one thread of this machine.
//
// One training step at batch B runs eight fp32 products, row-major, with the transposes
// common/mlp.cc uses:
//   forward          Z1 = X W1,      Z2 = H1 W2,     Z3 = H2 W3        (C += A B: onto the bias)
//   weight gradients dW1 = X^T dZ1,  dW2 = H1^T dZ2, dW3 = H2^T dZ3
//   input gradients  dH2 = dZ3 W3^T, dH1 = dZ2 W2^T  (the first layer needs no input gradient)
// 2 x 2 x (784x512 + 512x512 + 512x10) + 2 x (512x512 + 512x10) = 3,209,216 FLOPs per sample.
// Each backend times each product on its own; the step time is the sum over the eight, and the
// limit B / step time is the rate a training loop that did nothing but these products would reach.
// A product's time is the mean over calls filling at least 0.2 s: the same statistic as the
// training rates (all work over all wall time), so that other work on the machine lowers the
// limit and the training rates alike and the ratio between them stays meaningful.
// Backends, each on the calling thread only:
//   onednn: dnnl_sgemm called directly (OpenMP team of 1), runtime CPU dispatch;
//   chorus: chorus::Gemm (common/gemm.h), the backend chorus trains with;
//   eigen:  Eigen's own product, as built (the project's compile flags, no -march);
// and where the CPU has AVX512_BF16, the bfloat16 products (fp32 operands in, fp32 C out, each
// call converting its operands as a training step must):
//   chorus_bf16: chorus::Gemm with ProductPrecision::kBf16;
//   onednn_bf16: oneDNN's matmul primitive on bf16 source and weights (f32 destination, a sum
//                post-op for beta 1), after two reorders from the fp32 operands (the weights into
//                the matmul's chosen blocked layout); primitives made once per shape;
//   onednn_fpmath_bf16: oneDNN's f32 matmul on the fp32 operands as stored, with the attribute
//                fpmath_mode bf16 (oneDNN may convert and compute in bf16 as it sees fit).
// Usage: chorus-bench-gemm [BATCH...]   (default 32 128 512)
// Output:
//   gemm-machine gemm=NAME compiler="..." onednn=X.Y.Z
//   gemm-shape batch=B product=NAME op=NN m=M n=N k=K onednn_gflops=G chorus_gflops=G
//              eigen_gflops=G
//   gemm-limit batch=B backend=NAME step_us=T samples_per_s=R gflops=G flops_per_sample=F
#include <oneapi/dnnl/dnnl.h>
#include <omp.h>

#include <array>
#include <chrono>
#include <map>
#include <memory>
#include <oneapi/dnnl/dnnl.hpp>
#include <tuple>
#include <cstdio>
#include <cstdlib>
#include <functional>
#include <string>
#include <vector>

#include "bench/chained_products.h"
#include "common/gemm.h"
#include "common/matrix.h"

namespace chorus {
namespace {

using Clock = std::chrono::steady_clock;

struct Product {
  std::string name;
  bool ta, tb;
  int64_t m, n, k;
  float beta;
};

// The eight products of one step through widths[0] -> ... -> widths.back() at batch b.
std::vector<Product> StepProducts(const std::vector<int>& widths, int64_t b) {
  std::vector<Product> products;
  const int layers = static_cast<int>(widths.size()) - 1;
  for (int l = 0; l < layers; ++l) {
    products.push_back({"Z" + std::to_string(l + 1), false, false, b, widths[l + 1], widths[l], 1});
  }
  for (int l = 0; l < layers; ++l) {
    products.push_back({"dW" + std::to_string(l + 1), true, false, widths[l], widths[l + 1], b, 0});
  }
  for (int l = layers - 1; l >= 1; --l) {
    products.push_back({"dH" + std::to_string(l), false, true, b, widths[l], widths[l + 1], 0});
  }
  return products;
}

double Flops(const Product& p) { return 2.0 * p.m * p.n * p.k; }

// Mean seconds per call of f over calls filling at least 0.2 s, after 3 warm-up calls.
double SecondsPerCall(const std::function<void()>& f) {
  for (int i = 0; i < 3; ++i) f();
  int calls = 0;
  const auto start = Clock::now();
  double seconds = 0;
  do {
    f();
    ++calls;
    seconds = std::chrono::duration<double>(Clock::now() - start).count();
  } while (seconds < 0.2);
  return seconds / calls;
}

// Operands of one product with random contents; A and B are stored as op() expects them.
struct Operands {
  Matrix a, b, c;
  explicit Operands(const Product& p)
      : a(p.ta ? Matrix::Random(p.k, p.m) : Matrix::Random(p.m, p.k)),
        b(p.tb ? Matrix::Random(p.n, p.k) : Matrix::Random(p.k, p.n)),
        c(Matrix::Random(p.m, p.n)) {}
};

// Every backend computes C = op(A) op(B) + beta C with C's shape and A's giving m, n and k.
void OneDnn(bool ta, bool tb, const Matrix& a, const Matrix& b, float beta, Matrix& c) {
  const int64_t k = ta ? a.rows() : a.cols();
  const dnnl_status_t st =
      dnnl_sgemm(ta ? 'T' : 'N', tb ? 'T' : 'N', c.rows(), c.cols(), k, 1.0f, a.data(),
                 a.outerStride(), b.data(), b.outerStride(), beta, c.data(), c.outerStride());
  if (st != dnnl_success) {
    std::fprintf(stderr, "dnnl_sgemm failed with status %d\n", static_cast<int>(st));
    std::exit(1);
  }
}


// oneDNN's bf16 matmul for one product shape: reorders of op(A) into plain bf16 and of op(B) into
// the layout the matmul picked, then the matmul into C; or (implicit) the f32 matmul with
// fpmath_mode bf16 on the operands as stored.
struct OneDnnBf16Plan {
  bool implicit;
  dnnl::engine engine{dnnl::engine::kind::cpu, 0};
  dnnl::stream stream{engine};
  dnnl::memory a32, b32, c32, a16, b16;
  dnnl::reorder to_a16, to_b16;
  dnnl::matmul matmul;

  OneDnnBf16Plan(bool implicit_conversion, bool ta, bool tb, int64_t m, int64_t n, int64_t k,
                 int64_t lda, int64_t ldb, int64_t ldc, float beta)
      : implicit(implicit_conversion) {
    using dt = dnnl::memory::data_type;
    using tag = dnnl::memory::format_tag;
    // op(A) is m x k; stored transposed its strides are (1, lda). Likewise op(B), k x n.
    const dnnl::memory::desc a32_md({m, k}, dt::f32, ta ? dnnl::memory::dims{1, lda} : dnnl::memory::dims{lda, 1});
    const dnnl::memory::desc b32_md({k, n}, dt::f32, tb ? dnnl::memory::dims{1, ldb} : dnnl::memory::dims{ldb, 1});
    const dnnl::memory::desc c_md({m, n}, dt::f32, dnnl::memory::dims{ldc, 1});
    const dnnl::memory::desc a16_md({m, k}, dt::bf16, tag::ab);
    const dnnl::memory::desc b16_any({k, n}, dt::bf16, tag::any);
    dnnl::primitive_attr attr;
    if (beta != 0.0f) {
      dnnl::post_ops ops;
      ops.append_sum(beta);
      attr.set_post_ops(ops);
    }
    a32 = dnnl::memory(a32_md, engine, DNNL_MEMORY_NONE);
    b32 = dnnl::memory(b32_md, engine, DNNL_MEMORY_NONE);
    c32 = dnnl::memory(c_md, engine, DNNL_MEMORY_NONE);
    if (implicit) {
      attr.set_fpmath_mode(dnnl::fpmath_mode::bf16);
      matmul = dnnl::matmul(dnnl::matmul::primitive_desc(dnnl::matmul::desc(a32_md, b32_md, c_md), attr, engine));
      return;
    }
    const dnnl::matmul::primitive_desc pd(dnnl::matmul::desc(a16_md, b16_any, c_md), attr, engine);
    a16 = dnnl::memory(a16_md, engine);
    b16 = dnnl::memory(pd.weights_desc(), engine);
    to_a16 = dnnl::reorder(a32, a16);
    to_b16 = dnnl::reorder(b32, b16);
    matmul = dnnl::matmul(pd);
  }
};

template <bool kImplicit>
void OneDnnBf16(bool ta, bool tb, const Matrix& a, const Matrix& b, float beta, Matrix& c) {
  using Key = std::tuple<bool, bool, int64_t, int64_t, int64_t, float>;
  static std::map<Key, std::unique_ptr<OneDnnBf16Plan>> plans;
  const int64_t k = ta ? a.rows() : a.cols();
  std::unique_ptr<OneDnnBf16Plan>& plan = plans[Key{ta, tb, c.rows(), c.cols(), k, beta}];
  if (!plan) {
    plan = std::make_unique<OneDnnBf16Plan>(kImplicit, ta, tb, c.rows(), c.cols(), k,
                                            a.outerStride(), b.outerStride(), c.outerStride(), beta);
  }
  plan->a32.set_data_handle(const_cast<float*>(a.data()));
  plan->b32.set_data_handle(const_cast<float*>(b.data()));
  plan->c32.set_data_handle(c.data());
  if (kImplicit) {
    plan->matmul.execute(plan->stream, {{DNNL_ARG_SRC, plan->a32},
                                        {DNNL_ARG_WEIGHTS, plan->b32},
                                        {DNNL_ARG_DST, plan->c32}});
    plan->stream.wait();
    return;
  }
  plan->to_a16.execute(plan->stream, plan->a32, plan->a16);
  plan->to_b16.execute(plan->stream, plan->b32, plan->b16);
  plan->matmul.execute(plan->stream, {{DNNL_ARG_SRC, plan->a16},
                                      {DNNL_ARG_WEIGHTS, plan->b16},
                                      {DNNL_ARG_DST, plan->c32}});
  plan->stream.wait();
}

// beta is 0 or 1 in every product here: C = op(A) op(B), or C += op(A) op(B).
void EigenProduct(bool ta, bool tb, const Matrix& a, const Matrix& b, float beta, Matrix& c) {
  if (beta == 0.0f) c.setZero();
  if (ta) {
    c.noalias() += a.transpose() * b;
  } else if (tb) {
    c.noalias() += a * b.transpose();
  } else {
    c.noalias() += a * b;
  }
}

struct Backend {
  const char* name;
  void (*run)(bool ta, bool tb, const Matrix& a, const Matrix& b, float beta, Matrix& c);
};
constexpr Backend kFp32Backends[] = {
    {"onednn", OneDnn}, {"chorus", ChorusProduct}, {"eigen", EigenProduct}};
constexpr Backend kBf16Backends[] = {{"onednn_bf16", OneDnnBf16<false>},
                                     {"onednn_fpmath_bf16", OneDnnBf16<true>},
                                     {"chorus_bf16", ChorusProductAt<ProductPrecision::kBf16>}};

void MeasureBatch(int64_t batch, const std::vector<Backend>& backends) {
  const int backend_count = static_cast<int>(backends.size());
  const std::vector<int> widths = {784, 512, 512, 10};
  const std::vector<Product> products = StepProducts(widths, batch);
  std::vector<double> step_seconds(backend_count);
  double step_flops = 0;
  for (const Product& p : products) {
    Operands operands(p);
    step_flops += Flops(p);
    std::printf("gemm-shape batch=%lld product=%s op=%c%c m=%lld n=%lld k=%lld", (long long)batch,
                p.name.c_str(), p.ta ? 'T' : 'N', p.tb ? 'T' : 'N', (long long)p.m,
                (long long)p.n, (long long)p.k);
    for (int i = 0; i < backend_count; ++i) {
      const double s = SecondsPerCall([&] {
        backends[i].run(p.ta, p.tb, operands.a, operands.b, p.beta, operands.c);
      });
      step_seconds[i] += s;
      std::printf(" %s_gflops=%.1f", backends[i].name, Flops(p) / s * 1e-9);
    }
    std::printf("\n");
    std::fflush(stdout);
  }
  for (int i = 0; i < backend_count; ++i) {
    std::printf(
        "gemm-limit batch=%lld backend=%s step_us=%.1f samples_per_s=%.0f gflops=%.1f "
        "flops_per_sample=%.0f\n",
        (long long)batch, backends[i].name, step_seconds[i] * 1e6, batch / step_seconds[i],
        step_flops / step_seconds[i] * 1e-9, step_flops / batch);
  }
  // The same products back to back on chained buffers, as a step runs them: operands no longer
  // stay hot in cache from one call of a product to the next. Eigen is left out (5x slower).
  ChainedProducts chained(widths, batch);
  for (const Backend& backend : backends) {
    if (std::string(backend.name) == "eigen") continue;
    const double s = SecondsPerCall([&] { chained.Run(backend.run); });
    std::printf(
        "gemm-sequence batch=%lld backend=%s step_us=%.1f samples_per_s=%.0f gflops=%.1f\n",
        (long long)batch, backend.name, s * 1e6, batch / s, step_flops / s * 1e-9);
  }
  std::fflush(stdout);
}

std::string Compiler() {
#if defined(__clang__)
  return std::string("clang ") + __clang_version__;
#elif defined(__GNUC__)
  return std::string("gcc ") + __VERSION__;
#else
  return "unknown";
#endif
}

int Main(int argc, char** argv) {
  std::vector<int64_t> batches;
  for (int i = 1; i < argc; ++i) {
    const long long b = std::atoll(argv[i]);
    if (b < 1) {
      std::fprintf(stderr, "usage: chorus-bench-gemm [BATCH...]   (batch sizes >= 1)\n");
      return 2;
    }
    batches.push_back(b);
  }
  if (batches.empty()) batches = {32, 128, 512};
  std::vector<Backend> backends(std::begin(kFp32Backends), std::end(kFp32Backends));
  if (Bf16ProductsAvailable()) backends.insert(backends.end(), std::begin(kBf16Backends), std::end(kBf16Backends));
  omp_set_num_threads(1);
  const dnnl_version_t* v = dnnl_version();
  std::printf("gemm-machine gemm=%s compiler=\"%s\" onednn=%d.%d.%d\n", GemmBackendName(),
              Compiler().c_str(), v->major, v->minor, v->patch);
  for (int64_t batch : batches) MeasureBatch(batch, backends);
  return 0;
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) { return chorus::Main(argc, argv); }
