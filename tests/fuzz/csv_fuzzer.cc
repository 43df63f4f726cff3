// Fuzz target: a file as CSV, read both ways chorus reads CSV: ReadCsv (training data: the
// first malformed record ends the reading) and CsvReader going on past malformed records (predict
// with --skip-bad-rows). Besides not crashing: when ReadCsv accepts the file, its rows are
// exactly the records CsvReader returns, none with a problem; when it refuses a file whose header
// CsvReader accepts, CsvReader meets a problem or an error too.
#include <cstdlib>

#include "common/csv.h"
#include "common/csv_reader.h"
#include "tests/fuzz/fuzz_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  const std::string path = fuzz::WriteScratchFile(data, size, ".csv");
  const int64_t max_record_bytes = 4096;  // small, so that the bound is reached too
  const StatusOr<CsvTable> table = ReadCsv(path, max_record_bytes);
  StatusOr<std::unique_ptr<CsvReader>> reader = CsvReader::Open(path, max_record_bytes);
  if (!reader.ok()) {
    if (table.ok()) std::abort();  // ReadCsv accepted a header CsvReader refuses
    return 0;
  }
  size_t rows = 0;
  bool trouble = false;
  CsvRecord record;
  while (true) {
    const StatusOr<bool> more = reader.value()->Next(&record);
    if (!more.ok()) {
      trouble = true;
      break;
    }
    if (!more.value()) break;
    if (!record.problem.ok()) {
      trouble = true;
      continue;
    }
    if (table.ok() && (rows >= table.value().rows.size() || record.fields != table.value().rows[rows] ||
                       record.line != table.value().lines[rows])) {
      std::abort();
    }
    ++rows;
  }
  if (table.ok() && (trouble || rows != table.value().rows.size())) std::abort();
  if (!table.ok() && !trouble && rows > 0) std::abort();  // refused a file that reads cleanly
  return 0;
}
