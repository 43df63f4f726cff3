#include "coordinator/predict_command.h"

#include <tbb/parallel_for.h>
#include <tbb/task_arena.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/atomic_file.h"
#include "common/log_format.h"
#include "common/prediction_input.h"
#include "common/predictor.h"
#include "common/training_ranges.h"
#include "coordinator/prediction_csv.h"
#include "execution/tbb_parallel_for.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

constexpr int64_t kBadRowsShown = 20;
constexpr size_t kOutsideRowsShown = 5;     // row ids named per batch
constexpr size_t kOutsideColumnsShown = 5;  // columns named per batch

// What prediction needs from a bundle; the bundle itself (basin fits) is released after loading.
struct Model {
  Predictor predictor;
  Preprocessing preprocessing;
  std::vector<std::string> class_names;
  std::optional<TrainingRanges> ranges;  // none for a bundle without a training summary
};

StatusOr<Model> LoadModel(const std::string& path, tbb::task_arena& arena) {
  CHORUS_ASSIGN_OR_RETURN(const BundleFile file, ReadBundleFile(path));
  const TbbParallelFor parallel;  // samples drawn on the arena's threads
  StatusOr<Predictor> created = Status::Internal("not created");
  arena.execute([&] { created = Predictor::Create(file.bundle, &parallel); });
  CHORUS_ASSIGN_OR_RETURN(Predictor predictor, std::move(created));
  std::optional<TrainingRanges> ranges;
  if (!file.bundle.training_summary.empty()) ranges = TrainingRanges::For(file.bundle);
  return Model{std::move(predictor), file.bundle.preprocessing, file.bundle.class_names,
               std::move(ranges)};
}

StatusOr<InputFormat> ParseFormat(const std::string& name) {
  if (name == "auto") return InputFormat::kAuto;
  if (name == "csv") return InputFormat::kCsv;
  if (name == "idx") return InputFormat::kIdx;
  return Status::InvalidInput("--format: expected auto, csv or idx, found \"" + name + "\"");
}

// Shows the first kBadRowsShown invalid rows on stderr and counts them all.
class BadRows {
 public:
  explicit BadRows(bool skip) : skip_(skip) {}

  Status Report(const Status& problem) {
    if (!skip_) {
      return Status::InvalidInput(problem.message() + " (--skip-bad-rows skips such rows)");
    }
    if (count_++ < kBadRowsShown) {
      LogLine(stderr, LogLevel::kWarning, "skipped: " + problem.message(), {{"cause", problem.message()}});
    }
    return Status::Ok();
  }
  int64_t count() const { return count_; }

 private:
  bool skip_;
  int64_t count_ = 0;
};

// Compares every batch with the training ranges: a warning per batch with rows outside them
// (row ids and the columns at fault), or with `refuse`, an error that stops the command.
class OutsideRows {
 public:
  OutsideRows(const TrainingRanges* ranges, std::string input, const char* id_name, bool refuse)
      : ranges_(ranges), input_(std::move(input)), id_name_(id_name), refuse_(refuse) {}

  Status Check(const InputBatch& batch) {
    if (ranges_ == nullptr || batch.ids.empty()) return Status::Ok();
    const RangeFindings f = ranges_->Check(batch.x, kOutsideRowsShown);
    if (f.rows == 0) return Status::Ok();
    count_ += f.rows;
    std::string ids;
    for (int64_t row : f.first_rows) {
      ids += (ids.empty() ? "" : ", ") + std::to_string(batch.ids[static_cast<size_t>(row)]);
    }
    if (static_cast<size_t>(f.rows) > f.first_rows.size()) ids += ", ...";
    std::vector<size_t> order(f.column_rows.size());
    for (size_t k = 0; k < order.size(); ++k) order[k] = k;
    std::stable_sort(order.begin(), order.end(),
                     [&](size_t a, size_t b) { return f.column_rows[a] > f.column_rows[b]; });
    std::string columns;
    nlohmann::json at_fault = nlohmann::json::object();
    for (size_t i = 0; i < order.size() && f.column_rows[order[i]] > 0; ++i) {
      const size_t k = order[i];
      if (i < kOutsideColumnsShown) {
        columns += (columns.empty() ? "" : ", ") + ranges_->Describe(k) + ": " +
                   std::to_string(f.column_rows[k]) + " rows";
      }
      at_fault[ranges_->ColumnName(k)] = f.column_rows[k];
    }
    const std::string text =
        input_ + " " + (std::string(id_name_) == "line" ? "lines " : "indices ") +
        std::to_string(batch.ids.front()) + "-" +
        std::to_string(batch.ids.back()) + ": " + std::to_string(f.rows) + " of " +
        std::to_string(batch.ids.size()) + " rows far outside the training data (" + id_name_ +
        " " + ids + "); columns at fault: " + columns;
    if (refuse_) {
      return Status::InvalidInput(text + " (--refuse-out-of-range: nothing written)");
    }
    LogLine(stderr, LogLevel::kWarning, text,
            {{"out_of_range_rows", f.rows}, {"batch_rows", batch.ids.size()},
             {"first_" + std::string(id_name_), batch.ids.front()},
             {"last_" + std::string(id_name_), batch.ids.back()},
             LogField::Encoded("columns", at_fault.dump())});
    return Status::Ok();
  }
  int64_t count() const { return count_; }

 private:
  const TrainingRanges* ranges_;
  std::string input_;
  const char* id_name_;
  bool refuse_;
  int64_t count_ = 0;
};

// One batch of rows in flight: inputs, every component's outputs, the combined predictive.
struct Batch {
  InputBatch input;
  std::vector<Matrix> outputs;
  Prediction prediction;
};

// Reads up to `count` batches of Predictor::kBatchRows valid rows; the rows' batch positions are
// those the run used, so outputs match it bit for bit.
StatusOr<int64_t> ReadBatches(InputReader& input, BadRows& bad, std::vector<Batch>& batches) {
  const BadRowFn on_bad_row = [&bad](const Status& problem) { return bad.Report(problem); };
  int64_t filled = 0;
  for (Batch& b : batches) {
    CHORUS_ASSIGN_OR_RETURN(const bool more,
                            input.Next(Predictor::kBatchRows, on_bad_row, &b.input));
    if (!more) break;
    ++filled;
  }
  return filled;
}

// Every (batch, component) forward pass, then every batch's combination, on the arena's threads.
// Each arena thread has its own workspace (by thread index); the batches' output matrices keep
// their memory from one call to the next, so steady-state forward passes allocate nothing.
void PredictBatches(const Predictor& predictor, int64_t filled, std::vector<Batch>& batches,
                    std::vector<Mlp::Workspace>& workspaces, tbb::task_arena& arena) {
  const int64_t components = predictor.Components();
  arena.execute([&] {
    for (int64_t b = 0; b < filled; ++b) {
      batches[b].outputs.resize(static_cast<size_t>(components));
      for (Matrix& m : batches[b].outputs) m.resize(batches[b].input.x.rows(), predictor.Outputs());
    }
    tbb::parallel_for(int64_t{0}, filled * components, [&](int64_t task) {
      Batch& batch = batches[task / components];
      Mlp::Workspace& ws = workspaces[static_cast<size_t>(tbb::this_task_arena::current_thread_index())];
      predictor.ComponentOutputsInto(task % components, batch.input.x, ws,
                                     batch.outputs[task % components]);
    });
    tbb::parallel_for(int64_t{0}, filled, [&](int64_t b) {
      batches[b].prediction = predictor.Combine(batches[b].outputs);
    });
  });
}

Status Predict(const PredictOptions& o, int threads) {
  CHORUS_ASSIGN_OR_RETURN(const InputFormat format, ParseFormat(o.format));
  const auto start = std::chrono::steady_clock::now();
  tbb::task_arena arena(threads);
  CHORUS_ASSIGN_OR_RETURN(Model model, LoadModel(o.bundle_path, arena));
  const auto loaded = std::chrono::steady_clock::now();
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<InputReader> input,
                          InputReader::Open(o.input_path, format, model.preprocessing));
  if (!model.ranges.has_value()) {
    if (o.refuse_out_of_range) {
      return Status::InvalidInput(o.bundle_path +
                                  ": --refuse-out-of-range: the bundle has no training summary "
                                  "(written by an older chorus) to check the inputs against");
    }
    LogLine(stderr, LogLevel::kWarning,
            o.bundle_path + ": no training summary (written by an older chorus): inputs are not "
                            "checked against the training ranges");
  }
  OutsideRows outside(model.ranges ? &*model.ranges : nullptr, o.input_path, input->IdName(),
                      o.refuse_out_of_range);
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<AtomicFile> out, AtomicFile::Create(o.output_path));
  const PredictionCsv csv(model.predictor.task(), model.class_names, input->IdName());
  CHORUS_RETURN_IF_ERROR(out->Append(csv.Header()));
  BadRows bad(o.skip_bad_rows);
  std::vector<Batch> batches(static_cast<size_t>(threads));
  std::vector<Mlp::Workspace> workspaces;
  for (int t = 0; t < arena.max_concurrency(); ++t) workspaces.push_back(model.predictor.MakeWorkspace());
  int64_t rows = 0;
  while (true) {
    CHORUS_ASSIGN_OR_RETURN(const int64_t filled, ReadBatches(*input, bad, batches));
    if (filled == 0) break;
    for (int64_t b = 0; b < filled; ++b) CHORUS_RETURN_IF_ERROR(outside.Check(batches[b].input));
    PredictBatches(model.predictor, filled, batches, workspaces, arena);
    for (int64_t b = 0; b < filled; ++b) {
      CHORUS_RETURN_IF_ERROR(out->Append(csv.Rows(batches[b].input.ids, batches[b].prediction)));
      rows += static_cast<int64_t>(batches[b].input.ids.size());
    }
  }
  CHORUS_RETURN_IF_ERROR(out->Commit());
  // Loading (reading and checking the bundle, drawing the samples) is a fixed cost; the rest
  // grows with the rows. Both are logged, so throughput can be told apart from start-up.
  const double load_seconds = std::chrono::duration<double>(loaded - start).count();
  const double predict_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - loaded).count();
  char timing[96];
  std::snprintf(timing, sizeof timing, " (%.2f s loading, %.2f s predicting)", load_seconds,
                predict_seconds);
  LogLine(stderr, outside.count() > 0 ? LogLevel::kWarning : LogLevel::kInfo,
          std::to_string(rows) + " rows predicted, " + std::to_string(bad.count()) +
              " invalid rows skipped, " + std::to_string(outside.count()) +
              " rows far outside the training data: " + o.output_path + timing,
          {{"rows", rows}, {"out_of_range_rows", outside.count()}, {"skipped", bad.count()},
           {"output", o.output_path}, {"load_seconds", load_seconds},
           {"predict_seconds", predict_seconds}});
  return Status::Ok();
}

}  // namespace

int PredictCommand(const PredictOptions& options) {
  const int threads =
      options.threads > 0 ? options.threads : static_cast<int>(std::thread::hardware_concurrency());
  const Status st = Predict(options, threads > 0 ? threads : 1);
  if (st.ok()) return 0;
  LogLine(stderr, LogLevel::kError, "chorus predict: " + st.ToString(), {{"cause", st.ToString()}});
  return st.ExitCode();
}

}  // namespace chorus
