#include "coordinator/training_facts.h"

#include "coordinator/run_plan.h"

namespace chorus {
namespace {

using nlohmann::json;

json ValidationJson(const Config& config, const PreparedData& data) {
  if (data.folds > 0) {
    return {{"method", "cross-fitting"}, {"folds", data.folds}, {"rows", data.train.rows()},
            {"note", "weights, temperature and scale fitted on out-of-fold predictions of every "
                     "training row; the members themselves trained on all training rows"}};
  }
  const bool file = !config.data.validation_file.empty() || !config.data.validation_idx.images.empty();
  return {{"method", file ? "file" : "holdout"}, {"folds", 0}, {"rows", data.validation.rows()}};
}

json SettingsJson(const Config& c) {
  return {{"hidden", c.model.hidden},
          {"lr", c.train.optimizer.lr},
          {"weight_decay", c.train.optimizer.weight_decay},
          {"beta_nll", c.train.beta_nll},
          {"epochs", c.train.epochs},
          {"basin_method", BasinMethodName(c.ensemble.basin.method)}};
}

json SearchJson(const SearchOutcome& search) {
  json points = json::array();
  for (const PointScore& p : search.points) {
    json point = {{"hidden", p.point.hidden}, {"lr", p.point.lr}, {"weight_decay", p.point.weight_decay},
                  {"beta_nll", p.point.beta_nll}};
    if (p.failure.empty()) {
      point["validation_nll"] = p.validation_nll;
      point["best_epoch"] = p.best_epoch;
    } else {
      point["validation_nll"] = nullptr;
      point["failure"] = p.failure;
    }
    points.push_back(point);
  }
  return {{"scored_by", "validation nll of one network per point (member 0's seed)"},
          {"points", points}, {"chosen", search.best}};
}

}  // namespace

void AddTrainingFacts(const Config& assembled, const PreparedData& data, const TrainedRun& trained,
                      json& report) {
  report["validation"] = ValidationJson(assembled, data);
  const MemberSpec spec = BaseSpec(assembled, data, 0);
  report["early_stopping"] = {{"on", spec.train.early_stopping.mode == Switch::kOn},
                              {"mode", SwitchName(assembled.train.early_stopping.mode)},
                              {"patience", spec.train.early_stopping.patience}};
  report["settings"] = SettingsJson(assembled);
  if (trained.search) report["search"] = SearchJson(*trained.search);
  if (assembled.ensemble.basin.method != BasinMethod::kNone) report["basin_scale"] = assembled.ensemble.basin.scale;
  const BasinMethod basin = assembled.ensemble.basin.method;
  // Basin epochs follow the training epochs in epoch_loss; a Laplace fit adds none.
  const size_t basin_epochs = basin == BasinMethod::kGaussianDiag || basin == BasinMethod::kGaussianLowRank
                                  ? static_cast<size_t>(assembled.ensemble.basin.epochs)
                                  : 0;
  for (json& m : report["members"]) {
    for (size_t j = 0; j < trained.members.size(); ++j) {
      const MemberResult& r = trained.members[j];
      if (r.index != m["index"].get<int>()) continue;
      m["best_epoch"] = r.best_epoch;
      m["epochs_trained"] = r.epoch_loss.size() - basin_epochs;
      if (basin == BasinMethod::kLaplaceLastLayer) {
        m["laplace"] = {{"hessian", LaplaceFormName(r.basin.laplace.form)},
                        {"prior_precision", r.basin.laplace.prior_precision}};
      }
      if (data.folds > 0) {
        m["fold_validation_nll"] = trained.fold_curves[static_cast<size_t>(r.index)];
        m["stop_epoch"] = trained.stop_epochs[static_cast<size_t>(r.index)];
      } else {
        m["validation_nll_per_epoch"] = r.validation_nll;
      }
    }
  }
}

}  // namespace chorus
