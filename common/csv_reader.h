// Reading a CSV file one record at a time with bounded memory: chorus's one CSV parser, for
// training data (common/csv.h ReadCsv) and predict input alike. The dialect: RFC 4180, header row,
// comma separator, double-quoted fields with "" escapes that may span lines, CRLF or LF line
// ends (a lone CR is no line end, and a header holding one is refused as CR-only line ends),
// blank lines skipped, a UTF-8 byte order mark ignored. A gzip file is inflated as it is read
// (zlib recognises it by its magic bytes). A malformed record does not end the
// reading: it comes back with its problem, and the reader goes on after it, so a caller can skip
// bad rows (predict) or stop at the first (ReadCsv).
// Thread safety: a CsvReader is used by one thread at a time.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "common/status.h"

struct gzFile_s;  // zlib's gzFile

namespace chorus {

struct CsvRecord {
  int64_t line = 0;                 // 1-based line where the record starts
  std::vector<std::string> fields;  // header().size() fields when problem is ok
  Status problem;                   // "PATH:LINE:COLUMN: ..." for a malformed record, else ok
};

class CsvReader {
 public:
  static constexpr int64_t kDefaultMaxRecordBytes = int64_t{16} << 20;

  // Opens `path` and reads its header. Errors (kInvalidInput, naming PATH[:LINE:COLUMN]): the
  // file cannot be opened, is empty, or its header is malformed or has an empty or repeated name.
  static StatusOr<std::unique_ptr<CsvReader>> Open(
      const std::string& path, int64_t max_record_bytes = kDefaultMaxRecordBytes);
  ~CsvReader();
  CsvReader(const CsvReader&) = delete;
  CsvReader& operator=(const CsvReader&) = delete;

  const std::string& path() const { return path_; }
  const std::vector<std::string>& header() const { return header_; }
  int64_t header_line() const { return header_line_; }

  // Reads the next record into *record; returns false at the end of the file. A record with the
  // wrong number of fields, text after a closing quote (the rest of that line is skipped) or an
  // unterminated quote comes back with record->problem set. Errors (the reader is then spent):
  // kIo for a failed read; kInvalidInput for a gzip stream that is cut short or corrupt, or a
  // record longer than max_record_bytes.
  StatusOr<bool> Next(CsvRecord* record);

 private:
  CsvReader(gzFile_s* file, std::string path, int64_t max_record_bytes);

  int Peek(size_t ahead = 0);  // the byte `ahead` past the cursor, or -1 past the end
  void Advance();
  bool AtEnd() { return Peek() < 0; }
  bool AtLineEnd();  // at "\n", "\r\n", or a "\r" that ends the file
  void SkipLineEnd();
  void SkipBlankLines();
  void SkipRestOfLine();
  Status ReadRecord(CsvRecord* record);
  Status ReadQuoted(int64_t column, std::string* field, Status* problem);
  Status ReadUnquoted(std::string* field);
  Status Count(size_t bytes);  // adds to the record's size; fails past the bound
  std::string Where(int64_t line, int64_t column) const;

  gzFile_s* file_;  // zlib's gzFile
  std::string path_;
  int64_t max_record_bytes_;
  std::vector<char> buffer_;
  size_t begin_ = 0, end_ = 0;  // unread bytes are buffer_[begin_, end_)
  bool eof_ = false;
  Status read_error_;  // why reading stopped early; ok at a clean end
  int64_t line_ = 1;
  int64_t record_bytes_ = 0;
  std::vector<std::string> header_;
  int64_t header_line_ = 1;
};

}  // namespace chorus
