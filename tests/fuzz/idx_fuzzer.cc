// Fuzz target: IDX bytes, plain or gzip, through both readers: ReadIdx (the whole file, training
// data) and IdxReader (row batches, predict input). When ReadIdx accepts a file, IdxReader must
// give the same rows with the same values.
#include <algorithm>
#include <cstdlib>
#include <cstring>
#include <vector>

#include "common/idx.h"
#include "common/idx_reader.h"
#include "tests/fuzz/fuzz_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  const std::string path = fuzz::WriteScratchFile(data, size, ".idx");
  const StatusOr<IdxArray> whole = ReadIdx(path);
  StatusOr<std::unique_ptr<IdxReader>> reader = IdxReader::Open(path);
  if (!reader.ok()) {
    if (whole.ok() && whole.value().dims.size() > 0 &&
        whole.value().values.size() / static_cast<size_t>(whole.value().dims[0]) <=
            static_cast<size_t>(IdxReader::kMaxRowElements)) {
      std::abort();  // ReadIdx accepted a file IdxReader refuses
    }
    return 0;
  }
  IdxReader& r = *reader.value();
  const int64_t batch_rows = std::max<int64_t>(1, std::min<int64_t>(64, (int64_t{1} << 16) / r.RowElements()));
  std::vector<float> batch(static_cast<size_t>(batch_rows * r.RowElements()));
  std::vector<float> rows_read;
  while (true) {
    const StatusOr<int64_t> got = r.Read(batch_rows, batch.data());
    if (!got.ok()) {
      if (whole.ok()) std::abort();  // IdxReader failed on a file ReadIdx accepted
      return 0;
    }
    if (got.value() == 0) break;
    rows_read.insert(rows_read.end(), batch.begin(), batch.begin() + got.value() * r.RowElements());
  }
  if (whole.ok() && (rows_read.size() != whole.value().values.size() ||
                     std::memcmp(rows_read.data(), whole.value().values.data(),
                                 rows_read.size() * sizeof(float)) != 0)) {
    std::abort();
  }
  return 0;
}
