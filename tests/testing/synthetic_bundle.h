// Small, valid bundles with seeded random weights, for tests of the bundle format and the
// predictor that need no training run. Thread safety: reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/bundle.h"

namespace chorus::testing {

struct SyntheticBundleSpec {
  Task task = Task::kClassification;
  std::vector<int> hidden = {6};
  int numeric_columns = 3;
  bool categorical_column = true;  // adds column "site" with vocabulary {east, north, west}
  int classes = 3;                 // classification only
  // Members: first a trained point (no basin fit), then the given basin methods (a
  // laplace_last_layer member needs a hidden layer).
  std::vector<BasinMethod> basins = {BasinMethod::kGaussianDiag, BasinMethod::kGaussianLowRank};
  int samples = 3;  // per member with a basin fit
  int rank = 3;     // deviation rows of low-rank fits
  uint64_t seed = 11;
  Activation activation = Activation::kRelu;
  // Convolution stages (common/conv_front.h) on an image of image.size() numeric columns: set
  // numeric_columns to image.size() and categorical_column to false with them.
  ImageShape image;
  std::vector<ConvStage> conv;
};

// A bundle CheckBundle accepts: weights drawn N(0, 0.3^2) from Philox(seed), variances
// uniform in [0, 0.01), unequal member weights summing to 1, temperature 1.3.
Bundle SyntheticBundle(const SyntheticBundleSpec& spec);

// A bundle file around `payload` exactly as docs/bundle_format.md lays it out, built
// independently of the codec: magic, little-endian version and length, payload, SHA-256 hex.
std::string FrameBundlePayload(const std::string& payload, uint32_t version = 1);

// Standardised inputs for the bundle: rows x features, N(0, 1) from Philox(seed).
Matrix RandomInputs(int64_t rows, int64_t features, uint64_t seed);

}  // namespace chorus::testing
