#include "common/dataset.h"

#include <exception>
#include <string>

#include "common/csv_dataset.h"
#include "common/idx_dataset.h"
#include "common/message_text.h"

namespace chorus {
namespace {

Status CheckConfig(const DataConfig& config) {
  const bool csv = config.format == "csv";
  if (!csv && config.format != "idx") {
    return Status::InvalidInput("data.format: expected csv or idx, found " + Quoted(config.format));
  }
  const bool from_file =
      csv ? !config.validation_file.empty() : !config.validation_idx.images.empty();
  const double f = config.validation_fraction;
  if (!from_file && !(f > 0.0 && f <= 0.5)) {
    return Status::InvalidInput("data.validation.fraction: expected a number in (0, 0.5], found " +
                                NumberText(f));
  }
  if (csv && (config.train.empty() || config.test.empty() || config.target.empty())) {
    return Status::InvalidInput("data: csv needs train, test and target");
  }
  if (!csv && (config.train_idx.images.empty() || config.train_idx.labels.empty() ||
               config.test_idx.images.empty() || config.test_idx.labels.empty())) {
    return Status::InvalidInput("data: idx needs train and test, each with images and labels");
  }
  return Status::Ok();
}

}  // namespace

StatusOr<PreparedData> LoadPreparedData(const DataConfig& config, uint64_t run_seed) {
  try {
    CHORUS_RETURN_IF_ERROR(CheckConfig(config));
    return config.format == "csv" ? LoadCsvData(config, run_seed) : LoadIdxData(config, run_seed);
  } catch (const std::exception& e) {
    return Status::Internal(std::string("loading data: ") + e.what());
  }
}

}  // namespace chorus
