// chorus's GEMM (common/gemm.h, common/gemm_kernel.h), every micro-kernel this CPU can run:
// - against a double-precision product, within the forward error bound of a float inner
//   product of length k, |fl(x.y) - x.y| <= gamma_k |x|.|y| with gamma_k = k u / (1 - k u),
//   u = 2^-24 (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed. 2002, eq. 3.5);
// - against oneDNN's sgemm (Debian libdnnl-dev), an independent implementation, on the shapes
//   of training a 784-512-512-10 network;
// - for the BLAS conventions of alpha, beta and beta == 0 (C not read);
// - for bit-identical results on repeated calls and on another thread;
// - the bfloat16 kernel (where the CPU has AVX512_BF16): its rounding against PyTorch's
//   Tensor.to(torch.bfloat16), its products against the double product of the rounded operands.
#include <gtest/gtest.h>
#include <oneapi/dnnl/dnnl.h>
#include <omp.h>

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <limits>
#include <string>
#include <thread>
#include <vector>

#include "common/gemm.h"
#include "common/gemm_kernel.h"
#include "common/rng.h"
#include "common/sgd.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace gemm_test {

std::vector<const GemmKernel*> KernelsHere() {
  std::vector<const GemmKernel*> kernels;
  if (Avx512Bf16Kernel() != nullptr) kernels.push_back(Avx512Bf16Kernel());
  if (Avx512Kernel() != nullptr) kernels.push_back(Avx512Kernel());
  if (Avx2Kernel() != nullptr) kernels.push_back(Avx2Kernel());
  kernels.push_back(&PortableKernel());
  return kernels;
}

Matrix RandomMatrix(int64_t rows, int64_t cols, Philox& rng) {
  Matrix m(rows, cols);
  for (int64_t i = 0; i < rows; ++i) {
    for (int64_t j = 0; j < cols; ++j) m(i, j) = static_cast<float>(rng.NextNormal());
  }
  return m;
}

struct Case {
  int64_t m, n, k;
  bool ta, tb;
  float alpha, beta;
};

// x rounded to bfloat16 to nearest even, ties to even (IEEE 754 roundTiesToEven on an 8-bit
// significand), as a float; normal and zero inputs only. Pinned to PyTorch's conversion by
// Bf16RoundingMatchesPyTorch.
float RoundToBf16(float x) {
  uint32_t bits;
  std::memcpy(&bits, &x, sizeof bits);
  bits += 0x7FFFu + ((bits >> 16) & 1u);
  bits &= 0xFFFF0000u;
  float rounded;
  std::memcpy(&rounded, &bits, sizeof rounded);
  return rounded;
}

// The operands a kernel multiplies: themselves, or for a bfloat16 kernel rounded to bfloat16.
MatrixD Operand(const GemmKernel& kernel, const Eigen::Ref<const Matrix>& x) {
  if (!kernel.bf16_pairs) return x.cast<double>();
  return x.unaryExpr([](float v) { return RoundToBf16(v); }).cast<double>();
}

// Checks kernel on one case, with each operand a view into a larger matrix (row stride larger
// than its width), against the double product and Higham's bound. A bfloat16 kernel is checked
// against the double product of the bfloat16-rounded operands: their products are exact in fp32
// (8-bit significands), so the fp32 accumulation is all that is left to bound.
void CheckAgainstDouble(const GemmKernel& kernel, const Case& c, Philox& rng) {
  const std::string what = std::string(kernel.name) + " m=" + std::to_string(c.m) + " n=" +
                           std::to_string(c.n) + " k=" + std::to_string(c.k) + " ta=" +
                           std::to_string(c.ta) + " tb=" + std::to_string(c.tb);
  const Matrix a_big = RandomMatrix((c.ta ? c.k : c.m) + 2, (c.ta ? c.m : c.k) + 3, rng);
  const Matrix b_big = RandomMatrix((c.tb ? c.n : c.k) + 1, (c.tb ? c.k : c.n) + 5, rng);
  Matrix c_big = RandomMatrix(c.m + 2, c.n + 7, rng);
  const auto a = a_big.block(1, 2, c.ta ? c.k : c.m, c.ta ? c.m : c.k);
  const auto b = b_big.block(1, 3, c.tb ? c.n : c.k, c.tb ? c.k : c.n);
  const Matrix c_before = c_big;
  GemmWithKernel(kernel, c.ta ? Transpose::kYes : Transpose::kNo,
                 c.tb ? Transpose::kYes : Transpose::kNo, c.alpha, a, b, c.beta,
                 c_big.block(1, 4, c.m, c.n));

  const MatrixD op_a = c.ta ? MatrixD(Operand(kernel, a).transpose()) : Operand(kernel, a);
  const MatrixD op_b = c.tb ? MatrixD(Operand(kernel, b).transpose()) : Operand(kernel, b);
  const MatrixD exact = op_a * op_b;
  const MatrixD magnitude = op_a.cwiseAbs() * op_b.cwiseAbs();
  const double u = std::ldexp(1.0, -24), gamma = c.k * u / (1 - c.k * u);
  for (int64_t i = 0; i < c.m; ++i) {
    for (int64_t j = 0; j < c.n; ++j) {
      const double c0 = c_before(1 + i, 4 + j);
      const double want = c.alpha * exact(i, j) + c.beta * c0;
      // The product's bound, scaled by alpha, plus one rounding for each of the scaling and the
      // addition of beta C.
      const double bound = std::abs(c.alpha) * gamma * magnitude(i, j) +
                           3 * u * (std::abs(c.alpha * exact(i, j)) + std::abs(c.beta * c0)) + 1e-30;
      ASSERT_LE(std::abs(c_big(1 + i, 4 + j) - want), bound) << what << " at " << i << "," << j;
    }
  }
  // Nothing outside the C view was touched.
  for (int64_t i = 0; i < c_big.rows(); ++i) {
    for (int64_t j = 0; j < c_big.cols(); ++j) {
      const bool inside = i >= 1 && i < 1 + c.m && j >= 4 && j < 4 + c.n;
      if (!inside) {
        ASSERT_EQ(c_big(i, j), c_before(i, j)) << what << " wrote outside C at " << i << "," << j;
      }
    }
  }
}

TEST(GemmTest, EveryKernelMatchesTheDoubleProductWithinHighamsBound) {
  Philox rng(11);
  // Edges of every tile and block size: 1, below/at/above mr (4, 6, 12), nr (16, 32), the k block
  // (256) and the row and column blocks (144, 512).
  const int64_t ms[] = {1, 5, 12, 13, 145};
  const int64_t ns[] = {1, 10, 16, 33, 520};
  const int64_t ks[] = {1, 7, 256, 300};
  for (const GemmKernel* kernel : KernelsHere()) {
    for (int64_t m : ms) {
      for (int64_t n : ns) {
        for (int64_t k : ks) {
          for (int t = 0; t < 4; ++t) {
            CheckAgainstDouble(*kernel, {m, n, k, (t & 1) != 0, (t & 2) != 0, 1.0f, 0.0f}, rng);
          }
        }
      }
    }
    CheckAgainstDouble(*kernel, {37, 70, 300, false, true, -0.5f, 1.0f}, rng);
    CheckAgainstDouble(*kernel, {37, 70, 300, true, false, 2.0f, 0.25f}, rng);
  }
}

// The packing transposes (8 x 8 and 4 x 8 blocks, element-wise edges) against the definition,
// dst[q * ld_dst + r] = src[r * ld_src + q], on every row count up to 17 and column counts around
// the block width; entries of dst outside the transposed block stay untouched.
TEST(GemmTest, EveryKernelsTransposeMatchesTheDefinition) {
  Philox rng(13);
  const Matrix src = RandomMatrix(17, 40, rng);
  for (const GemmKernel* kernel : KernelsHere()) {
    for (int rows = 1; rows <= 17; ++rows) {
      for (int64_t cols : {1, 7, 8, 9, 16, 31, 33}) {
        Matrix dst = Matrix::Constant(cols + 1, 20, -1.0f);
        kernel->transpose(src.data(), src.cols(), rows, cols, dst.data(), dst.cols());
        for (int64_t q = 0; q <= cols; ++q) {
          for (int r = 0; r < 20; ++r) {
            const float want = q < cols && r < rows ? src(r, q) : -1.0f;
            ASSERT_EQ(dst(q, r), want) << kernel->name << " rows=" << rows << " cols=" << cols
                                       << " at (" << q << ", " << r << ")";
          }
        }
      }
    }
  }
}

TEST(GemmTest, BetaZeroDoesNotReadC) {
  Philox rng(12);
  const Matrix a = RandomMatrix(20, 30, rng), b = RandomMatrix(30, 40, rng);
  for (const GemmKernel* kernel : KernelsHere()) {
    Matrix c = Matrix::Constant(20, 40, std::numeric_limits<float>::quiet_NaN());
    GemmWithKernel(*kernel, Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.0f, c);
    EXPECT_TRUE(c.allFinite()) << kernel->name;
  }
}

TEST(GemmTest, EmptyInnerDimensionScalesC) {
  const Matrix a(3, 0), b(0, 4);
  Matrix c = Matrix::Constant(3, 4, 2.0f);
  Gemm(Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.5f, c);
  EXPECT_EQ(c, Matrix::Constant(3, 4, 1.0f));
  Gemm(Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.0f, c);
  EXPECT_EQ(c, Matrix::Zero(3, 4));
}

// oneDNN's sgemm on the eight products of one training step of 784-512-512-10 at batch 128:
// two float implementations agree to a few units in the last place of the magnitudes involved.
TEST(GemmTest, AgreesWithOneDnnOnTrainingShapes) {
  omp_set_num_threads(1);
  struct Shape { bool ta, tb; int m, n, k; };
  const Shape shapes[] = {{false, false, 128, 512, 784}, {false, false, 128, 512, 512},
                          {false, false, 128, 10, 512},  {true, false, 784, 512, 128},
                          {true, false, 512, 512, 128},  {true, false, 512, 10, 128},
                          {false, true, 128, 512, 10},   {false, true, 128, 512, 512}};
  Philox rng(13);
  for (const Shape& s : shapes) {
    const Matrix a = s.ta ? RandomMatrix(s.k, s.m, rng) : RandomMatrix(s.m, s.k, rng);
    const Matrix b = s.tb ? RandomMatrix(s.n, s.k, rng) : RandomMatrix(s.k, s.n, rng);
    Matrix ours(s.m, s.n), theirs(s.m, s.n);
    Gemm(s.ta ? Transpose::kYes : Transpose::kNo, s.tb ? Transpose::kYes : Transpose::kNo, 1.0f,
         a, b, 0.0f, ours);
    ASSERT_EQ(dnnl_sgemm(s.ta ? 'T' : 'N', s.tb ? 'T' : 'N', s.m, s.n, s.k, 1.0f, a.data(),
                         a.outerStride(), b.data(), b.outerStride(), 0.0f, theirs.data(),
                         theirs.outerStride()),
              dnnl_success);
    // Entries are sums of k products of standard normals: magnitude about sqrt(k).
    const double tolerance = 8 * std::ldexp(1.0, -24) * s.k * std::sqrt(static_cast<double>(s.k));
    EXPECT_LE((ours - theirs).cwiseAbs().maxCoeff(), tolerance)
        << "m=" << s.m << " n=" << s.n << " k=" << s.k;
  }
}

// The fused SGD step (GemmSgdUpdate) against the product stored and then stepped entry by entry
// with common/sgd.cc's SgdStep: the same bits, for every kernel, at tile edges and with k longer
// than one packed block (partial sums through the scratch).
TEST(GemmTest, FusedSgdStepGivesTheSameBitsAsProductThenSgdStep) {
  Philox rng(15);
  for (const GemmKernel* kernel : KernelsHere()) {
    for (bool nesterov : {false, true}) {
      for (int64_t k : {int64_t{40}, int64_t{600}}) {
        const int64_t m = 45, n = 70;
        const Matrix a = RandomMatrix(k, m, rng), b = RandomMatrix(k, n, rng);
        const Matrix w0 = RandomMatrix(m, n, rng), v0 = RandomMatrix(m, n, rng);
        OptimizerConfig opt;
        opt.nesterov = nesterov;
        const float lr = 0.03f;
        // Separate: G stored, then SgdStep over it.
        Matrix g(m, n), w_sep = w0, v_sep = v0;
        GemmWithKernel(*kernel, Transpose::kYes, Transpose::kNo, 0.5f, a, b, 0.0f, g);
        SgdStep(opt, lr, m * n, g.data(), w_sep.data(), v_sep.data());
        // Fused.
        Matrix scratch(m, n), w_fused = w0, v_fused = v0;
        const SgdUpdate update{w_fused.data(), v_fused.data(), n, lr,
                               static_cast<float>(opt.momentum),
                               static_cast<float>(opt.weight_decay), opt.nesterov};
        GemmWithKernel(*kernel, Transpose::kYes, Transpose::kNo, 0.5f, a, b, 0.0f, scratch, &update);
        EXPECT_EQ(w_fused, w_sep) << kernel->name << " k=" << k << " nesterov " << nesterov;
        EXPECT_EQ(v_fused, v_sep) << kernel->name << " k=" << k << " nesterov " << nesterov;
      }
    }
  }
}

TEST(GemmTest, SameBitsOnRepeatAndOnAnotherThread) {
  Philox rng(14);
  const Matrix a = RandomMatrix(130, 600, rng), b = RandomMatrix(520, 600, rng);
  Matrix first(130, 520), again(130, 520), elsewhere(130, 520);
  Gemm(Transpose::kNo, Transpose::kYes, 1.0f, a, b, 0.0f, first);
  Gemm(Transpose::kNo, Transpose::kYes, 1.0f, a, b, 0.0f, again);
  std::thread([&] { Gemm(Transpose::kNo, Transpose::kYes, 1.0f, a, b, 0.0f, elsewhere); }).join();
  EXPECT_EQ(first, again);
  EXPECT_EQ(first, elsewhere);
}

// Runs each item on a thread of its own, reports `threads` and remembers the most items one call
// had: a ParallelFor as unlike the calling thread's loop as it gets.
class ThreadPerItem final : public ParallelFor {
 public:
  explicit ThreadPerItem(int threads) : threads_(threads) {}
  void Run(int64_t count, void (*body)(void*, int64_t), void* context) const override {
    most_items = std::max(most_items, count);
    std::vector<std::thread> threads;
    for (int64_t i = 0; i < count; ++i) threads.emplace_back(body, context, i);
    for (std::thread& t : threads) t.join();
  }
  int Threads() const override { return threads_; }
  mutable int64_t most_items = 0;

 private:
  int threads_;
};

// GemmAcross and GemmSgdUpdateAcross cut C by rows or by columns (each way is chosen by some of
// these shapes: the training shapes of a 784-512 layer at batch 128 and odd sizes) and must give
// Gemm's bits, for 2, 3 and 5 blocks, both precisions, with beta 0 and 0.5 and with the update
// fused.
TEST(GemmTest, ProductCutAcrossThreadsGivesTheSameBits) {
  Philox rng(16);
  struct Shape {
    int64_t m, n, k;
    Transpose ta, tb;
  };
  const Transpose no = Transpose::kNo, yes = Transpose::kYes;
  const Shape shapes[] = {{128, 512, 784, no, no}, {784, 512, 128, yes, no}, {128, 784, 512, no, yes},
                          {37, 300, 257, yes, yes}, {301, 37, 600, no, no}, {290, 250, 90, no, yes}};
  for (const Shape& s : shapes) {
    const Matrix a = s.ta == yes ? RandomMatrix(s.k, s.m, rng) : RandomMatrix(s.m, s.k, rng);
    const Matrix b = s.tb == yes ? RandomMatrix(s.n, s.k, rng) : RandomMatrix(s.k, s.n, rng);
    const Matrix c0 = RandomMatrix(s.m, s.n, rng), w0 = RandomMatrix(s.m, s.n, rng),
                 v0 = RandomMatrix(s.m, s.n, rng);
    for (ProductPrecision precision : {ProductPrecision::kFp32, ProductPrecision::kBf16}) {
      const std::string where = std::to_string(s.m) + "x" + std::to_string(s.n) + "x" +
                                std::to_string(s.k) + " " + ProductPrecisionName(precision);
      for (float beta : {0.0f, 0.5f}) {
        Matrix whole = c0;
        Gemm(s.ta, s.tb, 0.75f, a, b, beta, whole, precision);
        for (int threads : {2, 3, 5}) {
          const ThreadPerItem parallel(threads);
          Matrix cut = c0;
          GemmAcross(&parallel, s.ta, s.tb, 0.75f, a, b, beta, cut, precision);
          EXPECT_GE(parallel.most_items, 2) << where << ": the product was not cut";
          EXPECT_EQ(cut, whole) << where << ", beta " << beta << ", " << threads << " blocks";
        }
      }
      const auto update_of = [](Matrix& w, Matrix& v) {
        return SgdUpdate{w.data(), v.data(), w.cols(), 0.03f, 0.9f, 1e-4f, true};
      };
      Matrix w_whole = w0, v_whole = v0, scratch(s.m, s.n);
      GemmSgdUpdate(s.ta, s.tb, 0.5f, a, b, update_of(w_whole, v_whole), scratch, precision);
      for (int threads : {2, 3}) {
        const ThreadPerItem parallel(threads);
        Matrix w_cut = w0, v_cut = v0;
        GemmSgdUpdateAcross(&parallel, s.ta, s.tb, 0.5f, a, b, update_of(w_cut, v_cut), scratch,
                            precision);
        EXPECT_GE(parallel.most_items, 2) << where << ": the fused product was not cut";
        EXPECT_EQ(w_cut, w_whole) << where << ", fused, " << threads << " blocks";
        EXPECT_EQ(v_cut, v_whole) << where << ", fused, " << threads << " blocks";
      }
    }
  }
}

// The bfloat16 kernel's conversions (vcvtneps2bf16) against PyTorch 1.13's Tensor.to(bfloat16)
// (Debian python3-torch, tests/reference/torch_bf16.py): the same bits on normal numbers of every
// magnitude, on exact ties (both parities of the kept last bit) and on signed zeros. Two cases
// PyTorch cannot hand back through the text format are checked against round-to-nearest-even
// itself: the largest floats round up to infinity, and infinities stay. Subnormal inputs are
// flushed to signed zero, as the instruction is defined (Intel SDM, VCVTNEPS2BF16: denormal
// inputs treated as zero); PyTorch keeps them, a difference below 1.2e-38.
TEST(GemmTest, Bf16RoundingMatchesPyTorch) {
  const GemmKernel* kernel = Avx512Bf16Kernel();
  if (kernel == nullptr) GTEST_SKIP() << "this CPU has no AVX512_BF16";
  Philox rng(21);
  std::vector<float> values = {0.0f, -0.0f, 1.0f, -1.0f, FLT_MIN, -FLT_MIN, 3.0e38f};
  for (int i = 0; i < 2000; ++i) {
    values.push_back(static_cast<float>(rng.NextNormal() * std::pow(10.0, 60 * rng.NextUniform() - 30)));
  }
  for (uint32_t upper : {0x3F80u, 0x3F81u, 0xC2F3u, 0x0A01u, 0x4B00u}) {  // ties: low half 0x8000
    const uint32_t bits = (upper << 16) | 0x8000u;
    float tie;
    std::memcpy(&tie, &bits, sizeof tie);
    values.push_back(tie);
  }
  const int64_t n = static_cast<int64_t>(values.size());
  // pair_rows on two rows, the values and the values shifted by one (32 columns a call, its
  // widest strip), and pair_adjacent on the whole vector give every value through both
  // conversions.
  std::vector<float> two_rows(values);
  two_rows.insert(two_rows.end(), values.begin() + 1, values.end());
  two_rows.push_back(0.0f);
  std::vector<float> from_rows(n + 32), from_adjacent((n + 1) / 2);
  for (int64_t c = 0; c < n; c += 32) {
    kernel->pair_rows(two_rows.data() + c, n, 2, static_cast<int>(std::min<int64_t>(32, n - c)), 32,
                      from_rows.data() + c);
  }
  kernel->pair_adjacent(values.data(), n, from_adjacent.data());
  const auto half = [](const std::vector<float>& words, int64_t i, bool high) {
    uint32_t w;
    std::memcpy(&w, &words[i], sizeof w);
    const uint32_t bits = (high ? w & 0xFFFF0000u : w << 16);
    float f;
    std::memcpy(&f, &bits, sizeof f);
    return f;
  };
  const std::string dir = testing::MakeTempDir("chorus-torch-bf16");
  MatrixD in(1, n);
  for (int64_t i = 0; i < n; ++i) in(0, i) = values[i];
  testing::WriteMatrixText(dir + "/in.txt", in);
  testing::RunReferenceScript("torch_bf16.py", {"round", dir + "/in.txt", dir + "/out.txt"});
  const MatrixD torch = testing::ReadMatrixText(dir + "/out.txt");
  ASSERT_EQ(torch.cols(), n);
  for (int64_t i = 0; i < n; ++i) {
    const double want = torch(0, i);
    EXPECT_EQ(half(from_rows, i, false), want) << "pair_rows low half of value " << values[i];
    if (i > 0) {
      EXPECT_EQ(half(from_rows, i - 1, true), want) << "pair_rows high half of " << values[i];
    }
    EXPECT_EQ(half(from_adjacent, i / 2, i % 2 == 1), want) << "pair_adjacent of " << values[i];
    EXPECT_EQ(RoundToBf16(values[i]), want) << "the test's own rounding of " << values[i];
    EXPECT_EQ(std::signbit(half(from_rows, i, false)), std::signbit(want)) << values[i];
  }
  if (n % 2 == 1) {
    EXPECT_EQ(half(from_adjacent, n / 2, true), 0.0f) << "odd k: the pair's high half";
  }
  std::filesystem::remove_all(dir);

  const float edge[] = {FLT_MAX, -FLT_MAX, INFINITY, -INFINITY, 1.0e-39f, -1.0e-39f};
  std::vector<float> out(3);
  kernel->pair_adjacent(edge, 6, out.data());
  EXPECT_EQ(half(out, 0, false), INFINITY);
  EXPECT_EQ(half(out, 0, true), -INFINITY);
  EXPECT_EQ(half(out, 1, false), INFINITY);
  EXPECT_EQ(half(out, 1, true), -INFINITY);
  EXPECT_EQ(half(out, 2, false), 0.0f);
  EXPECT_FALSE(std::signbit(half(out, 2, false)));
  EXPECT_EQ(half(out, 2, true), 0.0f);
  EXPECT_TRUE(std::signbit(half(out, 2, true)));
}

// Gemm's precision switch: kBf16 runs the bfloat16 kernel where the CPU has one, and fp32 stays
// the default and gives the fp32 kernel's bits.
TEST(GemmTest, PrecisionChoosesTheKernel) {
  Philox rng(22);
  const Matrix a = RandomMatrix(20, 50, rng), b = RandomMatrix(50, 40, rng);
  Matrix fp32(20, 40), bf16(20, 40), by_kernel(20, 40);
  Gemm(Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.0f, fp32);
  Gemm(Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.0f, bf16, ProductPrecision::kBf16);
  const GemmKernel* kernel = Avx512Bf16Kernel();
  EXPECT_EQ(Bf16ProductsAvailable(), kernel != nullptr);
  GemmWithKernel(kernel != nullptr ? *kernel : BestGemmKernel(), Transpose::kNo, Transpose::kNo,
                 1.0f, a, b, 0.0f, by_kernel);
  EXPECT_EQ(bf16, by_kernel);
  GemmWithKernel(BestGemmKernel(), Transpose::kNo, Transpose::kNo, 1.0f, a, b, 0.0f, by_kernel);
  EXPECT_EQ(fp32, by_kernel);
  if (kernel != nullptr) {
    EXPECT_NE(bf16, fp32);
    EXPECT_STREQ(GemmBackendName(ProductPrecision::kBf16), "avx512-bf16");
  }
}

}  // namespace gemm_test
}  // namespace chorus
