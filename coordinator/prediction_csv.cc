#include "coordinator/prediction_csv.h"

#include <charconv>

namespace chorus {
namespace {

// RFC 4180: a field with a comma, quote or line break is quoted, quotes doubled.
std::string CsvField(const std::string& text) {
  if (text.find_first_of(",\"\r\n") == std::string::npos) return text;
  std::string quoted = "\"";
  for (char c : text) quoted += c == '"' ? std::string("\"\"") : std::string(1, c);
  return quoted + "\"";
}

// The shortest decimal text that reads back as exactly `value`.
void AppendNumber(double value, std::string* line) {
  char text[32];
  const auto result = std::to_chars(text, text + sizeof text, value);
  *line += ',';
  line->append(text, result.ptr);
}

void AppendClassRow(const ClassPrediction& c, Eigen::Index i,
                    const std::vector<std::string>& class_names, std::string* line) {
  *line += ',' + CsvField(class_names[c.predicted[i]]);
  for (Eigen::Index k = 0; k < c.probabilities.cols(); ++k)
    AppendNumber(c.probabilities(i, k), line);
  AppendNumber(c.confidence[i], line);
  AppendNumber(c.total_entropy[i], line);
  AppendNumber(c.epistemic[i], line);
}

void AppendRegressionRow(const RegressionPrediction& r, size_t i, std::string* line) {
  for (double v : {r.mean[i], r.total_std[i], r.epistemic_std[i], r.lower_5[i], r.upper_95[i]}) {
    AppendNumber(v, line);
  }
}

}  // namespace

PredictionCsv::PredictionCsv(Task task, std::vector<std::string> class_names, std::string id_name)
    : task_(task), class_names_(std::move(class_names)), id_name_(std::move(id_name)) {}

std::string PredictionCsv::Header() const {
  std::string header = id_name_;
  if (task_ == Task::kRegression) return header + ",mean,total_std,epistemic_std,q05,q95\n";
  header += ",predicted";
  for (const std::string& name : class_names_) header += ',' + CsvField("p_" + name);
  return header + ",confidence,total_entropy,epistemic\n";
}

std::string PredictionCsv::Rows(const std::vector<int64_t>& ids, const Prediction& p) const {
  std::string text;
  for (size_t i = 0; i < ids.size(); ++i) {
    text += std::to_string(ids[i]);
    if (task_ == Task::kClassification) {
      AppendClassRow(p.classification, static_cast<Eigen::Index>(i), class_names_, &text);
    } else {
      AppendRegressionRow(p.regression, i, &text);
    }
    text += '\n';
  }
  return text;
}

}  // namespace chorus
