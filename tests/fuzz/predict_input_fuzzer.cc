// Fuzz target: a file as `chorus predict` input (common/prediction_input.h, format auto: IDX when
// it starts with two zero bytes, else CSV), read in batches with bad rows skipped, for one of two
// bundles' preprocessing chosen by the first input byte: CSV columns a (numeric), b (categorical:
// x, y) and c (numeric) with target t; or IDX-like numeric columns x0..x3. Every row read must
// be finite after standardisation, and ids must increase.
#include <cmath>
#include <cstdlib>

#include "common/bundle.h"
#include "common/prediction_input.h"
#include "tests/fuzz/fuzz_file.h"

namespace {

chorus::Preprocessing MakePreprocessing(bool csv) {
  chorus::Preprocessing p;
  if (csv) {
    p.format = "csv";
    p.target = "t";
    p.plan.columns = {{"a", false, 0}, {"b", true, 0}, {"c", false, 1}};
    p.plan.categorical = {{"b", {"x", "y"}}};
  } else {
    p.format = "idx";
    for (int j = 0; j < 4; ++j) p.plan.columns.push_back({"x" + std::to_string(j), false, j});
  }
  p.standardizer.mean.assign(4, 0.5f);
  p.standardizer.scale.assign(4, 2.0f);
  return p;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  if (size == 0) return 0;
  static const Preprocessing kCsv = MakePreprocessing(true), kIdx = MakePreprocessing(false);
  const Preprocessing& p = (data[0] & 1) == 0 ? kCsv : kIdx;
  const std::string path = fuzz::WriteScratchFile(data + 1, size - 1, ".input");
  StatusOr<std::unique_ptr<InputReader>> reader = InputReader::Open(path, InputFormat::kAuto, p);
  if (!reader.ok()) return 0;
  const BadRowFn skip = [](const Status&) { return Status::Ok(); };
  InputBatch batch;
  int64_t last_id = -1;
  while (true) {
    const StatusOr<bool> more = reader.value()->Next(8, skip, &batch);
    if (!more.ok() || !more.value()) return 0;
    if (batch.x.cols() != 4 || batch.x.rows() != static_cast<int64_t>(batch.ids.size())) std::abort();
    for (int64_t r = 0; r < batch.x.rows(); ++r) {
      if (batch.ids[r] <= last_id) std::abort();
      last_id = batch.ids[r];
      for (int64_t c = 0; c < 4; ++c) {
        if (!std::isfinite(batch.x(r, c))) std::abort();
      }
    }
  }
}
