// Output heads: the loss on the network's last layer and its gradient, averaged over the batch.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <vector>

#include "common/matrix.h"

namespace chorus {

// B is the minibatch size the loss is averaged over: batch_rows, or the rows given when it is 0.
// A minibatch cut into parts (common/training_step.h) passes the whole batch's B for every part,
// so the parts' losses and gradients add up to the batch's.

// Softmax classification. logits: rows x K; labels: rows entries in [0, K).
// loss = (1/B) sum_i [logsumexp(z_i) - z_{i,y_i}];  dL/dz_i = (softmax(z_i) - onehot(y_i)) / B.
// Writes the gradient into grad (rows x K) and returns the loss (double accumulation).
double SoftmaxCrossEntropy(const ConstMatrixRef& logits, const int32_t* labels, MatrixRef grad,
                           int64_t batch_rows = 0);

// Gaussian regression. outputs: rows x 2, column 0 the mean mu, column 1 the log-variance s.
// beta-NLL (Seitzer et al., ICLR 2022, "On the pitfalls of heteroscedastic uncertainty
// estimation"): each row's NLL is weighted by w_i = (sigma_i^2)^beta = e^{beta s_i}, with w_i held
// constant in the gradient (stop-gradient); beta = 0 is the plain Gaussian NLL.
// loss = (1/B) sum_i w_i 0.5 [s_i + (y_i - mu_i)^2 e^{-s_i} + ln 2pi];
// dL/dmu = -w (y - mu) e^{-s} / B;  dL/ds = w 0.5 (1 - (y - mu)^2 e^{-s}) / B.
double GaussianNll(const ConstMatrixRef& outputs, const float* targets, MatrixRef grad,
                   int64_t batch_rows = 0, float beta = 0.0f);

// The plain mean Gaussian NLL (beta 0) of outputs against targets, no gradient: the validation
// loss early stopping watches. rows >= 1.
double GaussianNllValue(const ConstMatrixRef& outputs, const float* targets);

// The mean softmax cross-entropy of logits against labels, no gradient. rows >= 1.
double SoftmaxCrossEntropyValue(const ConstMatrixRef& logits, const int32_t* labels);

// Row-wise softmax in double, for predictions: probs(i, k) = exp(z_ik - max) / sum.
MatrixD Softmax(const ConstMatrixRef& logits, double temperature = 1.0);

}  // namespace chorus
