// Fuzz target: CSV text through both readers, ParseCsv (whole file, training data) and CsvReader
// (record by record, predict input). Besides not crashing, they must agree: when ParseCsv accepts
// the text, CsvReader reads the same header and the same records, starting on the same lines,
// with no problem on any of them.
#include <cstdlib>
#include <string_view>

#include "common/csv.h"
#include "common/csv_reader.h"
#include "tests/fuzz/fuzz_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  const StatusOr<CsvTable> table =
      ParseCsv(std::string_view(reinterpret_cast<const char*>(data), size), "fuzz.csv");
  const std::string path = fuzz::WriteScratchFile(data, size, ".csv");
  StatusOr<std::unique_ptr<CsvReader>> reader = CsvReader::Open(path);
  if (!table.ok()) {
    if (!reader.ok()) return 0;
    CsvRecord record;  // read on: a record-level problem is fine, a crash is not
    while (true) {
      const StatusOr<bool> more = reader.value()->Next(&record);
      if (!more.ok() || !more.value()) return 0;
    }
  }
  if (!reader.ok()) std::abort();  // ParseCsv accepted a header CsvReader refuses
  const CsvTable& t = table.value();
  if (reader.value()->header() != t.header || reader.value()->header_line() != t.header_line) std::abort();
  CsvRecord record;
  for (size_t r = 0; r < t.rows.size(); ++r) {
    const StatusOr<bool> more = reader.value()->Next(&record);
    if (!more.ok() || !more.value() || !record.problem.ok()) std::abort();
    if (record.fields != t.rows[r] || record.line != t.lines[r]) std::abort();
  }
  const StatusOr<bool> more = reader.value()->Next(&record);
  if (!more.ok() || more.value()) std::abort();  // CsvReader found a record ParseCsv did not
  return 0;
}
