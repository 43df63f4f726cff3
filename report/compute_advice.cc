#include "report/compute_advice.h"

#include "report/html_text.h"

namespace chorus {
namespace {

using json = nlohmann::json;

std::string Configuration(const json& point) {
  const int k = point["members"].get<int>(), s = point["samples"].get<int>();
  return std::to_string(k) + (k == 1 ? " member" : " members") + " x " + std::to_string(s) +
         (s == 1 ? " sample" : " samples");
}

// "3 members x 1 sample (120 CPU-seconds, validation NLL 0.3012)"
std::string Described(const json& point) {
  return Configuration(point) + " (" + FormatSignificant(point["cpu_seconds"].get<double>(), 3) +
         " CPU-seconds, validation NLL " + FormatFixed(point["validation_nll"]["mean"].get<double>(), 4) + ")";
}

}  // namespace

void AddComputeAdvice(const std::vector<MemberCpuSeconds>& members, int samples_per_member,
                      double all_jobs_cpu_seconds, double nll_tolerance, json& report) {
  MemberResult::CpuSeconds mean;
  int costed = 0;
  for (const MemberCpuSeconds& m : members) {
    if (!m.cost) continue;
    ++costed;
    mean.training += m.cost->training;
    mean.basin_fit += m.cost->basin_fit;
    mean.samples += m.cost->samples;
    for (json& entry : report["members"]) {
      if (entry["index"].get<int>() == m.index) {
        entry["cpu_seconds"] = {{"training", m.cost->training},
                                {"basin_fit", m.cost->basin_fit},
                                {"samples", m.cost->samples}};
      }
    }
  }
  if (costed == 0 || report["size_curve"].empty()) {
    report["compute"] = {{"text", "No member's CPU-seconds were recorded (results recovered after a "
                                  "crash, or from an older version), so the size grid is not priced."}};
    return;
  }
  mean.training /= costed;
  mean.basin_fit /= costed;
  mean.samples /= costed;
  const json* best = nullptr;
  for (json& point : report["size_curve"]) {
    const double k = point["members"].get<double>(), s = point["samples"].get<double>();
    point["cpu_seconds"] = k * (mean.training + mean.basin_fit) + k * (s / samples_per_member) * mean.samples;
    if (best == nullptr || point["validation_nll"]["mean"] < (*best)["validation_nll"]["mean"]) best = &point;
  }
  const double limit = (*best)["validation_nll"]["mean"].get<double>() + nll_tolerance;
  const json* chosen = best;
  for (const json& point : report["size_curve"]) {
    if (point["validation_nll"]["mean"].get<double>() > limit) continue;
    const double cost = point["cpu_seconds"].get<double>(), chosen_cost = (*chosen)["cpu_seconds"].get<double>();
    const int components = point["members"].get<int>() * point["samples"].get<int>();
    const int chosen_components = (*chosen)["members"].get<int>() * (*chosen)["samples"].get<int>();
    if (cost < chosen_cost || (cost == chosen_cost && components < chosen_components)) chosen = &point;
  }
  const auto summary = [](const json& p) {
    return json{{"members", p["members"]}, {"samples", p["samples"]}, {"cpu_seconds", p["cpu_seconds"]},
                {"validation_nll", p["validation_nll"]["mean"]}, {"nll", p["nll"]["mean"]}};
  };
  std::string text = "Cheapest within " + FormatSignificant(nll_tolerance, 3) +
                     " nats of the best validation NLL: " + Described(*chosen) + "; test NLL " +
                     FormatFixed((*chosen)["nll"]["mean"].get<double>(), 4) + ".";
  text += chosen == best ? " It is also the best found."
                         : " Best found: " + Described(*best) + ", test NLL " +
                               FormatFixed((*best)["nll"]["mean"].get<double>(), 4) + ".";
  text += " Validation NLL is measured on the rows the temperature was tuned on; prices are " +
          std::to_string(costed) + (costed == 1 ? " member's" : " members'") +
          " mean CPU-seconds times the members (and the share of samples) used.";
  report["compute"] = {{"cpu_seconds_all_jobs", all_jobs_cpu_seconds},
                       {"members_costed", costed},
                       {"mean_per_member",
                        {{"training", mean.training}, {"basin_fit", mean.basin_fit}, {"samples", mean.samples}}},
                       {"nll_tolerance", nll_tolerance},
                       {"best", summary(*best)},
                       {"advice", summary(*chosen)},
                       {"text", text}};
}

}  // namespace chorus
