#include "common/csv.h"

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <exception>
#include <set>
#include <utility>

#include "common/message_text.h"

namespace chorus {
namespace {

// A single-pass RFC 4180 reader over one text buffer. It tracks the physical line so that every
// message can name PATH:LINE:COLUMN, where COLUMN is the 1-based field number.
class CsvParser {
 public:
  CsvParser(std::string_view text, const std::string& path) : text_(text), path_(path) {}

  StatusOr<CsvTable> Parse();

 private:
  bool AtEnd() const { return pos_ >= text_.size(); }
  // True at "\n", "\r\n", or a "\r" that ends the text.
  bool AtLineEnd() const;
  void SkipLineEnd();
  void SkipBlankLines();
  Status ParseRecord(std::vector<std::string>* fields);
  Status ParseQuotedField(int64_t column, std::string* field);
  void ParseUnquotedField(std::string* field);
  Status CheckHeader(const CsvTable& table) const;
  std::string Where(int64_t line, int64_t column) const;

  std::string_view text_;
  const std::string& path_;
  size_t pos_ = 0;
  int64_t line_ = 1;
};

bool CsvParser::AtLineEnd() const {
  if (AtEnd()) return false;
  if (text_[pos_] == '\n') return true;
  return text_[pos_] == '\r' && (pos_ + 1 == text_.size() || text_[pos_ + 1] == '\n');
}

void CsvParser::SkipLineEnd() {
  pos_ += text_[pos_] == '\r' ? 2 : 1;
  ++line_;
}

void CsvParser::SkipBlankLines() {
  while (AtLineEnd()) SkipLineEnd();
}

std::string CsvParser::Where(int64_t line, int64_t column) const {
  return path_ + ":" + std::to_string(line) + ":" + std::to_string(column);
}

Status CsvParser::ParseQuotedField(int64_t column, std::string* field) {
  const int64_t start_line = line_;
  ++pos_;  // the opening quote
  while (true) {
    if (AtEnd()) {
      return Status::InvalidInput(Where(start_line, column) +
                                  ": expected a closing '\"' for the quoted field, found the end "
                                  "of the file");
    }
    const char c = text_[pos_++];
    if (c == '"') {
      if (AtEnd() || text_[pos_] != '"') break;
      ++pos_;  // "" is an escaped quote
    } else if (c == '\n') {
      ++line_;
    }
    *field += c;
  }
  if (AtEnd() || text_[pos_] == ',' || AtLineEnd()) return Status::Ok();
  return Status::InvalidInput(Where(line_, column) +
                              ": expected ',' or the end of the line after a closing '\"', "
                              "found '" +
                              std::string(1, text_[pos_]) + "'");
}

void CsvParser::ParseUnquotedField(std::string* field) {
  const size_t start = pos_;
  while (!AtEnd() && text_[pos_] != ',' && !AtLineEnd()) ++pos_;
  field->assign(text_.substr(start, pos_ - start));
}

Status CsvParser::ParseRecord(std::vector<std::string>* fields) {
  fields->clear();
  while (true) {
    std::string field;
    const int64_t column = static_cast<int64_t>(fields->size()) + 1;
    if (!AtEnd() && text_[pos_] == '"') {
      CHORUS_RETURN_IF_ERROR(ParseQuotedField(column, &field));
    } else {
      ParseUnquotedField(&field);
    }
    fields->push_back(std::move(field));
    if (AtEnd()) return Status::Ok();
    if (text_[pos_] != ',') break;
    ++pos_;
  }
  SkipLineEnd();
  return Status::Ok();
}

Status CsvParser::CheckHeader(const CsvTable& table) const {
  std::set<std::string> seen;
  for (size_t i = 0; i < table.header.size(); ++i) {
    const std::string& name = table.header[i];
    const std::string where = Where(table.header_line, static_cast<int64_t>(i) + 1);
    if (name.empty()) return Status::InvalidInput(where + ": expected a column name, found \"\"");
    if (!seen.insert(name).second) {
      return Status::InvalidInput(where + ": duplicate column name \"" + name + "\"");
    }
  }
  return Status::Ok();
}

StatusOr<CsvTable> CsvParser::Parse() {
  if (text_.substr(0, 3) == "\xEF\xBB\xBF") pos_ = 3;  // a UTF-8 byte order mark
  SkipBlankLines();
  if (AtEnd()) return Status::InvalidInput(path_ + ": file is empty");
  CsvTable table;
  table.path = path_;
  table.header_line = line_;
  CHORUS_RETURN_IF_ERROR(ParseRecord(&table.header));
  CHORUS_RETURN_IF_ERROR(CheckHeader(table));
  const size_t expected = table.header.size();
  for (SkipBlankLines(); !AtEnd(); SkipBlankLines()) {
    const int64_t line = line_;
    std::vector<std::string> fields;
    CHORUS_RETURN_IF_ERROR(ParseRecord(&fields));
    if (fields.size() != expected) {
      const int64_t column = static_cast<int64_t>(std::min(fields.size(), expected)) + 1;
      return Status::InvalidInput(Where(line, column) + ": expected " + std::to_string(expected) +
                                  " fields, found " + std::to_string(fields.size()));
    }
    table.rows.push_back(std::move(fields));
    table.lines.push_back(line);
  }
  if (table.rows.empty()) {
    return Status::InvalidInput(path_ + ":" + std::to_string(table.header_line) +
                                ": expected data rows after the header, found none");
  }
  return table;
}

StatusOr<std::string> ReadWholeFile(const std::string& path) {
  std::FILE* file = std::fopen(path.c_str(), "rb");
  if (file == nullptr) {
    return Status::InvalidInput(path + ": cannot open file: " + std::strerror(errno));
  }
  std::string text;
  char buffer[1 << 16];
  size_t got;
  while ((got = std::fread(buffer, 1, sizeof buffer, file)) > 0) text.append(buffer, got);
  const bool failed = std::ferror(file) != 0;
  const int error = errno;
  std::fclose(file);
  if (failed) return Status::InvalidInput(path + ": cannot read file: " + std::strerror(error));
  return text;
}

}  // namespace

StatusOr<CsvTable> ParseCsv(std::string_view text, const std::string& path) {
  try {
    return CsvParser(text, path).Parse();
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

StatusOr<CsvTable> ReadCsv(const std::string& path) {
  try {
    CHORUS_ASSIGN_OR_RETURN(const std::string text, ReadWholeFile(path));
    return ParseCsv(text, path);
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
