#include "common/true_probabilities.h"

#include <exception>
#include <vector>

#include "common/csv.h"
#include "common/feature_encoder.h"
#include "common/message_text.h"

namespace chorus {
namespace {

// The columns of `table` in class_names order; the header must name each class exactly once.
StatusOr<std::vector<int64_t>> ClassColumns(const CsvTable& table,
                                            const std::vector<std::string>& class_names) {
  if (table.header.size() != class_names.size()) {
    return Status::InvalidInput(HeaderPlace(table) + ": expected one column per class (" +
                                JoinNames(class_names) + "), found " + JoinNames(table.header));
  }
  std::vector<int64_t> columns;
  for (const std::string& name : class_names) {
    CHORUS_ASSIGN_OR_RETURN(const int64_t column, FindColumn(table, name, "class"));
    columns.push_back(column);
  }
  return columns;
}

StatusOr<Matrix> TrueProbabilities(const std::string& path, const PreparedData& data) {
  CHORUS_ASSIGN_OR_RETURN(const CsvTable table, ReadCsv(path));
  CHORUS_ASSIGN_OR_RETURN(const std::vector<int64_t> columns,
                          ClassColumns(table, data.class_names));
  if (static_cast<int64_t>(table.rows.size()) != data.test.rows()) {
    return Status::InvalidInput(path + ": expected " + std::to_string(data.test.rows()) +
                                " rows, one per test row, found " +
                                std::to_string(table.rows.size()));
  }
  Matrix p(data.test.rows(), data.classes());
  for (size_t r = 0; r < table.rows.size(); ++r) {
    for (size_t k = 0; k < columns.size(); ++k) {
      const std::string& field = table.rows[r][columns[k]];
      const std::string place =
          path + ":" + std::to_string(table.lines[r]) + ":" + std::to_string(columns[k] + 1);
      double value;
      CHORUS_RETURN_IF_ERROR(ParseNumber(field, place, data.class_names[k], &value));
      if (value < 0.0 || value > 1.0) {
        return Status::InvalidInput(place + ": expected a probability in [0, 1] in column " +
                                    Quoted(data.class_names[k]) + ", found " + Quoted(field));
      }
      p(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(k)) = static_cast<float>(value);
    }
  }
  return p;
}

}  // namespace

StatusOr<Matrix> LoadTrueProbabilities(const std::string& path, const PreparedData& data) {
  try {
    return TrueProbabilities(path, data);
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

}  // namespace chorus
