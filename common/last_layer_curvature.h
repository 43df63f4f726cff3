// The inputs of an Mlp's last layer and the curvature of the summed training loss in that layer's
// weights: what a last-layer Laplace approximation (common/last_layer_laplace.h) is built from.
// Notation. H: the width feeding the last layer (the last hidden width, or the input width without
// hidden layers); K: outputs; phi(x) = [h(x); 1] (H+1). Theta = [W_L; b_L^T] ((H+1) x K, double),
// so the outputs are f(x) = Theta^T phi(x); theta = vec_rowmajor(Theta) has P = (H+1) K entries,
// entry j K + k = Theta(j, k): exactly the last P floats of the Mlp parameter vector (common/mlp.h).
// Lambda_n: row n's curvature of the loss in its outputs (K x K), classification (softmax
// cross-entropy) diag(p_n) - p_n p_n^T with p_n = softmax(f_n), the exact Hessian; regression (K = 2
// outputs, mean mu and log-variance s, Gaussian NLL) the Fisher information diag(e^{-s_n}, 1/2).
// Thread safety: free functions, reentrant, owning no threads. Every sum over rows is additive:
// results for row slices add up to the whole's, so a caller may split rows across threads.
#pragma once

#include <string>

#include "common/config.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/status.h"

namespace chorus {

// Ok when m has at least one row, `width` columns and only finite entries; otherwise
// kInvalidInput "what: ..." naming the count, or the row and column of the first bad entry.
Status CheckFeatureMatrix(const ConstMatrixRef& m, int64_t width, const std::string& what);

// The N x H activations feeding the last layer (the front's output or x itself when the network
// has no hidden layer),
// computed in batches of at most 256 rows. x: N x width[0]. Errors: CheckFeatureMatrix's on x.
StatusOr<Matrix> LastHiddenFeatures(const Mlp& mlp, const float* params, const ConstMatrixRef& x);

// Theta = [W_L; b_L^T] ((H+1) x K) read from an Mlp parameter vector.
MatrixD LastLayerWeights(const Mlp& mlp, const float* params);

// Phi = [features 1]: N x (H+1), float.
Matrix LastLayerInputs(const ConstMatrixRef& features);

// The outputs F = Phi Theta (N x K), in double.
MatrixD LastLayerOutputs(const ConstMatrixRef& features, const MatrixD& theta);

// The generalised Gauss-Newton matrix of the loss summed over rows, P x P in the index order
// above: Hdata = sum_n (phi_n phi_n^T) kron Lambda_n (for classification the exact Hessian, the
// logits being linear in theta). Block (k, l) is the weighted Gram Phi^T diag(Lambda_n(k, l)) Phi:
// one float GEMM per class pair and block of 1024 rows, summed in double; K (K + 1) / 2 GEMMs in
// all (measured 16 s on one AVX-512 core at N = 60000, H = 512, K = 10). Requires
// features.cols() + 1 == theta.rows(), K >= 2, and K == 2 for regression (debug-asserted).
MatrixD LastLayerHessian(Task task, const ConstMatrixRef& features, const MatrixD& theta);

// K-FAC (Martens & Grosse, ICML 2015; Ritter et al., ICLR 2018): Hdata ~ G kron A, exact when
// every Lambda_n is the same. One GEMM over the rows. Same requirements as LastLayerHessian.
struct KroneckerFactors {
  MatrixD feature_gram;      // G = sum_n phi_n phi_n^T, (H+1) x (H+1)
  MatrixD output_curvature;  // A = (1/N) sum_n Lambda_n, K x K
};
KroneckerFactors LastLayerKroneckerFactors(Task task, const ConstMatrixRef& features,
                                           const MatrixD& theta);

}  // namespace chorus
