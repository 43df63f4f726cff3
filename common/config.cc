#include "common/config.h"

namespace chorus {

const char* TaskName(Task t) { return t == Task::kClassification ? "classification" : "regression"; }

const char* ActivationName(Activation a) {
  switch (a) {
    case Activation::kRelu: return "relu";
    case Activation::kTanh: return "tanh";
    case Activation::kGelu: return "gelu";
  }
  return "?";
}

const char* ScheduleName(ScheduleKind s) {
  switch (s) {
    case ScheduleKind::kConstant: return "constant";
    case ScheduleKind::kCosine: return "cosine";
    case ScheduleKind::kStep: return "step";
  }
  return "?";
}

const char* WeightingName(Weighting) { return "uniform"; }

std::optional<Task> ParseTask(const std::string& s) {
  if (s == "classification") return Task::kClassification;
  if (s == "regression") return Task::kRegression;
  return std::nullopt;
}

std::optional<Activation> ParseActivation(const std::string& s) {
  if (s == "relu") return Activation::kRelu;
  if (s == "tanh") return Activation::kTanh;
  if (s == "gelu") return Activation::kGelu;
  return std::nullopt;
}

std::optional<ScheduleKind> ParseSchedule(const std::string& s) {
  if (s == "constant") return ScheduleKind::kConstant;
  if (s == "cosine") return ScheduleKind::kCosine;
  if (s == "step") return ScheduleKind::kStep;
  return std::nullopt;
}

std::optional<Weighting> ParseWeighting(const std::string& s) {
  if (s == "uniform") return Weighting::kUniform;
  return std::nullopt;
}

}  // namespace chorus
