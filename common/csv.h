// Reading CSV text (RFC 4180: header row, comma separator, double-quoted fields with "" escapes,
// CRLF or LF line ends, quoted fields may span lines) into rows of strings.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

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

// Parses `text`; `path` is only used in messages ("PATH:LINE:COLUMN: what was expected").
// Errors (kInvalidInput): empty input, no data rows, duplicate or empty column name, ragged row,
// unterminated quote, characters after a closing quote. A trailing newline is allowed; blank
// lines are skipped; a '"' inside an unquoted field is kept as a literal character.
StatusOr<CsvTable> ParseCsv(std::string_view text, const std::string& path);

// Reads and parses a file; a missing/unreadable file is kInvalidInput naming the path.
StatusOr<CsvTable> ReadCsv(const std::string& path);

// "PATH:LINE" of the table's header row, for messages.
std::string HeaderPlace(const CsvTable& table);

// The 0-based position of column `name` in the header. Errors (kInvalidInput, "PATH:LINE: expected
// a ROLE column "NAME" in the header, found ..."): no such column; `role` says what it is for.
StatusOr<int64_t> FindColumn(const CsvTable& table, const std::string& name, const char* role);

}  // namespace chorus
