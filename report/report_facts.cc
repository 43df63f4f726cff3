#include "report/report_facts.h"

#include <cstdio>
#include <string>
#include <utility>
#include <vector>

#include "report/html_text.h"

namespace chorus {
namespace {

using nlohmann::json;

// A JSON value as plain text: strings unquoted, numbers as written, the rest as JSON.
std::string Text(const json& v) { return v.is_string() ? v.get<std::string>() : v.dump(); }

std::string Seconds(const json& v) {
  return v.is_number() ? FormatFixed(v.get<double>(), 1) + " s" : "not recorded";
}

std::string DataFacts(const json& d) {
  std::string text = Text(d.value("train_rows", json())) + " train, " +
                     Text(d.value("validation_rows", json())) + " validation, " +
                     Text(d.value("test_rows", json())) + " test rows; " +
                     Text(d.value("features", json())) + " features";
  const json classes = d.value("classes", json::array());
  if (!classes.empty()) {
    text += "; classes: ";
    for (size_t i = 0; i < classes.size(); ++i) text += (i ? ", " : "") + Text(classes[i]);
  }
  return EscapeHtml(text);
}

// An object's fields as "key: value, ..." in its key order; anything else as plain text.
std::string Fields(const json& v) {
  if (!v.is_object()) return EscapeHtml(Text(v));
  std::string line;
  for (const auto& item : v.items()) {
    line += (line.empty() ? "" : ", ") + item.key() + ": " + Text(item.value());
  }
  return EscapeHtml(line);
}

// One line per worker.
std::string Workers(const json& manifest) {
  const json workers = manifest.value("workers", json::array());
  if (!workers.is_array() || workers.empty()) return "none recorded";
  std::string html;
  for (const json& w : workers) html += (html.empty() ? "" : "<br>") + Fields(w);
  return html;
}

std::string FailedMembers(const json& failed) {
  if (failed.empty()) return "none";
  std::string html = "<ul>";
  for (const json& f : failed) html += "<li>" + EscapeHtml(Text(f)) + "</li>";
  return html + "</ul>";
}

std::vector<std::pair<std::string, std::string>> ManifestRows(const json& r) {
  if (!r.contains("manifest") || !r["manifest"].is_object()) {
    return {{"workers seen",
             "not in this report.json: run <code>chorus report RUN_DIR</code> to "
             "add them from manifest.json"}};
  }
  const json& m = r["manifest"];
  return {{"chorus version", EscapeHtml(Text(m.value("chorus_version", json("unknown"))))},
          {"run status", EscapeHtml(Text(m.value("status", json("unknown"))))},
          {"wall time, whole run", Seconds(m.value("wall_seconds", json()))},
          {"run seed", EscapeHtml(Text(m.value("run_seed", json("unknown"))))},
          {"matrix backend", EscapeHtml(Text(m.value("gemm_backend", json("unknown"))))},
          {"coordinator", m.contains("coordinator") ? Fields(m["coordinator"]) : "not recorded"},
          {"workers seen", Workers(m)}};
}

// "training jobs 120.3 s (93.1%), size grid 2.1 s (1.6%), ...": report.json's phases, each with
// its share of the total.
std::string Phases(const json& phases) {
  if (!phases.is_array() || phases.empty() || phases.back().value("phase", "") != "total") return "not recorded";
  const double total = phases.back().value("seconds", 0.0);
  std::string text;
  for (const json& p : phases) {
    if (p.value("phase", "") == "total") continue;
    const double s = p.value("seconds", 0.0);
    char share[32];
    std::snprintf(share, sizeof share, " (%.1f%%)", total > 0 ? 100.0 * s / total : 0.0);
    text += (text.empty() ? "" : ", ") + EscapeHtml(p.value("phase", "")) + " " + Seconds(json(s)) + share;
  }
  return text;
}

}  // namespace

std::string FactsSection(const json& r) {
  const std::string hash = "<span class=\"hash\">";
  std::vector<std::pair<std::string, std::string>> rows = {
      {"run name", EscapeHtml(r["name"])},
      {"task", EscapeHtml(r["task"])},
      {"data hash", hash + EscapeHtml(r["data_hash"]) + "</span>"},
      {"config hash", hash + EscapeHtml(r["config_hash"]) + "</span>"},
      {"data", r.contains("data") ? DataFacts(r["data"]) : "not recorded"},
      {"members", std::to_string(r["members"].size()) + " finished of " +
                      Text(r["members_planned"]) + " planned"},
      {"failed members", FailedMembers(r["failed_members"])},
      {"wall time to evaluation", Seconds(r.value("wall_seconds", json()))},
      {"wall time by phase", Phases(r.value("phases", json()))},
  };
  for (auto& row : ManifestRows(r)) rows.push_back(std::move(row));
  std::string html = "<section><h2>Run facts</h2><table class=\"facts\"><tbody>";
  for (const auto& [label, value] : rows) {
    html += "<tr><th>" + label + "</th><td>" + value + "</td></tr>";
  }
  return html + "</tbody></table></section>";
}

}  // namespace chorus
