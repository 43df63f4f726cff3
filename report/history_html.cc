#include "report/history_html.h"

#include <string>
#include <vector>

#include "report/html_text.h"
#include "report/page_style.h"
#include "report/report_model.h"
#include "report/svg_chart.h"

namespace chorus {
namespace history_page {

using nlohmann::json;

bool IsClassification(const json& history) { return history["task"] == "classification"; }

// The second metric each row and chart shows beside NLL, and how to print it.
struct Metric {
  const char* key;
  const char* label;
  int decimals;
};
std::vector<Metric> Metrics(const json& history) {
  if (IsClassification(history)) return {{"nll", "NLL", 4}, {"accuracy", "accuracy", 4}, {"ece", "ECE", 4}};
  return {{"nll", "NLL", 4}, {"rmse", "RMSE", 4}, {"coverage_90", "90% coverage", 3}};
}

std::string Num(const json& v, int decimals) {
  return v.is_number() ? FormatFixed(v.get<double>(), decimals) : "&ndash;";
}

std::string Header(const json& h) {
  const json& d = h["decisions"];
  size_t promoted = 0;
  for (const json& x : d) promoted += x["verdict"] == "promote" ? 1 : 0;
  const std::string current = h["current"].is_string() ? h["current"].get<std::string>() : "none";
  return "<header><h1>Registry history<span class=\"badge\">" + EscapeHtml(h["task"].get<std::string>()) +
         "</span></h1><p class=\"sub\"><span class=\"hash\">" + EscapeHtml(h["registry"].get<std::string>()) +
         "</span> &middot; " + std::to_string(d.size()) + " decisions (" + std::to_string(promoted) +
         " promoted, " + std::to_string(d.size() - promoted) + " refused), " +
         std::to_string(h["rollbacks"].size()) + (h["rollbacks"].size() == 1 ? " rollback" : " rollbacks") +
         " &middot; current <span class=\"hash\">" +
         EscapeHtml(current) + "</span></p></header>";
}

std::string Caution() {
  return "<section class=\"caution\" role=\"note\"><h2>Caution</h2><p>" + EscapeHtml(kCautionText) +
         "</p><p>Each decision scored the candidate and the bundle then current on that night's guard "
         "data; when the guard data changes between nights (its hash is in the table), so does what "
         "the figures measure. Decisions and versions older than the registry keeps "
         "(<code>chorus promote --keep</code>) are no longer listed.</p></section>";
}

// One chart of metric `m` over the decisions: the candidates that were promoted, those refused,
// and the bundle each was compared with.
std::string MetricChart(const json& h, const Metric& m) {
  LineSeries promoted{"candidate, promoted", PaletteColour(0), {}, {}, {}, {}, false, {}};
  LineSeries refused{"candidate, refused", PaletteColour(1), {}, {}, {}, {}, false, {}};
  LineSeries current{"current bundle at the decision", PaletteColour(2), {}, {}, {}, {}, true, {}};
  const json& d = h["decisions"];
  for (size_t i = 0; i < d.size(); ++i) {
    const double x = static_cast<double>(i + 1);
    const json& candidate = d[i]["candidate"]["metrics"];
    const std::string when = d[i]["time"].get<std::string>();
    if (candidate.contains(m.key) && candidate[m.key].is_number()) {
      LineSeries& s = d[i]["verdict"] == "promote" ? promoted : refused;
      s.x.push_back(x);
      s.y.push_back(candidate[m.key].get<double>());
      s.tooltips.push_back(std::string(s.name) + ", " + when + ": " + Num(candidate[m.key], m.decimals));
    }
    if (d[i]["current"].is_object() && d[i]["current"]["metrics"].contains(m.key)) {
      const json& v = d[i]["current"]["metrics"][m.key];
      if (!v.is_number()) continue;
      current.x.push_back(x);
      current.y.push_back(v.get<double>());
      current.tooltips.push_back("current bundle, " + when + ": " + Num(v, m.decimals));
    }
  }
  LineChartSpec spec;
  spec.title = std::string("Guard ") + m.label + " at each decision";
  spec.x_label = "decision (oldest first)";
  spec.y_label = std::string("guard ") + m.label;
  for (LineSeries* s : {&promoted, &refused, &current}) {
    if (!s->x.empty()) spec.series.push_back(*s);
  }
  if (spec.series.empty()) return "";
  std::vector<double> ticks;
  for (size_t i = 0; i < d.size(); ++i) ticks.push_back(static_cast<double>(i + 1));
  spec.x_ticks = ticks;
  spec.x_range = std::make_pair(0.5, static_cast<double>(d.size()) + 0.5);
  return "<figure>" + LineChart(spec) + "<figcaption>" + EscapeHtml(spec.title) +
         "; hover a point for its time.</figcaption></figure>";
}

// The decision's training-data comparison when one was made (chorus promote's "shift" with
// "most_shifted"), else null: no current bundle, a bundle without summary, an older chorus.
const json* ShiftOf(const json& decision) {
  if (!decision.contains("shift") || !decision["shift"].is_object()) return nullptr;
  const json& s = decision["shift"];
  if (!s.contains("most_shifted") || !s["most_shifted"].is_array() || !s.contains("labels")) {
    return nullptr;
  }
  return &s;
}

// The largest column PSI ("" when no column was compared) and the labels' PSI.
std::string LargestShift(const json& shift) {
  const json& most = shift["most_shifted"];
  if (most.empty() || !most[0]["psi"].is_number()) return "";
  return most[0]["column"].get<std::string>() + " " + Num(most[0]["psi"], 3);
}

// The largest column PSI and the labels' PSI at each decision that compared training data, with
// the common-practice 0.25 line.
std::string ShiftChart(const json& h) {
  LineSeries column{"largest input-column PSI", PaletteColour(0), {}, {}, {}, {}, false, {}};
  LineSeries labels{"labels PSI", PaletteColour(1), {}, {}, {}, {}, false, {}};
  const json& d = h["decisions"];
  for (size_t i = 0; i < d.size(); ++i) {
    const json* shift = ShiftOf(d[i]);
    if (shift == nullptr) continue;
    const double x = static_cast<double>(i + 1);
    const std::string when = d[i]["time"].get<std::string>();
    const json& most = (*shift)["most_shifted"];
    if (!most.empty() && most[0]["psi"].is_number()) {
      column.x.push_back(x);
      column.y.push_back(most[0]["psi"].get<double>());
      column.tooltips.push_back(when + ": " + LargestShift(*shift));
    }
    if ((*shift)["labels"]["psi"].is_number()) {
      labels.x.push_back(x);
      labels.y.push_back((*shift)["labels"]["psi"].get<double>());
      labels.tooltips.push_back(when + ": labels PSI " + Num((*shift)["labels"]["psi"], 3));
    }
  }
  if (column.x.empty() && labels.x.empty()) return "";
  const double last = static_cast<double>(d.size()) + 0.5;
  const std::string band = "0.25: significant shift (common practice)";
  LineSeries line{band, PaletteColour(2), {0.5, last}, {0.25, 0.25}, {}, {}, true, {band, band}};
  LineChartSpec spec;
  spec.title = "Training-data shift against the bundle then current";
  spec.x_label = "decision (oldest first)";
  spec.y_label = "population stability index";
  for (LineSeries* s : {&column, &labels, &line}) {
    if (!s->x.empty()) spec.series.push_back(*s);
  }
  for (size_t i = 0; i < d.size(); ++i) spec.x_ticks.push_back(static_cast<double>(i + 1));
  spec.x_range = std::make_pair(0.5, last);
  return "<figure>" + LineChart(spec) + "<figcaption>" + EscapeHtml(spec.title) +
         "; hover a point for the column.</figcaption></figure>";
}

std::string ChartsSection(const json& h) {
  if (h["decisions"].empty()) return "";
  std::string charts;
  const std::vector<Metric> metrics = Metrics(h);
  for (size_t i = 0; i < 2; ++i) charts += MetricChart(h, metrics[i]);
  charts += ShiftChart(h);
  return "<section><h2>Over time</h2><div class=\"charts\">" + charts + "</div></section>";
}

std::string DecisionsSection(const json& h) {
  const std::vector<Metric> metrics = Metrics(h);
  std::string html =
      "<section><h2>Decisions</h2><table><thead><tr><th>#</th><th>time (UTC)</th><th>verdict</th>"
      "<th>run</th><th>guard rows</th><th>guard data</th>";
  for (const Metric& m : metrics) html += std::string("<th>") + m.label + "</th>";
  html += "<th>current NLL</th><th>largest PSI</th><th>labels PSI</th></tr></thead><tbody>";
  const json& d = h["decisions"];
  const int columns = 9 + static_cast<int>(metrics.size());
  for (size_t i = 0; i < d.size(); ++i) {
    const json& x = d[i];
    const bool now_current = h["current"].is_string() && x["version"] == h["current"];
    const std::string row_class = now_current ? " class=\"highlight\"" : "";
    html += "<tr" + row_class + "><td>" + std::to_string(i + 1) + "</td><td class=\"nowrap\">" +
            EscapeHtml(x["time"].get<std::string>()) + "</td><td>" + EscapeHtml(x["verdict"].get<std::string>()) +
            (now_current ? " (current)" : "") + "</td><td>" + EscapeHtml(x["candidate"]["run_name"].get<std::string>()) +
            "</td><td>" + std::to_string(x["guard"]["rows"].get<long long>()) + "</td><td class=\"hash nowrap\">" +
            EscapeHtml(x["guard"]["data_hash"].get<std::string>().substr(0, 8)) + "</td>";
    for (const Metric& m : metrics) html += "<td>" + Num(x["candidate"]["metrics"].value(m.key, json()), m.decimals) + "</td>";
    const json* shift = ShiftOf(x);
    const std::string largest = shift ? LargestShift(*shift) : "";
    html += "<td>" + (x["current"].is_object() ? Num(x["current"]["metrics"]["nll"], 4) : std::string("none")) +
            "</td><td class=\"nowrap\">" + (largest.empty() ? "&ndash;" : EscapeHtml(largest)) + "</td><td>" +
            (shift ? Num((*shift)["labels"]["psi"], 3) : "&ndash;") + "</td></tr><tr" + row_class + "><td></td><td colspan=\"" + std::to_string(columns - 1) +
            "\" class=\"reasons\">version <span class=\"hash\">" + EscapeHtml(x["version"].get<std::string>()) +
            "</span>: ";
    for (size_t r = 0; r < x["reasons"].size(); ++r) {
      html += (r ? "; " : "") + EscapeHtml(x["reasons"][r].get<std::string>());
    }
    html += "</td></tr>";
  }
  return html + "</tbody></table><p class=\"note\">Guard metrics on that night's guard data; NLL in "
                "nats per input. PSI: the population stability index of the candidate's training data "
                "against the bundle then current (below 0.1 little change, above 0.25 a significant "
                "shift, as common practice reads it); &ndash; where none was compared. The "
                "highlighted rows are the version current now.</p></section>";
}

std::string RollbacksSection(const json& h) {
  const json& r = h["rollbacks"];
  if (r.empty()) return "<section><h2>Rollbacks</h2><p>None.</p></section>";
  std::string html =
      "<section><h2>Rollbacks</h2><table><thead><tr><th>time (UTC)</th><th>from</th><th>to</th></tr>"
      "</thead><tbody>";
  for (const json& x : r) {
    html += "<tr><td class=\"nowrap\">" + EscapeHtml(x["time"].get<std::string>()) + "</td><td class=\"hash\">" +
            EscapeHtml(x["from"].get<std::string>()) + "</td><td class=\"hash\">" +
            EscapeHtml(x["to"].get<std::string>()) + "</td></tr>";
  }
  return html + "</tbody></table></section>";
}

}  // namespace history_page

std::string CheckDecision(const nlohmann::json& d) {
  if (!d.is_object()) return "expected a JSON object";
  for (const char* key : {"verdict", "time", "version", "task"}) {
    if (!d.contains(key) || !d[key].is_string()) return std::string("expected a string \"") + key + "\"";
  }
  if (!d.contains("reasons") || !d["reasons"].is_array()) return "expected a \"reasons\" array";
  for (const nlohmann::json& r : d["reasons"]) {
    if (!r.is_string()) return "expected \"reasons\" to hold strings";
  }
  if (!d.contains("guard") || !d["guard"].is_object() || !d["guard"].contains("rows") ||
      !d["guard"]["rows"].is_number_integer() || !d["guard"].contains("data_hash") || !d["guard"]["data_hash"].is_string()) {
    return "expected \"guard\" with integer \"rows\" and a string \"data_hash\"";
  }
  const auto bundle_ok = [](const nlohmann::json& b) {
    return b.is_object() && b.contains("metrics") && b["metrics"].is_object() && b["metrics"].contains("nll") &&
           b["metrics"]["nll"].is_number();
  };
  if (!d.contains("candidate") || !bundle_ok(d["candidate"]) || !d["candidate"].contains("run_name") ||
      !d["candidate"]["run_name"].is_string()) {
    return "expected \"candidate\" with a string \"run_name\" and numeric \"metrics\".\"nll\"";
  }
  if (!d.contains("current") || !(d["current"].is_null() || bundle_ok(d["current"]))) {
    return "expected \"current\": null or a bundle with numeric \"metrics\".\"nll\"";
  }
  return "";
}

std::string HistoryHtml(const nlohmann::json& history) {
  namespace page = history_page;
  return PageHead("chorus registry history: " + history["registry"].get<std::string>()) +
         page::Header(history) + page::Caution() + page::ChartsSection(history) +
         page::DecisionsSection(history) + page::RollbacksSection(history) +
         "<footer>Written by <code>chorus history</code> from the registry's decision files alone: one "
         "self-contained file, no scripts, nothing loaded from the network.</footer></main></body></html>\n";
}

}  // namespace chorus
