#include "coordinator/run_report.h"

#include <cmath>
#include <sstream>

namespace chorus {

const char* const kCautionText =
    "These probabilities were calibrated on held-out data drawn like the training data. Under "
    "distribution shift (new sites, sensors, customers, seasons) they can be badly wrong. Validate "
    "on your own recent data before a model drives a decision that can harm someone, and follow "
    "your organisation's model-risk rules and local regulation.";

namespace {

using nlohmann::json;

json ScoresJson(Task task, const Scores& s) {
  if (task == Task::kClassification) {
    const ClassificationMetrics& c = s.classification;
    return {{"accuracy", c.accuracy}, {"nll", c.nll}, {"brier", c.brier}, {"ece", c.ece}};
  }
  const RegressionMetrics& r = s.regression;
  return {{"rmse", r.rmse}, {"nll", r.nll}, {"coverage_90", r.coverage_90}};
}

json SpreadJson(const Spread& s) { return {{"mean", s.mean}, {"min", s.min}, {"max", s.max}}; }

json SizeCurveJson(Task task, const std::vector<SizeCurvePoint>& curve) {
  json out = json::array();
  for (const SizeCurvePoint& p : curve) {
    json point = {{"members", p.members}, {"samples", p.samples}, {"nll", SpreadJson(p.nll)}};
    if (task == Task::kClassification) {
      point["accuracy"] = SpreadJson(p.accuracy);
      point["ece"] = SpreadJson(p.ece);
    } else {
      point["rmse"] = SpreadJson(p.rmse);
      point["coverage_90"] = SpreadJson(p.coverage_90);
    }
    out.push_back(point);
  }
  return out;
}

}  // namespace

json ReportJson(const EnsembleEvaluation& ev, const PreparedData& data, const RunFacts& facts) {
  json members = json::array();
  for (const MemberScores& m : ev.members) {
    members.push_back({{"index", m.index}, {"seed", std::to_string(m.seed)}, {"samples", m.samples},
                       {"validation_nll", m.validation_nll}, {"test", ScoresJson(ev.task, m.test)},
                       {"test_trained_point", ScoresJson(ev.task, m.test_point)}});
  }
  const UncertaintySummary& u = ev.uncertainty;
  json uncertainty = {{"unit", ev.task == Task::kClassification ? "nats (entropy)" : "target units squared (variance)"},
                      {"test_mean", {{"total", u.total}, {"aleatoric", u.aleatoric}, {"epistemic", u.epistemic}}}};
  if (ev.task == Task::kClassification) {
    uncertainty["auroc_misclassified"] = {{"total", u.auroc_total}, {"aleatoric", u.auroc_aleatoric},
                                          {"epistemic", u.auroc_epistemic}};
    json selective = json::array();
    for (size_t i = 0; i < u.coverages.size(); ++i) {
      selective.push_back({{"coverage", u.coverages[i]}, {"accuracy", u.selective_accuracy[i]}});
    }
    uncertainty["selective_accuracy"] = selective;
  }
  json report = {
      {"name", facts.name},
      {"task", TaskName(ev.task)},
      {"ensemble", {{"test", ScoresJson(ev.task, ev.test)},
                    {"test_uncalibrated", ScoresJson(ev.task, ev.test_uncalibrated)}}},
      {"mean_member", {{"test", ScoresJson(ev.task, ev.mean_member)}}},
      {"best_member", {{"index", ev.members[ev.best_member].index},
                       {"chosen_by", "validation nll"},
                       {"test", ScoresJson(ev.task, ev.members[ev.best_member].test)}}},
      {"members", members},
      {"temperature", ev.temperature},
      {"weighting", WeightingName(ev.weighting)},
      {"weights", ev.weights},
      {"validation_nll_weighted", ev.validation_nll_weighted},
      {"uncertainty", uncertainty},
      {"size_curve", SizeCurveJson(ev.task, ev.size_curve)},
      {"data_hash", facts.data_hash},
      {"config_hash", facts.config_hash},
      {"data", {{"train_rows", data.train.rows()}, {"validation_rows", data.validation.rows()},
                {"test_rows", data.test.rows()}, {"features", data.features()},
                {"classes", data.class_names}}},
      {"members_planned", facts.members_planned},
      {"failed_members", facts.failed_members},
      {"wall_seconds", facts.wall_seconds},
      {"caution", kCautionText},
  };
  if (ev.bayes_optimal_test_nll) report["bayes_optimal_test_nll"] = *ev.bayes_optimal_test_nll;
  if (ev.test_without_basin) {
    report["ensemble"]["test_without_basin"] = ScoresJson(ev.task, *ev.test_without_basin);
  }
  return report;
}

namespace {

std::string Escape(const std::string& s) {
  std::string out;
  for (char c : s) {
    switch (c) {
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '&': out += "&amp;"; break;
      case '"': out += "&quot;"; break;
      default: out += c;
    }
  }
  return out;
}

std::string Cell(const json& v) {
  std::ostringstream s;
  if (v.is_number_float()) s.precision(4), s << std::fixed << v.get<double>();
  else if (v.is_string()) s << Escape(v.get<std::string>());
  else s << Escape(v.dump());
  return "<td>" + s.str() + "</td>";
}

// One table row per (label, metrics object); columns are the metric keys of the first row.
std::string MetricsTable(const std::vector<std::pair<std::string, json>>& rows) {
  std::string html = "<table><tr><th></th>";
  for (const auto& kv : rows.front().second.items()) html += "<th>" + Escape(kv.key()) + "</th>";
  html += "</tr>";
  for (const auto& [label, metrics] : rows) {
    html += "<tr><th>" + Escape(label) + "</th>";
    for (const auto& kv : metrics.items()) html += Cell(kv.value());
    html += "</tr>";
  }
  return html + "</table>";
}

std::string SizeCurveTable(const json& curve) {
  std::string html = "<table><tr><th>members</th><th>samples</th>";
  std::vector<std::string> keys;
  for (const auto& kv : curve.front().items()) {
    if (kv.value().is_object()) keys.push_back(kv.key());
  }
  for (const auto& k : keys) html += "<th>" + Escape(k) + " mean [min, max]</th>";
  html += "</tr>";
  for (const json& p : curve) {
    html += "<tr>" + Cell(p["members"]) + Cell(p["samples"]);
    for (const auto& k : keys) {
      std::ostringstream s;
      s.precision(4);
      s << std::fixed << p[k]["mean"].get<double>() << " [" << p[k]["min"].get<double>() << ", "
        << p[k]["max"].get<double>() << "]";
      html += "<td>" + s.str() + "</td>";
    }
    html += "</tr>";
  }
  return html + "</table>";
}

}  // namespace

std::string ReportHtml(const json& r) {
  std::vector<std::pair<std::string, json>> summary = {
      {"mean member", r["mean_member"]["test"]},
      {"best member (by validation NLL)", r["best_member"]["test"]},
      {"ensemble, T = 1", r["ensemble"]["test_uncalibrated"]},
      {"ensemble, tuned T", r["ensemble"]["test"]}};
  if (r["ensemble"].contains("test_without_basin")) {
    summary.insert(summary.begin() + 2, {"ensemble of trained points (no basin samples), tuned T",
                                         r["ensemble"]["test_without_basin"]});
  }
  std::vector<std::pair<std::string, json>> members;
  for (size_t m = 0; m < r["members"].size(); ++m) {
    json row = r["members"][m]["test"];
    row["weight"] = r["weights"][m];
    members.push_back({"member " + r["members"][m]["index"].dump(), row});
  }
  std::ostringstream html;
  html << "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>chorus report: "
       << Escape(r["name"].get<std::string>()) << "</title><style>"
       << "body{font-family:sans-serif;max-width:60em;margin:2em auto;color:#222}"
       << "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #ccc;padding:.3em .6em;"
       << "text-align:right}th{background:#f4f4f4}.caution{border-left:4px solid #c60;padding:.5em 1em;"
       << "background:#fff6ee}</style></head><body>";
  html << "<h1>chorus report: " << Escape(r["name"].get<std::string>()) << "</h1>";
  html << "<p class=\"caution\"><strong>Caution.</strong> " << Escape(kCautionText) << "</p>";
  html << "<h2>Test set</h2>" << MetricsTable(summary);
  html << "<p>Temperature " << r["temperature"].dump() << " (tuned on validation data only).</p>";
  if (r.contains("bayes_optimal_test_nll")) {
    html << "<p>Bayes-optimal test NLL (true probabilities known for this invented data): "
         << r["bayes_optimal_test_nll"].dump() << "</p>";
  }
  html << "<h2>Uncertainty on test (" << Escape(r["uncertainty"]["unit"].get<std::string>()) << ")</h2>"
       << MetricsTable({{"mean per input", r["uncertainty"]["test_mean"]}});
  if (r["uncertainty"].contains("auroc_misclassified")) {
    html << "<p>How well each part flags misclassified inputs (AUROC; 0.5 = no better than chance):</p>"
         << MetricsTable({{"AUROC", r["uncertainty"]["auroc_misclassified"]}});
    std::vector<std::pair<std::string, json>> selective;
    for (const json& p : r["uncertainty"]["selective_accuracy"]) {
      selective.push_back({"most confident " + std::to_string(static_cast<int>(std::lround(100 * p["coverage"].get<double>()))) + "%",
                           {{"accuracy", p["accuracy"]}}});
    }
    html << "<h3>Selective prediction</h3>" << MetricsTable(selective);
  }
  html << "<h2>Members (weighting: " << Escape(r["weighting"].get<std::string>()) << ")</h2>"
       << MetricsTable(members);
  html << "<h2>Size curve</h2>" << SizeCurveTable(r["size_curve"]);
  html << "<h2>Facts</h2><table>";
  for (const char* key : {"data_hash", "config_hash", "members_planned", "wall_seconds"}) {
    html << "<tr><th>" << key << "</th>" << Cell(r[key]) << "</tr>";
  }
  html << "<tr><th>failed members</th>" << Cell(r["failed_members"]) << "</tr></table>";
  html << "</body></html>\n";
  return html.str();
}

}  // namespace chorus
