#include "report/report_training_html.h"

#include "report/html_text.h"

namespace chorus {
namespace {

using nlohmann::json;

std::string Widths(const json& hidden) {
  std::string out = "[";
  for (size_t i = 0; i < hidden.size(); ++i) out += (i ? ", " : "") + hidden[i].dump();
  return out + "]";
}

std::string Value(const json& v) {
  return v.is_number() ? FormatSignificant(v.get<double>(), 4) : EscapeHtml(v.dump());
}

std::string SchemeText(const json& r) {
  const json& v = r["validation"];
  const std::string method = v.value("method", "");
  std::string text = method == "cross-fitting"
      ? std::to_string(v.value("folds", 0)) + "-fold cross-fitting over all " +
            std::to_string(v.value("rows", 0)) + " training rows: weights, temperature and the "
            "baseline comparison use out-of-fold predictions; the members themselves trained on "
            "every training row."
      : "a " + method + " of " + std::to_string(v.value("rows", 0)) + " rows, never trained on.";
  if (r.contains("early_stopping")) {
    const json& e = r["early_stopping"];
    const std::string patience = " (patience " + std::to_string(e.value("patience", 0)) + " epochs)";
    if (!e.value("on", false)) {
      text += " Early stopping off: every member trained all its epochs.";
    } else if (method == "cross-fitting") {
      text += " Early stopping on validation NLL" + patience + ": each member, and its fold jobs "
              "replayed, stop at the epoch whose NLL over all its held-out rows was lowest.";
    } else {
      text += " Early stopping on validation NLL" + patience + ": each member keeps its best "
              "epoch's parameters.";
    }
  }
  return text;
}

std::string SettingsText(const json& r) {
  if (!r.contains("settings")) return "";
  const json& s = r["settings"];
  const std::string beta = r["task"] == "regression" ? ", beta-NLL " + Value(s["beta_nll"]) : "";
  return "<p>Settings used: hidden " + Widths(s["hidden"]) + ", learning rate " + Value(s["lr"]) +
         ", weight decay " + Value(s["weight_decay"]) + beta + ", at most " + Value(s["epochs"]) +
         " epochs.</p>";
}

std::string KeptEpochs(const json& r) {
  std::string cells;
  for (const json& m : r["members"]) {
    if (!m.contains("best_epoch")) return "";
    const json stop = m.value("stop_epoch", json());
    cells += "<tr><td>" + m["index"].dump() + "</td><td>" +
             (stop.is_number() && stop.get<int>() > 0 ? stop.dump() : m["best_epoch"].dump()) +
             "</td><td>" + Value(m.value("epochs_trained", json())) + "</td></tr>";
  }
  return "<table><thead><tr><th>member</th><th>kept epoch</th><th>epochs trained</th></tr></thead>"
         "<tbody>" + cells + "</tbody></table>";
}

std::string SearchTable(const json& r) {
  if (!r.contains("search")) return "";
  const json& s = r["search"];
  std::string html = "<h3>Search grid</h3><table><thead><tr><th>point</th><th>hidden</th>"
                     "<th>lr</th><th>weight decay</th><th>beta-NLL</th><th>validation NLL</th>"
                     "<th>epoch</th></tr></thead><tbody>";
  for (size_t p = 0; p < s["points"].size(); ++p) {
    const json& point = s["points"][p];
    const bool chosen = static_cast<int>(p) == s.value("chosen", -1);
    html += std::string(chosen ? "<tr class=\"highlight\">" : "<tr>") + "<td>" + std::to_string(p) +
            (chosen ? " (chosen)" : "") + "</td><td>" + Widths(point["hidden"]) + "</td><td>" +
            Value(point["lr"]) + "</td><td>" + Value(point["weight_decay"]) + "</td><td>" +
            Value(point["beta_nll"]) + "</td><td>" +
            (point["validation_nll"].is_number() ? FormatFixed(point["validation_nll"], 4)
                                                 : "failed: " + EscapeHtml(point.value("failure", ""))) +
            "</td><td>" + Value(point.value("best_epoch", json())) + "</td></tr>";
  }
  return html + "</tbody></table><p class=\"note\">Each point: one network on member 0's seed, scored "
                "by its validation NLL at the epoch best over all its held-out rows.</p>";
}

}  // namespace

std::string BaselineVerdictHtml(const json& r) {
  if (!r.contains("baseline")) return "";
  const json& b = r["baseline"];
  const bool wins = b.value("better_on_validation", false);
  return std::string("<p class=\"") + (wins ? "verdict warn" : "verdict") + "\">" +
         EscapeHtml(b.value("verdict", "")) + " Baseline: " + EscapeHtml(b.value("model", "")) + ".</p>";
}

std::string TrainingSectionHtml(const json& r) {
  if (!r.contains("validation")) return "";
  return "<section><h2>Training</h2><p>Validation: " + EscapeHtml(SchemeText(r)) + "</p>" +
         SettingsText(r) + KeptEpochs(r) + SearchTable(r) + "</section>";
}

}  // namespace chorus
