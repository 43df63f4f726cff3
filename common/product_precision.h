// The precision of the matrix products in a member's training (train.products in the config).
#pragma once

namespace chorus {

// kFp32: float operands and accumulation. kBf16: operands rounded to bfloat16 (to nearest even),
// products accumulated in fp32, weights, gradients and the optimizer kept in fp32 (common/gemm.h).
enum class ProductPrecision { kFp32, kBf16 };

}  // namespace chorus
