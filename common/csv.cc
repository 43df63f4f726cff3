#include "common/csv.h"

#include <algorithm>
#include <exception>
#include <memory>
#include <utility>

#include "common/message_text.h"

namespace chorus {

StatusOr<CsvTable> ReadCsv(const std::string& path, int64_t max_record_bytes) {
  try {
    CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<CsvReader> reader, CsvReader::Open(path, max_record_bytes));
    CsvTable table;
    table.path = path;
    table.header = reader->header();
    table.header_line = reader->header_line();
    CsvRecord record;
    while (true) {
      CHORUS_ASSIGN_OR_RETURN(const bool more, reader->Next(&record));
      if (!more) break;
      CHORUS_RETURN_IF_ERROR(record.problem);
      table.rows.push_back(std::move(record.fields));
      table.lines.push_back(record.line);
    }
    if (table.rows.empty()) {
      return Status::InvalidInput(path + ":" + std::to_string(table.header_line) +
                                  ": expected data rows after the header, found none");
    }
    return table;
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

std::string HeaderPlace(const CsvTable& table) {
  return table.path + ":" + std::to_string(table.header_line);
}

StatusOr<int64_t> FindColumn(const CsvTable& table, const std::string& name, const char* role) {
  const auto it = std::find(table.header.begin(), table.header.end(), name);
  if (it != table.header.end()) return static_cast<int64_t>(it - table.header.begin());
  return Status::InvalidInput(HeaderPlace(table) + ": expected a " + role + " column " +
                              Quoted(name) + " in the header, found " + JoinNames(table.header));
}

}  // namespace chorus
