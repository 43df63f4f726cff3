// proto/result_codec: the hand-written encoder must write exactly the bytes libprotobuf writes for
// the same JobResult message (the reference below builds that message the plain way), in one
// string or streamed in pieces, and decode back to the same result.
#include "proto/result_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <utility>

#include "common/rng.h"
#include "job.pb.h"

namespace chorus {
namespace result_codec_test {

void MatrixToWire(const Matrix& m, wire::FloatMatrix* out) {
  out->set_rows(m.rows());
  out->set_cols(m.cols());
  out->mutable_values()->Add(m.data(), m.data() + m.size());
}

// The JobResult message for `r`, serialised by libprotobuf (deterministic mode).
std::string ReferenceBytes(const MemberResult& r, const std::vector<int>& widths,
                           const std::string& data_hash, const std::string& config_hash) {
  wire::JobResult msg;
  msg.set_format_version(kJobResultFormatVersion);
  msg.set_member_index(r.index);
  msg.set_seed(r.seed);
  msg.set_data_hash(data_hash);
  msg.set_config_hash(config_hash);
  msg.mutable_widths()->Add(widths.begin(), widths.end());
  msg.mutable_parameters()->Add(r.parameters.begin(), r.parameters.end());
  msg.mutable_epoch_loss()->Add(r.epoch_loss.begin(), r.epoch_loss.end());
  MatrixToWire(r.validation_outputs, msg.mutable_validation_outputs());
  MatrixToWire(r.test_outputs, msg.mutable_test_outputs());
  if (r.basin.method != BasinMethod::kNone) {
    wire::BasinFit* b = msg.mutable_basin();
    b->set_method(BasinMethodName(r.basin.method));
    b->mutable_mean()->Add(r.basin.mean.begin(), r.basin.mean.end());
    b->mutable_variance()->Add(r.basin.variance.begin(), r.basin.variance.end());
    MatrixToWire(r.basin.deviations, b->mutable_deviations());
    if (r.basin.method == BasinMethod::kLaplaceLastLayer) {
      const LaplaceFactors& f = r.basin.laplace;
      wire::LaplaceFactors* l = b->mutable_laplace();
      l->set_form(LaplaceFormName(f.form));
      l->set_outputs(f.outputs);
      l->set_prior_precision(f.prior_precision);
      MatrixToWire(f.eigenvectors, l->mutable_eigenvectors());
      l->mutable_eigenvalues()->Add(f.eigenvalues.begin(), f.eigenvalues.end());
      MatrixToWire(f.output_eigenvectors, l->mutable_output_eigenvectors());
      l->mutable_output_eigenvalues()->Add(f.output_eigenvalues.begin(), f.output_eigenvalues.end());
    }
    if (r.basin.method == BasinMethod::kCyclicalSgmcmc) MatrixToWire(r.basin.samples, b->mutable_samples());
    msg.mutable_sample_seeds()->Add(r.sample_seeds.begin(), r.sample_seeds.end());
    for (const Matrix& m : r.sample_validation_outputs) MatrixToWire(m, msg.add_sample_validation_outputs());
    for (const Matrix& m : r.sample_test_outputs) MatrixToWire(m, msg.add_sample_test_outputs());
  }
  msg.set_role(JobRoleName(r.role));
  msg.set_point(r.point);
  msg.set_fold(r.fold);
  msg.mutable_validation_nll()->Add(r.validation_nll.begin(), r.validation_nll.end());
  msg.set_best_epoch(r.best_epoch);
  std::string bytes;
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    msg.SerializeToCodedStream(&coded);
  }
  return bytes;
}

Matrix RandomMatrix(Philox& rng, int64_t rows, int64_t cols) {
  Matrix m(rows, cols);
  for (int64_t i = 0; i < m.size(); ++i) m.data()[i] = static_cast<float>(rng.NextNormal());
  return m;
}

// A result with `parameters` weights, a basin fit of `method` (rank 3) and `samples` samples.
MemberResult RandomResult(uint64_t seed, int64_t parameters, BasinMethod method, int samples) {
  Philox rng(seed);
  MemberResult r;
  r.index = static_cast<int>(rng.NextBelow(40));
  r.seed = rng.NextBelow(2) == 0 ? 0 : Derive(seed, 1) | (uint64_t{1} << 63);
  for (int64_t i = 0; i < parameters; ++i) r.parameters.push_back(static_cast<float>(rng.NextNormal()));
  for (int e = 0; e < 3; ++e) r.epoch_loss.push_back(rng.NextNormal());
  r.role = static_cast<JobRole>(seed % 3);
  r.point = static_cast<int>(rng.NextBelow(3));     // 0: left out of the message
  r.fold = static_cast<int>(rng.NextBelow(4)) - 1;  // -1: ten bytes; 0: left out
  for (int e = 0; e < static_cast<int>(seed % 4); ++e) r.validation_nll.push_back(rng.NextUniform());
  r.best_epoch = static_cast<int>(rng.NextBelow(4));
  r.validation_outputs = RandomMatrix(rng, 7, 3);
  r.test_outputs = RandomMatrix(rng, 5, 3);
  if (method == BasinMethod::kNone) return r;
  r.basin.method = method;
  r.basin.mean = r.parameters;
  if (method == BasinMethod::kLaplaceLastLayer) {
    // A Kronecker fit over the last (2 + 1) x 3 weights for odd seeds, an exact one otherwise.
    LaplaceFactors& f = r.basin.laplace;
    f.outputs = 3;
    f.prior_precision = 0.25 + rng.NextUniform();
    f.form = seed % 2 == 1 ? LaplaceForm::kKronecker : LaplaceForm::kFull;
    const int n = f.form == LaplaceForm::kFull ? 9 : 3;
    f.eigenvectors = RandomMatrix(rng, n, n);
    for (int i = 0; i < n; ++i) f.eigenvalues.push_back(static_cast<float>(rng.NextUniform()));
    if (f.form == LaplaceForm::kKronecker) {
      f.output_eigenvectors = RandomMatrix(rng, 3, 3);
      for (int i = 0; i < 3; ++i) f.output_eigenvalues.push_back(static_cast<float>(rng.NextUniform()));
    }
  } else if (method == BasinMethod::kCyclicalSgmcmc) {
    r.basin.samples = RandomMatrix(rng, samples, parameters);
  } else {
    for (int64_t i = 0; i < parameters; ++i) r.basin.variance.push_back(static_cast<float>(rng.NextUniform()));
  }
  if (method == BasinMethod::kGaussianLowRank) r.basin.deviations = RandomMatrix(rng, 3, parameters);
  for (int s = 0; s < samples; ++s) {
    r.sample_seeds.push_back(method == BasinMethod::kCyclicalSgmcmc ? static_cast<uint64_t>(s)
                                                                    : Derive(seed, 100 + static_cast<uint64_t>(s)));
    r.sample_validation_outputs.push_back(RandomMatrix(rng, 7, 3));
    r.sample_test_outputs.push_back(RandomMatrix(rng, 5, 3));
  }
  return r;
}

const std::vector<int> kWidths = {4, 6, 3};
const std::string kDataHash(64, 'a');
const std::string kConfigHash(64, 'b');

TEST(ResultCodecTest, BytesEqualLibprotobufsSerialisationOfTheMessage) {
  for (uint64_t seed = 1; seed <= 6; ++seed) {
    for (BasinMethod method : {BasinMethod::kNone, BasinMethod::kGaussianDiag, BasinMethod::kGaussianLowRank,
                                BasinMethod::kLaplaceLastLayer, BasinMethod::kCyclicalSgmcmc}) {
      const MemberResult r = RandomResult(seed, 51, method, static_cast<int>(seed % 3) + 1);
      SCOPED_TRACE("seed " + std::to_string(seed) + ", " + BasinMethodName(method));
      EXPECT_EQ(EncodeJobResult(r, kWidths, kDataHash, kConfigHash),
                ReferenceBytes(r, kWidths, kDataHash, kConfigHash));
    }
  }
}

TEST(ResultCodecTest, DefaultsNegativeIndexAndEmptyFieldsAreWrittenAsLibprotobufWritesThem) {
  MemberResult empty;  // index 0, seed 0, no parameters, 0 x 0 outputs: proto3 leaves them out
  EXPECT_EQ(EncodeJobResult(empty, {}, "", ""), ReferenceBytes(empty, {}, "", ""));
  MemberResult odd = RandomResult(9, 5, BasinMethod::kGaussianLowRank, 0);
  odd.index = -3;                       // int32: a ten-byte varint
  odd.validation_outputs.resize(0, 3);  // rows 0, cols 3
  odd.basin.deviations.resize(0, 5);
  EXPECT_EQ(EncodeJobResult(odd, {7, -1}, kDataHash, ""), ReferenceBytes(odd, {7, -1}, kDataHash, ""));
}

TEST(ResultCodecTest, StreamedPiecesAreBoundedAndConcatenateToTheEncoding) {
  // 3 deviations + mean + variance + parameters of 200k floats: about 4.8 MB, several pieces.
  const MemberResult r = RandomResult(4, 200000, BasinMethod::kGaussianLowRank, 2);
  std::string streamed;
  int pieces = 0;
  const bool ok = WriteJobResult(r, kWidths, kDataHash, kConfigHash, [&](const char* data, size_t n) {
    EXPECT_GT(n, 0u);
    EXPECT_LE(n, kResultPieceBytes);
    streamed.append(data, n);
    ++pieces;
    return true;
  });
  EXPECT_TRUE(ok);
  EXPECT_GE(pieces, 4);
  EXPECT_EQ(streamed, ReferenceBytes(r, kWidths, kDataHash, kConfigHash));
}

TEST(ResultCodecTest, ASinkThatRefusesStopsTheEncoding) {
  const MemberResult r = RandomResult(5, 600000, BasinMethod::kGaussianLowRank, 1);
  int calls = 0;
  const bool ok = WriteJobResult(r, kWidths, kDataHash, kConfigHash, [&](const char*, size_t) {
    return ++calls < 2;
  });
  EXPECT_FALSE(ok);
  EXPECT_EQ(calls, 2);
}

TEST(ResultCodecTest, DecodingTheEncodingGivesTheResultBack) {
  const MemberResult r = RandomResult(6, 77, BasinMethod::kGaussianLowRank, 3);
  StatusOr<MemberResult> back =
      DecodeJobResult(EncodeJobResult(r, kWidths, kDataHash, kConfigHash), "test", kDataHash, kConfigHash);
  ASSERT_TRUE(back.ok()) << back.status().ToString();
  const MemberResult& b = back.value();
  EXPECT_EQ(b.index, r.index);
  EXPECT_EQ(b.seed, r.seed);
  EXPECT_EQ(b.parameters, r.parameters);
  EXPECT_EQ(b.epoch_loss, r.epoch_loss);
  EXPECT_EQ(b.role, r.role);
  EXPECT_EQ(b.point, r.point);
  EXPECT_EQ(b.fold, r.fold);
  EXPECT_EQ(b.validation_nll, r.validation_nll);
  EXPECT_EQ(b.best_epoch, r.best_epoch);
  EXPECT_EQ(b.basin.mean, r.basin.mean);
  EXPECT_EQ(b.basin.variance, r.basin.variance);
  EXPECT_TRUE(b.basin.deviations == r.basin.deviations);
  EXPECT_EQ(b.sample_seeds, r.sample_seeds);
  ASSERT_EQ(b.sample_test_outputs.size(), r.sample_test_outputs.size());
  for (size_t s = 0; s < r.sample_test_outputs.size(); ++s) {
    EXPECT_TRUE(b.sample_test_outputs[s] == r.sample_test_outputs[s]);
    EXPECT_TRUE(b.sample_validation_outputs[s] == r.sample_validation_outputs[s]);
  }
  EXPECT_TRUE(b.validation_outputs == r.validation_outputs);
  EXPECT_TRUE(b.test_outputs == r.test_outputs);
}

}  // namespace result_codec_test
}  // namespace chorus

namespace chorus {
namespace result_codec_test {

TEST(ResultCodecTest, LaplaceFitsRoundTripAndBadFactorsAreRefused) {
  for (uint64_t seed : {7, 8}) {  // a Kronecker fit, then an exact one
    const MemberResult r = RandomResult(seed, 51, BasinMethod::kLaplaceLastLayer, 2);
    SCOPED_TRACE(LaplaceFormName(r.basin.laplace.form));
    StatusOr<MemberResult> back =
        DecodeJobResult(EncodeJobResult(r, kWidths, kDataHash, kConfigHash), "test", kDataHash, kConfigHash);
    ASSERT_TRUE(back.ok()) << back.status().ToString();
    const LaplaceFactors &a = back.value().basin.laplace, &b = r.basin.laplace;
    EXPECT_EQ(back.value().basin.method, BasinMethod::kLaplaceLastLayer);
    EXPECT_EQ(a.form, b.form);
    EXPECT_EQ(a.outputs, b.outputs);
    EXPECT_EQ(a.prior_precision, b.prior_precision);
    EXPECT_TRUE(a.eigenvectors == b.eigenvectors);
    EXPECT_EQ(a.eigenvalues, b.eigenvalues);
    EXPECT_TRUE(a.output_eigenvectors == b.output_eigenvectors);
    EXPECT_EQ(a.output_eigenvalues, b.output_eigenvalues);
  }
  // Collected samples: a seed naming no row is refused.
  MemberResult collected = RandomResult(9, 51, BasinMethod::kCyclicalSgmcmc, 2);
  ASSERT_TRUE(DecodeJobResult(EncodeJobResult(collected, kWidths, kDataHash, kConfigHash), "r.pb", kDataHash,
                              kConfigHash).ok());
  collected.sample_seeds[1] = 2;
  const StatusOr<MemberResult> beyond =
      DecodeJobResult(EncodeJobResult(collected, kWidths, kDataHash, kConfigHash), "r.pb", kDataHash, kConfigHash);
  ASSERT_FALSE(beyond.ok());
  EXPECT_NE(beyond.status().message().find("r.pb: collected samples: sample 2 of 2"), std::string::npos)
      << beyond.status().ToString();
  const MemberResult good = RandomResult(8, 51, BasinMethod::kLaplaceLastLayer, 1);
  const std::pair<const char*, std::function<void(LaplaceFactors&)>> breakages[] = {
      {"negative eigenvalue", [](LaplaceFactors& f) { f.eigenvalues[2] = -1.0f; }},
      {"eigenvalue count", [](LaplaceFactors& f) { f.eigenvalues.pop_back(); }},
      {"zero prior", [](LaplaceFactors& f) { f.prior_precision = 0; }},
      {"outputs not dividing the layer", [](LaplaceFactors& f) { f.outputs = 4; }},
      {"layer beyond the parameters", [](LaplaceFactors& f) { f.eigenvectors = Matrix::Zero(60, 60); }},
      {"not finite", [](LaplaceFactors& f) { f.eigenvectors(0, 1) = std::nanf(""); }}};
  for (const auto& [name, corrupt] : breakages) {
    SCOPED_TRACE(name);
    MemberResult bad = good;
    corrupt(bad.basin.laplace);
    if (bad.basin.laplace.eigenvectors.rows() == 60) bad.basin.laplace.eigenvalues.assign(60, 1.0f);
    const StatusOr<MemberResult> back =
        DecodeJobResult(EncodeJobResult(bad, kWidths, kDataHash, kConfigHash), "r.pb", kDataHash, kConfigHash);
    ASSERT_FALSE(back.ok());
    EXPECT_NE(back.status().message().find("r.pb: laplace fit"), std::string::npos) << back.status().ToString();
  }
}

}  // namespace result_codec_test
}  // namespace chorus
