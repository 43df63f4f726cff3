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

const char* ProductPrecisionName(ProductPrecision p) {
  return p == ProductPrecision::kBf16 ? "bf16" : "fp32";
}

const char* ScheduleName(ScheduleKind s) {
  switch (s) {
    case ScheduleKind::kConstant: return "constant";
    case ScheduleKind::kCosine: return "cosine";
    case ScheduleKind::kStep: return "step";
  }
  return "?";
}

const char* WeightingName(Weighting w) {
  switch (w) {
    case Weighting::kUniform: return "uniform";
    case Weighting::kStacking: return "stacking";
    case Weighting::kGreedy: return "greedy";
  }
  return "?";
}

const char* BasinMethodName(BasinMethod m) {
  switch (m) {
    case BasinMethod::kNone: return "none";
    case BasinMethod::kGaussianDiag: return "gaussian_diag";
    case BasinMethod::kGaussianLowRank: return "gaussian_lowrank";
    case BasinMethod::kLaplaceLastLayer: return "laplace_last_layer";
    case BasinMethod::kCyclicalSgmcmc: return "cyclical_sgmcmc";
  }
  return "?";
}

const char* LaplaceHessianName(LaplaceHessian h) {
  switch (h) {
    case LaplaceHessian::kAuto: return "auto";
    case LaplaceHessian::kFull: return "full";
    case LaplaceHessian::kKronecker: return "kronecker";
  }
  return "?";
}

const char* SwitchName(Switch s) {
  switch (s) {
    case Switch::kAuto: return "auto";
    case Switch::kOn: return "on";
    case Switch::kOff: return "off";
  }
  return "?";
}

std::optional<Task> ParseTask(const std::string& s) {
  if (s == "classification") return Task::kClassification;
  if (s == "regression") return Task::kRegression;
  return std::nullopt;
}

const char* PoolingName(Pooling p) {
  switch (p) {
    case Pooling::kNone: return "none";
    case Pooling::kMax: return "max";
    case Pooling::kAverage: return "average";
  }
  return "?";
}

std::optional<Pooling> ParsePooling(const std::string& s) {
  if (s == "none") return Pooling::kNone;
  if (s == "max") return Pooling::kMax;
  if (s == "average") return Pooling::kAverage;
  return std::nullopt;
}

std::optional<Activation> ParseActivation(const std::string& s) {
  if (s == "relu") return Activation::kRelu;
  if (s == "tanh") return Activation::kTanh;
  if (s == "gelu") return Activation::kGelu;
  return std::nullopt;
}

std::optional<ProductPrecision> ParseProductPrecision(const std::string& s) {
  if (s == "fp32") return ProductPrecision::kFp32;
  if (s == "bf16") return ProductPrecision::kBf16;
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
  if (s == "stacking") return Weighting::kStacking;
  if (s == "greedy") return Weighting::kGreedy;
  return std::nullopt;
}

std::optional<BasinMethod> ParseBasinMethod(const std::string& s) {
  if (s == "none") return BasinMethod::kNone;
  if (s == "gaussian_diag") return BasinMethod::kGaussianDiag;
  if (s == "gaussian_lowrank") return BasinMethod::kGaussianLowRank;
  if (s == "laplace_last_layer") return BasinMethod::kLaplaceLastLayer;
  if (s == "cyclical_sgmcmc") return BasinMethod::kCyclicalSgmcmc;
  return std::nullopt;
}

std::optional<LaplaceHessian> ParseLaplaceHessian(const std::string& s) {
  for (LaplaceHessian h : {LaplaceHessian::kAuto, LaplaceHessian::kFull, LaplaceHessian::kKronecker}) {
    if (s == LaplaceHessianName(h)) return h;
  }
  return std::nullopt;
}

std::optional<Switch> ParseSwitch(const std::string& s) {
  if (s == "auto") return Switch::kAuto;
  if (s == "on") return Switch::kOn;
  if (s == "off") return Switch::kOff;
  return std::nullopt;
}

}  // namespace chorus
