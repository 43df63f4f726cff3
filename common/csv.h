// Reading a whole CSV file (training, validation and test data; common/csv_reader.h's dialect:
// RFC 4180, header row, comma separator, double-quoted fields with "" escapes that may span lines,
// CRLF or LF line ends, blank lines skipped, a UTF-8 byte order mark ignored) into rows of strings,
// through the same streaming reader `chorus predict` uses, so no record is ever held beyond its
// bound. Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/csv_reader.h"
#include "common/status.h"

namespace chorus {

// A parsed CSV file. Every row has header.size() fields (ragged rows are an error at parse time).
struct CsvTable {
  std::string path;                           // for messages
  int64_t header_line = 1;                    // 1-based line of the header row
  std::vector<std::string> header;            // column names, unique, non-empty
  std::vector<std::vector<std::string>> rows;  // data rows, header excluded
  std::vector<int64_t> lines;                 // 1-based line where each row starts
};

// Reads the file at `path`. Errors (kInvalidInput, "PATH[:LINE[:COLUMN]]: what was expected"): a
// missing or unreadable file, an empty file, no data rows, a duplicate or empty column name, a
// ragged row, an unterminated quote, characters after a closing quote, a record longer than
// max_record_bytes; the first malformed record ends the reading. A '"' inside an unquoted field
// is kept as a literal character. kIo for a failed read.
StatusOr<CsvTable> ReadCsv(const std::string& path,
                           int64_t max_record_bytes = CsvReader::kDefaultMaxRecordBytes);

// "PATH:LINE" of the table's header row, for messages.
std::string HeaderPlace(const CsvTable& table);

// The 0-based position of column `name` in the header. Errors (kInvalidInput, "PATH:LINE: expected
// a ROLE column "NAME" in the header, found ..."): no such column; `role` says what it is for.
StatusOr<int64_t> FindColumn(const CsvTable& table, const std::string& name, const char* role);

}  // namespace chorus
