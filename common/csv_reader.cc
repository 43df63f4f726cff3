#include "common/csv_reader.h"

#include <zlib.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <set>

namespace chorus {
namespace {

constexpr size_t kBufferBytes = size_t{1} << 16;

}  // namespace

StatusOr<std::unique_ptr<CsvReader>> CsvReader::Open(const std::string& path,
                                                     int64_t max_record_bytes) {
  gzFile file = gzopen(path.c_str(), "rb");  // a gzip file is inflated, any other read as is
  if (file == nullptr) {
    return Status::InvalidInput(path + ": cannot open file: " + std::strerror(errno));
  }
  std::unique_ptr<CsvReader> reader(new CsvReader(file, path, max_record_bytes));
  if (reader->Peek() == 0xEF && reader->Peek(1) == 0xBB && reader->Peek(2) == 0xBF) {
    for (int i = 0; i < 3; ++i) reader->Advance();  // a UTF-8 byte order mark
  }
  CsvRecord header;
  CHORUS_ASSIGN_OR_RETURN(const bool found, reader->Next(&header));
  if (!found) return Status::InvalidInput(path + ": file is empty");
  if (!header.problem.ok()) return header.problem;
  std::set<std::string> seen;
  for (size_t i = 0; i < header.fields.size(); ++i) {
    const std::string& name = header.fields[i];
    const std::string where = reader->Where(header.line, static_cast<int64_t>(i) + 1);
    if (name.empty()) return Status::InvalidInput(where + ": expected a column name, found \"\"");
    if (name.find('\r') != std::string::npos) {
      return Status::InvalidInput(where + ": a carriage return inside the header: expected LF or CRLF "
                                  "line ends (a file with CR-only line ends, as old Mac programs wrote, "
                                  "must be converted first)");
    }
    if (!seen.insert(name).second) {
      return Status::InvalidInput(where + ": duplicate column name \"" + name + "\"");
    }
  }
  reader->header_ = std::move(header.fields);
  reader->header_line_ = header.line;
  return reader;
}

CsvReader::CsvReader(gzFile_s* file, std::string path, int64_t max_record_bytes)
    : file_(file),
      path_(std::move(path)),
      max_record_bytes_(max_record_bytes),
      buffer_(kBufferBytes) {}

CsvReader::~CsvReader() { gzclose(file_); }

int CsvReader::Peek(size_t ahead) {
  while (end_ - begin_ <= ahead && !eof_) {
    std::memmove(buffer_.data(), buffer_.data() + begin_, end_ - begin_);
    end_ -= begin_;
    begin_ = 0;
    const int got = gzread(file_, buffer_.data() + end_, static_cast<unsigned>(buffer_.size() - end_));
    if (got > 0) end_ += static_cast<size_t>(got);
    if (got <= 0) {
      eof_ = true;
      int code = Z_OK;
      std::string message = gzerror(file_, &code);
      if (message.rfind(path_ + ": ", 0) == 0) message.erase(0, path_.size() + 2);  // zlib names the file
      if (code == Z_ERRNO) {
        read_error_ = Status::Io(path_ + ": read failed: " + std::strerror(errno));
      } else if (code != Z_OK) {  // a gzip stream cut short or corrupt: bad input
        read_error_ = Status::InvalidInput(path_ + ": bad gzip data: " + message);
      }
    }
  }
  return end_ - begin_ > ahead ? static_cast<unsigned char>(buffer_[begin_ + ahead]) : -1;
}

void CsvReader::Advance() { ++begin_; }

bool CsvReader::AtLineEnd() {
  const int c = Peek();
  if (c == '\n') return true;
  return c == '\r' && (Peek(1) == '\n' || Peek(1) < 0);
}

void CsvReader::SkipLineEnd() {
  if (Peek() == '\r') Advance();
  if (Peek() == '\n') Advance();
  ++line_;
}

void CsvReader::SkipBlankLines() {
  while (AtLineEnd()) SkipLineEnd();
}

void CsvReader::SkipRestOfLine() {
  while (!AtEnd() && !AtLineEnd()) Advance();
  if (!AtEnd()) SkipLineEnd();
}

std::string CsvReader::Where(int64_t line, int64_t column) const {
  return path_ + ":" + std::to_string(line) + ":" + std::to_string(column);
}

Status CsvReader::Count(size_t bytes) {
  record_bytes_ += static_cast<int64_t>(bytes);
  if (record_bytes_ <= max_record_bytes_) return Status::Ok();
  return Status::InvalidInput(path_ + ":" + std::to_string(line_) + ": a record longer than " +
                              std::to_string(max_record_bytes_) + " bytes (an unterminated " +
                              "quote?)");
}

Status CsvReader::ReadUnquoted(std::string* field) {
  while (!AtEnd() && Peek() != ',' && !AtLineEnd()) {
    field->push_back(static_cast<char>(Peek()));
    Advance();
    CHORUS_RETURN_IF_ERROR(Count(1));
  }
  return Status::Ok();
}

Status CsvReader::ReadQuoted(int64_t column, std::string* field, Status* problem) {
  const int64_t start_line = line_;
  Advance();  // the opening quote
  while (true) {
    const int c = Peek();
    if (c < 0) {
      *problem = Status::InvalidInput(Where(start_line, column) + ": expected a closing '\"' " +
                                      "for the quoted field, found the end of the file");
      return Status::Ok();
    }
    Advance();
    CHORUS_RETURN_IF_ERROR(Count(1));
    if (c == '"') {
      if (Peek() != '"') break;
      Advance();  // "" is an escaped quote
    } else if (c == '\n') {
      ++line_;
    }
    field->push_back(static_cast<char>(c));
  }
  if (AtEnd() || Peek() == ',' || AtLineEnd()) return Status::Ok();
  *problem = Status::InvalidInput(Where(line_, column) + ": expected ',' or the end of the line " +
                                  "after a closing '\"', found '" +
                                  std::string(1, static_cast<char>(Peek())) + "'");
  SkipRestOfLine();
  return Status::Ok();
}

// Reads one record's fields; a malformed one stops at the problem (fatal errors are returned).
Status CsvReader::ReadRecord(CsvRecord* record) {
  while (true) {
    std::string field;
    const int64_t column = static_cast<int64_t>(record->fields.size()) + 1;
    if (Peek() == '"') {
      CHORUS_RETURN_IF_ERROR(ReadQuoted(column, &field, &record->problem));
    } else {
      CHORUS_RETURN_IF_ERROR(ReadUnquoted(&field));
    }
    record->fields.push_back(std::move(field));
    if (!record->problem.ok() || AtEnd()) return Status::Ok();
    if (Peek() != ',') break;
    Advance();
  }
  SkipLineEnd();
  return Status::Ok();
}

StatusOr<bool> CsvReader::Next(CsvRecord* record) {
  SkipBlankLines();
  if (AtEnd()) {
    if (!read_error_.ok()) return read_error_;
    return false;
  }
  record->line = line_;
  record->fields.clear();
  record->problem = Status::Ok();
  record_bytes_ = 0;
  CHORUS_RETURN_IF_ERROR(ReadRecord(record));
  if (!read_error_.ok()) return read_error_;
  const size_t expected = header_.size();
  if (record->problem.ok() && !header_.empty() && record->fields.size() != expected) {
    const size_t column = std::min(record->fields.size(), expected) + 1;
    record->problem = Status::InvalidInput(
        Where(record->line, static_cast<int64_t>(column)) + ": expected " +
        std::to_string(expected) + " fields, found " + std::to_string(record->fields.size()));
  }
  return true;
}

}  // namespace chorus
