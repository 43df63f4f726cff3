#include "common/prediction_input.h"

#include <zlib.h>

#include <cmath>

#include "common/csv_reader.h"
#include "common/feature_encoder.h"
#include "common/idx_reader.h"

namespace chorus {
namespace {

// Rows are encoded into a max_rows x features matrix, then trimmed to the rows kept.
void StartBatch(int64_t max_rows, int64_t features, InputBatch* batch) {
  batch->x.resize(max_rows, features);
  batch->ids.clear();
}

StatusOr<bool> FinishBatch(InputBatch* batch) {
  batch->x.conservativeResize(static_cast<Eigen::Index>(batch->ids.size()), batch->x.cols());
  return !batch->ids.empty();
}

class CsvInput : public InputReader {
 public:
  CsvInput(std::unique_ptr<CsvReader> reader, CsvRowEncoder encoder)
      : reader_(std::move(reader)), encoder_(std::move(encoder)) {}

  const char* IdName() const override { return "line"; }

  StatusOr<bool> Next(int64_t max_rows, const BadRowFn& on_bad_row, InputBatch* batch) override {
    StartBatch(max_rows, encoder_.Features(), batch);
    CsvRecord record;
    while (static_cast<int64_t>(batch->ids.size()) < max_rows) {
      CHORUS_ASSIGN_OR_RETURN(const bool more, reader_->Next(&record));
      if (!more) break;
      Status problem = record.problem;
      float* row = batch->x.row(static_cast<Eigen::Index>(batch->ids.size())).data();
      if (problem.ok()) {
        problem = encoder_.Encode(record.fields,
                                  reader_->path() + ":" + std::to_string(record.line), row);
      }
      if (problem.ok()) {
        batch->ids.push_back(record.line);
      } else {
        CHORUS_RETURN_IF_ERROR(on_bad_row(problem));
      }
    }
    return FinishBatch(batch);
  }

 private:
  std::unique_ptr<CsvReader> reader_;
  CsvRowEncoder encoder_;
};

class IdxInput : public InputReader {
 public:
  IdxInput(std::unique_ptr<IdxReader> reader, const Preprocessing& p)
      : reader_(std::move(reader)), p_(p) {}

  const char* IdName() const override { return "index"; }

  StatusOr<bool> Next(int64_t max_rows, const BadRowFn& on_bad_row, InputBatch* batch) override {
    const int64_t width = reader_->RowElements();
    StartBatch(max_rows, width, batch);
    std::vector<float> raw(static_cast<size_t>(width));
    std::vector<double> encoded(static_cast<size_t>(width));
    while (static_cast<int64_t>(batch->ids.size()) < max_rows) {
      const int64_t index = reader_->next_row();
      CHORUS_ASSIGN_OR_RETURN(const int64_t got, reader_->Read(1, raw.data()));
      if (got == 0) break;
      Status problem = CheckFinite(raw, index);
      if (problem.ok()) {
        EncodeRow(p_.plan, raw.data(), nullptr, encoded.data());
        problem = StandardizeRow(p_.plan, p_.standardizer, encoded.data(),
                                 reader_->path() + "[" + std::to_string(index) + "]",
                                 batch->x.row(static_cast<Eigen::Index>(batch->ids.size())).data());
      }
      if (!problem.ok()) {
        CHORUS_RETURN_IF_ERROR(on_bad_row(problem));
        continue;
      }
      batch->ids.push_back(index);
    }
    return FinishBatch(batch);
  }

 private:
  Status CheckFinite(const std::vector<float>& row, int64_t index) const {
    for (size_t j = 0; j < row.size(); ++j) {
      if (std::isfinite(row[j])) continue;
      return Status::InvalidInput(reader_->path() + "[" + std::to_string(index) +
                                  "]: expected finite values, found " + std::to_string(row[j]) +
                                  " at element " + std::to_string(j));
    }
    return Status::Ok();
  }

  std::unique_ptr<IdxReader> reader_;
  const Preprocessing& p_;
};

// IDX files start with two zero bytes, which no CSV header holds; zlib sees through gzip.
StatusOr<InputFormat> DetectFormat(const std::string& path) {
  gzFile file = gzopen(path.c_str(), "rb");
  if (file == nullptr) return Status::InvalidInput(path + ": cannot open file");
  unsigned char start[2] = {1, 1};
  const int got = gzread(file, start, 2);
  gzclose(file);
  return got == 2 && start[0] == 0 && start[1] == 0 ? InputFormat::kIdx : InputFormat::kCsv;
}

StatusOr<std::unique_ptr<InputReader>> OpenIdx(const std::string& path, const Preprocessing& p) {
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<IdxReader> reader, IdxReader::Open(path));
  if (!p.plan.categorical.empty()) {
    return Status::InvalidInput(path +
                                ": an IDX input needs a bundle without categorical "
                                "columns; this one was trained on CSV with categorical columns");
  }
  if (reader->RowElements() != p.plan.NumericColumns()) {
    return Status::InvalidInput(path + ": expected " + std::to_string(p.plan.NumericColumns()) +
                                " values per row like the training data, found " +
                                std::to_string(reader->RowElements()));
  }
  return std::unique_ptr<InputReader>(new IdxInput(std::move(reader), p));
}

StatusOr<std::unique_ptr<InputReader>> OpenCsv(const std::string& path, const Preprocessing& p) {
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<CsvReader> reader, CsvReader::Open(path));
  CHORUS_ASSIGN_OR_RETURN(
      CsvRowEncoder encoder,
      CsvRowEncoder::ForHeader(p.plan, p.standardizer, reader->header(),
                               path + ":" + std::to_string(reader->header_line())));
  return std::unique_ptr<InputReader>(new CsvInput(std::move(reader), std::move(encoder)));
}

}  // namespace

StatusOr<std::unique_ptr<InputReader>> InputReader::Open(const std::string& path,
                                                         InputFormat format,
                                                         const Preprocessing& p) {
  if (format == InputFormat::kAuto) {
    CHORUS_ASSIGN_OR_RETURN(format, DetectFormat(path));
  }
  return format == InputFormat::kIdx ? OpenIdx(path, p) : OpenCsv(path, p);
}

}  // namespace chorus
