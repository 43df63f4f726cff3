#include "report/report_html.h"

#include <algorithm>
#include <sstream>
#include <utility>
#include <vector>

#include "report/html_text.h"
#include "report/page_style.h"
#include "report/report_charts.h"
#include "report/report_facts.h"
#include "report/report_training_html.h"
#include "report/report_model.h"

namespace chorus {
namespace {

using nlohmann::json;

std::vector<std::pair<const char*, const char*>> MetricColumns(const json& r) {
  if (IsClassificationReport(r)) {
    return {{"accuracy", "accuracy"}, {"nll", "NLL"}, {"brier", "Brier"}, {"ece", "ECE"}};
  }
  return {{"rmse", "RMSE"}, {"nll", "NLL"}, {"coverage_90", "90% coverage"}};
}

std::string Num(const json& v, int decimals = 4) {
  return v.is_number() ? FormatFixed(v.get<double>(), decimals) : EscapeHtml(v.dump());
}

// The calibration setting at 1 and as tuned: the temperature T (classification) or the scale on
// every standard deviation (regression).
std::string AtOne(const json& r) { return IsClassificationReport(r) ? "T = 1" : "scale 1"; }

std::string Tuned(const json& r) {
  return (IsClassificationReport(r) ? "tuned T = " : "tuned scale = ") + Num(r["temperature"], 3);
}

std::string Head(const json& r) { return PageHead("chorus report: " + r["name"].get<std::string>()); }

std::string Header(const json& r) {
  return "<header><h1>" + EscapeHtml(r["name"]) + "<span class=\"badge\">" + EscapeHtml(r["task"]) +
         "</span></h1><p class=\"sub\">chorus ensemble report &middot; data hash <span "
         "class=\"hash\">" +
         EscapeHtml(r["data_hash"].get<std::string>().substr(0, 12)) + "</span> &middot; " +
         std::to_string(r["members"].size()) + " members, " + EscapeHtml(r["weighting"]) +
         " weights</p></header>";
}

std::string Caution(const json& r) {
  return "<section class=\"caution\" role=\"note\"><h2>Caution</h2><p>" + EscapeHtml(kCautionText) +
         "</p><p>The figures below were measured on the data with hash <span class=\"hash\">" +
         EscapeHtml(r["data_hash"]) + "</span> and hold for data like it.</p></section>";
}

std::string Kpi(const std::string& label, const std::string& value, const std::string& detail) {
  return "<div class=\"kpi\"><div class=\"label\">" + label + "</div><div class=\"value\">" +
         value + "</div><div class=\"detail\">" + detail + "</div></div>";
}

std::string KeyFigures(const json& r) {
  const json& ens = r["ensemble"]["test"];
  const json& mean = r["mean_member"]["test"];
  std::string html = "<div class=\"kpis\">";
  for (const auto& [key, label] : MetricColumns(r)) {
    if (std::string(key) == "brier") continue;
    html += Kpi(std::string("test ") + label, Num(ens[key]),
                "mean member " + Num(mean[key]) + "<br>at " + AtOne(r) + ": " +
                    Num(r["ensemble"]["test_uncalibrated"][key]));
  }
  const int finished = static_cast<int>(r["members"].size());
  html += Kpi(IsClassificationReport(r) ? "temperature" : "standard-deviation scale",
              Num(r["temperature"], 3), "tuned on validation only");
  html += Kpi("members finished", std::to_string(finished) + " of " + Num(r["members_planned"], 0),
              std::to_string(r["failed_members"].size()) + " failed");
  return html + "</div>";
}

// Rows of (label, metrics object) as a table with the task's metric columns; row `highlight` is
// emphasised.
std::string MetricsTable(const json& r,
                         const std::vector<std::pair<std::string, const json*>>& rows,
                         size_t highlight) {
  std::string html = "<table><thead><tr><th>test set</th>";
  for (const auto& [key, label] : MetricColumns(r)) html += std::string("<th>") + label + "</th>";
  html += "</tr></thead><tbody>";
  for (size_t i = 0; i < rows.size(); ++i) {
    html += (i == highlight ? "<tr class=\"highlight\"><td>" : "<tr><td>") +
            EscapeHtml(rows[i].first) + "</td>";
    for (const auto& [key, label] : MetricColumns(r)) {
      const json& metrics = *rows[i].second;
      html += "<td>" + (metrics.contains(key) ? Num(metrics[key]) : std::string("&ndash;")) + "</td>";
    }
    html += "</tr>";
  }
  return html + "</tbody></table>";
}

std::string TestSection(const json& r) {
  const json& ens = r["ensemble"];
  std::vector<std::pair<std::string, const json*>> rows = {
      {"mean member (of " + std::to_string(r["members"].size()) + ")", &r["mean_member"]["test"]},
      {"best member (" + r["best_member"].value("index", json()).dump() + ", by validation NLL)",
       &r["best_member"]["test"]}};
  if (ens.contains("test_without_basin")) {
    rows.push_back({"trained points only (no basin samples), tuned", &ens["test_without_basin"]});
  }
  rows.push_back({"ensemble, " + AtOne(r), &ens["test_uncalibrated"]});
  rows.push_back({"ensemble, " + Tuned(r), &ens["test"]});
  const size_t ensemble_row = rows.size() - 1;
  if (r.contains("baseline") && r["baseline"].contains("test")) {
    rows.push_back({"linear baseline, " + std::string(IsClassificationReport(r) ? "T = " : "scale ") +
                        FormatFixed(r["baseline"]["temperature"], 3), &r["baseline"]["test"]});
  }
  if (r.contains("warm_start")) {
    rows.push_back({"warm-start bundle (run " + r["warm_start"]["run_name"].get<std::string>() + ")",
                    &r["warm_start"]["start_bundle_test"]});
  }
  std::string html = "<section><h2>Test set</h2>" + MetricsTable(r, rows, ensemble_row) +
                     BaselineVerdictHtml(r);
  if (r.contains("warm_start")) {
    const json& w = r["warm_start"];
    html += "<p>Warm-started from <span class=\"hash\">" + EscapeHtml(w["path"].get<std::string>()) +
            "</span> (payload SHA-256 <span class=\"hash\">" +
            EscapeHtml(w["sha256"].get<std::string>().substr(0, 12)) +
            "</span>), scored above on this run's test rows with its own preprocessing: the "
            "ensemble's test NLL changed by " + Num(w["nll_change"], 4) + " nats.</p>";
  }
  if (r.contains("temperature_warning")) {
    html += "<p class=\"verdict warn\">" + EscapeHtml(r["temperature_warning"].get<std::string>()) + "</p>";
  }
  if (r.contains("bayes_optimal_test_nll")) {
    html += "<p>Bayes-optimal test NLL (the true probabilities of this invented data are known): " +
            Num(r["bayes_optimal_test_nll"]) + "</p>";
  }
  return html + "<p class=\"note\">NLL in nats per input; rates are fractions. The " +
         std::string(IsClassificationReport(r) ? "temperature" : "scale") +
         " was tuned on validation data only.</p></section>";
}

std::string WeightCell(double weight, double max_weight) {
  const double px = max_weight > 0 ? 70 * weight / max_weight : 0;
  return "<td class=\"nowrap\"><span class=\"wbar\" style=\"width:" + FormatFixed(px, 1) +
         "px\"></span>" + FormatFixed(weight, 4) + "</td>";
}

std::string MembersSection(const json& r) {
  const json& weights = r["weights"];
  double max_weight = 0;
  for (const json& w : weights) max_weight = std::max(max_weight, w.get<double>());
  std::string html =
      "<section><h2>Members</h2><table><thead><tr><th>member</th><th>seed</th>"
      "<th>samples</th><th>weight</th><th>validation NLL</th>";
  for (const auto& [key, label] : MetricColumns(r)) {
    html += std::string("<th>test ") + label + "</th>";
  }
  html += "</tr></thead><tbody>";
  for (size_t m = 0; m < r["members"].size(); ++m) {
    const json& member = r["members"][m];
    const bool best = member.value("index", -1) == r["best_member"].value("index", -2);
    html += std::string(best ? "<tr class=\"highlight\">" : "<tr>") + "<td>" +
            member.value("index", json()).dump() + (best ? " (best)" : "") + "</td><td>" +
            EscapeHtml(member.value("seed", "")) + "</td><td>" +
            member.value("samples", json()).dump() + "</td>" + WeightCell(weights[m], max_weight) +
            "<td>" + Num(member.value("validation_nll", json())) + "</td>";
    for (const auto& [key, label] : MetricColumns(r)) {
      html += "<td>" + Num(member["test"][key]) + "</td>";
    }
    html += "</tr>";
  }
  return html + "</tbody></table><p class=\"note\">Weights (" + EscapeHtml(r["weighting"]) +
         ") were learned on validation and sum to 1. Each member's test scores are its own, at " +
         AtOne(r) + ", averaged over its samples.</p></section>";
}

std::string UncertaintyTable(const json& r) {
  const json& u = r["uncertainty"];
  std::string html =
      "<table><thead><tr><th>test inputs</th><th>total</th><th>aleatoric</th>"
      "<th>epistemic</th></tr></thead><tbody><tr><td>mean per input, in " +
      EscapeHtml(u.value("unit", "")) + "</td>";
  for (const char* part : {"total", "aleatoric", "epistemic"}) {
    html += "<td>" + Num(u["test_mean"][part]) + "</td>";
  }
  html += "</tr>";
  if (u.contains("auroc_misclassified")) {
    html += "<tr><td>AUROC for flagging wrong predictions (0.5 = chance)</td>";
    for (const char* part : {"total", "aleatoric", "epistemic"}) {
      html += "<td>" + Num(u["auroc_misclassified"][part], 3) + "</td>";
    }
    html += "</tr>";
  }
  return html + "</tbody></table>";
}

// Diversity between members and between one member's samples (absent in reports written before
// chorus measured it).
std::string DiversityTable(const json& r) {
  if (!r.contains("diversity")) return "";
  const json& d = r["diversity"];
  const bool classification = IsClassificationReport(r);
  std::string html = "<table><thead><tr><th>test predictions</th><th>compared</th>";
  if (classification) html += "<th>top-1 disagreement</th>";
  html += "<th>mean KL (nats)</th></tr></thead><tbody>";
  const std::pair<const char*, const char*> rows[] = {{"between_members", "between members"},
                                                      {"within_members", "between one member's samples"}};
  for (const auto& [key, label] : rows) {
    if (!d.contains(key)) continue;
    const json& m = d[key];
    html += "<tr><td>" + std::string(label) + "</td><td>" + m["components"].dump() + "</td>";
    if (classification) html += "<td>" + Num(m["disagreement"], 4) + "</td>";
    html += "<td>" + Num(m["mean_kl"], 4) + "</td></tr>";
  }
  return html + "</tbody></table><p class=\"note\">Members that agree add little to each other: "
                "an ensemble gains most where its members disagree. Measured at temperature 1, "
                "pair by pair; top-1 disagreement is the share of test inputs whose predicted "
                "class differs.</p>";
}

std::string UncertaintySection(const json& r) {
  return "<section><h2>Uncertainty</h2><p>" +
         std::string(
             IsClassificationReport(r)
                 ? "Total predictive entropy splits into the expected entropy of the samples "
                   "(aleatoric: the data leaves it open) and the mutual information (epistemic: "
                   "the "
                   "members disagree)."
                 : "Total predictive variance splits into the mean of the members' variances "
                   "(aleatoric) and the variance of their means (epistemic).") +
         "</p>" + UncertaintyTable(r) + UncertaintyFigures(r) + DiversityTable(r) + "</section>";
}

// The shifted test set (data.shift_test), when the run had one.
std::string ShiftSection(const json& r) {
  if (!r.contains("shift")) return "";
  const json& s = r["shift"];
  const bool classification = IsClassificationReport(r);
  const std::vector<std::pair<const char*, const char*>> scores =
      classification ? std::vector<std::pair<const char*, const char*>>{{"entropy", "entropy"},
                                                                         {"mutual_information", "mutual information"},
                                                                         {"max_probability", "1 - max probability"}}
                     : std::vector<std::pair<const char*, const char*>>{{"total_std", "total std"},
                                                                         {"epistemic_std", "epistemic std"}};
  std::string html =
      "<section><h2>Shifted inputs</h2><p>How well each predictive's uncertainty tells the " +
      s["rows"].dump() + " rows of <code>" + EscapeHtml(s.value("file", "")) + "</code> from the " +
      s["test_rows"].dump() +
      " test rows: the AUROC of each score, shifted rows counting as positives (0.5 = chance, 1 = "
      "every shifted row is more uncertain than every test row).</p><table><thead><tr>"
      "<th>predictive</th><th>networks</th>";
  for (const auto& [key, label] : scores) html += "<th>" + std::string(label) + "</th>";
  html += std::string("<th>mean ") + (classification ? "entropy" : "total std") +
          ", test / shifted</th></tr></thead><tbody>";
  for (const json& p : s["predictives"]) {
    html += "<tr><td>" + EscapeHtml(p["predictive"]) + "</td><td>" + p["components"].dump() + "</td>";
    for (const auto& [key, label] : scores) {
      html += "<td>" + (p["auroc"].contains(key) ? Num(p["auroc"][key], 3) : std::string("n/a")) + "</td>";
    }
    html += "<td>" + Num(p["mean_score_test"], 3) + " / " + Num(p["mean_score_shifted"], 3) + "</td></tr>";
  }
  return html +
         "</tbody></table><p class=\"note\">A network can be confidently wrong far from its "
         "training data (ReLU networks grow more confident the further an input lies from it), so a "
         "high AUROC here holds only for this kind of shift: check the shifts you expect in use. "
         "Mutual information needs more than one network.</p></section>";
}

std::string CalibrationSection(const json& r) {
  return "<section><h2>Calibration</h2><p>" +
         std::string(IsClassificationReport(r)
                         ? "Whether the ensemble is right as often as it says, before (T = 1) and "
                           "after the "
                           "temperature tuned on validation data."
                         : "Whether the predictive intervals hold as many test targets as they "
                           "claim, before "
                           "and after the standard-deviation scale tuned on validation data.") +
         "</p>" + CalibrationFigures(r) + "</section>";
}

// The size grid priced in CPU-seconds with the recommended point marked (report/compute_advice.h;
// absent in reports written before chorus recorded costs).
std::string CostTable(const json& r) {
  if (!r.contains("compute")) return "";
  const json& c = r["compute"];
  std::string html = "<p>" + EscapeHtml(c["text"].get<std::string>()) + "</p>";
  if (!c.contains("advice")) return html;
  html += "<table><thead><tr><th>members</th><th>samples each</th><th>CPU-seconds</th>"
          "<th>validation NLL</th><th>test NLL</th></tr></thead><tbody>";
  for (const json& p : r["size_curve"]) {
    const bool chosen = p["members"] == c["advice"]["members"] && p["samples"] == c["advice"]["samples"];
    html += std::string(chosen ? "<tr class=\"chosen\">" : "<tr>") + "<td>" + p["members"].dump() +
            (chosen ? " (recommended)" : "") + "</td><td>" + p["samples"].dump() + "</td><td>" +
            EscapeHtml(FormatSignificant(p["cpu_seconds"].get<double>(), 3)) + "</td><td>" +
            Num(p["validation_nll"]["mean"], 4) + "</td><td>" + Num(p["nll"]["mean"], 4) + "</td></tr>";
  }
  return html + "</tbody></table>";
}

std::string SizeSection(const json& r) {
  return "<section><h2>Ensemble size</h2><p>What another member (or another sample per member) "
         "buys: test quality of ensembles of every size, each tuned on validation.</p>" +
         SizeCurveFigures(r) + CostTable(r) + "</section>";
}

}  // namespace

// `chorus reference`'s comparison with an HMC posterior, once it has been run on this run.
std::string HmcReferenceSection(const json& r) {
  if (!r.contains("hmc_reference")) return "";
  const json& ref = r["hmc_reference"];
  const json& h = ref["hmc"];
  std::string html =
      "<section><h2>HMC reference</h2><p>How close each predictive comes to full-batch HMC on the "
      "same network, training rows and prior (" + h["kept_draws"].dump() + " kept draws from " +
      h["chains"].dump() + " chains; largest split R-hat of the test probabilities " +
      Num(h["max_r_hat"], 3) + ", smallest bulk ESS " + Num(h["min_ess"], 0) + ", " +
      h["divergences"].dump() + " divergences): agreement of the most probable class and mean "
      "total variation distance on the " + ref["test_rows"].dump() + " test rows.</p>";
  if (!h.value("converged", false)) {
    html += "<p class=\"warning\">R-hat is above 1.01: the chains disagree, so the reference is "
            "not yet a reliable yardstick.</p>";
  }
  html += "<table><thead><tr><th>predictive</th><th>top-1 agreement</th><th>total variation</th>"
          "<th>test NLL</th><th>accuracy</th></tr></thead><tbody>";
  for (const json& p : ref["predictives"]) {
    html += "<tr><td>" + EscapeHtml(p["predictive"]) + "</td><td>" + Num(p["top1_agreement"], 4) + "</td><td>" +
            Num(p["mean_total_variation"], 4) + "</td><td>" + Num(p["test"]["nll"], 4) + "</td><td>" +
            Num(p["test"]["accuracy"], 4) + "</td></tr>";
  }
  return html + "</tbody></table></section>";
}

std::string ReportHtml(const json& report) {
  return Head(report) + Header(report) + Caution(report) + KeyFigures(report) +
         TestSection(report) + SizeSection(report) + CalibrationSection(report) +
         UncertaintySection(report) + ShiftSection(report) + HmcReferenceSection(report) + MembersSection(report) + TrainingSectionHtml(report) +
         FactsSection(report) +
         "<footer>Written by chorus from report.json alone: one self-contained file, no scripts, "
         "nothing loaded from the network.</footer></main></body></html>\n";
}

}  // namespace chorus
