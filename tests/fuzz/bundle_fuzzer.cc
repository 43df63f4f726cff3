// Fuzz target: bytes as a bundle file (proto/bundle_codec.h DecodeBundleFile, what `chorus
// predict` reads). The first input byte chooses how the rest is read: even, as the whole file
// (header, payload, checksum as they come); odd, as the payload, framed here with a valid header
// and checksum so that mutations reach the message decoding and the bundle checks behind the
// checksum (docs/bundle_format.md). An accepted bundle must be usable: the predictor builds from it (within a
// sample memory bound) and predicts a row of zeros with finite probabilities or moments.
#include <cmath>
#include <cstdlib>
#include <string>
#include <string_view>

#include "common/predictor.h"
#include "common/sha256.h"
#include "proto/bundle_codec.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  if (size == 0) return 0;
  const std::string_view rest(reinterpret_cast<const char*>(data) + 1, size - 1);
  std::string bytes(rest);
  if ((data[0] & 1) == 1) {
    bytes = std::string("\x89" "CHORUS\n", 8);
    for (const uint64_t field : {uint64_t{kBundleFormatVersion}, uint64_t{rest.size()}}) {
      for (size_t i = 0; i < (bytes.size() == 8 ? 4u : 8u); ++i) bytes += static_cast<char>(field >> (8 * i));
    }
    bytes += rest;
    bytes += Sha256Hex(rest.data(), rest.size());
  }
  const StatusOr<BundleFile> file = DecodeBundleFile(bytes, "fuzz.chorus");
  if (!file.ok()) return 0;
  const StatusOr<Predictor> predictor =
      Predictor::Create(file.value().bundle, nullptr, /*max_sample_bytes=*/int64_t{64} << 20);
  if (!predictor.ok()) return 0;  // refused for its memory, with a message
  const Matrix x = Matrix::Zero(1, predictor.value().Features());
  const Prediction p = predictor.value().Predict(x);
  if (predictor.value().task() == Task::kClassification) {
    if (!std::isfinite(p.classification.probabilities.sum())) std::abort();
  } else if (!std::isfinite(p.regression.mean[0]) || !std::isfinite(p.regression.total_std[0])) {
    std::abort();
  }
  return 0;
}
