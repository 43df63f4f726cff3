#include "report/report_charts.h"

#include <set>
#include <utility>
#include <vector>

#include "report/html_text.h"
#include "report/report_model.h"
#include "report/svg_chart.h"

namespace chorus {

const char* const kCalibratedColour = "#0072B2";
const char* const kUncalibratedColour = "#D55E00";

namespace {

using nlohmann::json;

struct Metric {
  const char* key;
  const char* label;
};

std::vector<Metric> SizeCurveMetrics(const json& report) {
  if (report["task"] == "classification") {
    return {{"nll", "test NLL (nats)"}, {"accuracy", "test accuracy"}, {"ece", "test ECE"}};
  }
  return {{"nll", "test NLL (nats)"},
          {"rmse", "test RMSE (target units)"},
          {"coverage_90", "test coverage of the 90% interval"}};
}

std::string Figure(const std::string& svg, const std::string& caption) {
  return "<figure>" + svg + "<figcaption>" + caption + "</figcaption></figure>";
}

std::string Note(const std::string& text) { return "<p class=\"note\">" + text + "</p>"; }


// One series of a size-curve chart: the points with `fixed_key` == fixed_value, against `x_key`;
// with `band`, shaded from min to max over the member subsets.
LineSeries SizeSeries(const json& curve, const char* x_key, const char* fixed_key, int fixed_value,
                      const char* metric, bool band, size_t colour) {
  LineSeries s;
  s.colour = PaletteColour(colour);
  for (const json& p : curve) {
    if (p[fixed_key] != fixed_value || !p.contains(metric)) continue;
    s.x.push_back(p[x_key].get<double>());
    s.y.push_back(p[metric]["mean"].get<double>());
    if (!band) continue;
    s.low.push_back(p[metric]["min"].get<double>());
    s.high.push_back(p[metric]["max"].get<double>());
  }
  return s;
}

std::string Count(int n, const char* singular, const char* plural) {
  return std::to_string(n) + " " + (n == 1 ? singular : plural);
}

std::set<int> Distinct(const json& curve, const char* key) {
  std::set<int> values;
  for (const json& p : curve) values.insert(p[key].get<int>());
  return values;
}

std::string OverMembers(const json& report, const Metric& metric, const std::set<int>& samples) {
  const json& curve = report["size_curve"];
  LineChartSpec spec;
  spec.title = std::string(metric.label) + " against the number of members";
  spec.x_label = "members in the ensemble";
  spec.y_label = metric.label;
  for (int k : Distinct(curve, "members")) spec.x_ticks.push_back(k);
  for (int s : samples) {
    spec.series.push_back(SizeSeries(curve, "members", "samples", s, metric.key,
                                     s == *samples.rbegin(), spec.series.size()));
    spec.series.back().name = samples.size() == 1
                                  ? "mean over member subsets"
                                  : Count(s, "sample per member", "samples per member");
  }
  return LineChart(spec);
}

std::string OverSamples(const json& report, const Metric& metric, const std::set<int>& members) {
  const json& curve = report["size_curve"];
  LineChartSpec spec;
  spec.title = std::string(metric.label) + " against samples per member";
  spec.x_label = "samples per member (log scale)";
  spec.y_label = metric.label;
  spec.log_x = true;
  for (int s : Distinct(curve, "samples")) spec.x_ticks.push_back(s);
  const int most = *members.rbegin();
  for (int k : std::set<int>{1, (most + 1) / 2, most}) {
    if (members.count(k) == 0) continue;
    spec.series.push_back(
        SizeSeries(curve, "samples", "members", k, metric.key, k == 1, spec.series.size()));
    spec.series.back().name = Count(k, "member", "members");
  }
  return LineChart(spec);
}

// The caption of a size-curve chart against members.
std::string OverMembersCaption(const json& report, const Metric& m, const std::set<int>& samples) {
  std::string caption = std::string("<strong>") + m.label +
                        " against members.</strong> Lines: "
                        "mean over random subsets of that many members, each calibrated on "
                        "validation on its own; band: min to max over the subsets";
  caption += samples.size() > 1 ? " (drawn for the most samples per member)." : ".";
  if (std::string(m.key) == "nll" && report.contains("bayes_optimal_test_nll")) {
    caption += " Bayes-optimal test NLL (true probabilities known): " +
               FormatFixed(report["bayes_optimal_test_nll"], 4) + ".";
  }
  return caption;
}

}  // namespace

std::string SizeCurveFigures(const json& report) {
  const json& curve = report["size_curve"];
  if (curve.empty()) return Note("This report.json holds no size curve.");
  const std::set<int> samples = Distinct(curve, "samples"), members = Distinct(curve, "members");
  std::string html = "<div class=\"charts\">";
  for (const Metric& m : SizeCurveMetrics(report)) {
    html += Figure(OverMembers(report, m, samples), OverMembersCaption(report, m, samples));
  }
  if (samples.size() > 1) {
    for (const Metric& m : SizeCurveMetrics(report)) {
      html +=
          Figure(OverSamples(report, m, members),
                 std::string("<strong>") + m.label +
                     " against samples per member</strong> "
                     "drawn from each member's basin fit. Band: min to max over single members.");
    }
  }
  return html + "</div>";
}

namespace {

std::string ReliabilityTooltip(const std::string& series, const json& bin) {
  return series + ": confidence " + FormatFixed(bin["lower"], 3) + " to " +
         FormatFixed(bin["upper"], 3) + ", " + std::to_string(bin["count"].get<int64_t>()) +
         " predictions, mean confidence " + FormatFixed(bin["confidence"], 3) + ", accuracy " +
         FormatFixed(bin["accuracy"], 3);
}

LineSeries ReliabilitySeries(const json& bins, std::string name, const char* colour, bool dashed) {
  LineSeries s;
  s.name = std::move(name);
  s.colour = colour;
  s.dashed = dashed;
  for (const json& bin : bins) {
    if (bin["count"].get<int64_t>() == 0) continue;
    s.x.push_back(bin["confidence"]);
    s.y.push_back(bin["accuracy"]);
    s.tooltips.push_back(ReliabilityTooltip(s.name, bin));
  }
  return s;
}

BarGroup CountGroup(const json& bins, std::string name, const char* colour) {
  BarGroup g;
  g.name = std::move(name);
  g.colour = colour;
  for (const json& bin : bins) {
    g.heights.push_back(bin["count"].get<double>());
    g.tooltips.push_back(g.name + ": " + std::to_string(bin["count"].get<int64_t>()) +
                         " predictions with confidence " + FormatFixed(bin["lower"], 3) + " to " +
                         FormatFixed(bin["upper"], 3));
  }
  return g;
}

std::string TunedName(const json& report, const char* symbol) {
  return std::string("tuned ") + symbol + " = " + FormatFixed(report["temperature"], 3);
}

// A calibration chart on the unit square: observed against nominal, the diagonal as the ideal,
// before and after the tuned temperature or scale.
LineChartSpec CalibrationChart(std::string title, std::string x_label, std::string y_label,
                               LineSeries before, LineSeries after) {
  LineChartSpec spec;
  spec.title = std::move(title);
  spec.x_label = std::move(x_label);
  spec.y_label = std::move(y_label);
  spec.x_range = spec.y_range = std::make_pair(0.0, 1.0);
  spec.identity_label = "perfectly calibrated";
  spec.series = {std::move(before), std::move(after)};
  return spec;
}

std::string ReliabilityFigures(const json& report) {
  const json& r = report["reliability"];
  const LineChartSpec spec = CalibrationChart(
      "Reliability diagram of the ensemble on test", "mean top-label confidence in bin",
      "accuracy in bin", ReliabilitySeries(r["uncalibrated"], "T = 1", kUncalibratedColour, true),
      ReliabilitySeries(r["calibrated"], TunedName(report, "T"), kCalibratedColour, false));
  BarChartSpec counts;
  counts.title = "Test predictions per confidence bin";
  counts.x_label = "top-label confidence";
  counts.y_label = "test predictions";
  for (const json& bin : r["calibrated"]) counts.edges.push_back(bin["lower"]);
  counts.edges.push_back(r["calibrated"].back()["upper"]);
  counts.groups = {CountGroup(r["uncalibrated"], "T = 1", kUncalibratedColour),
                   CountGroup(r["calibrated"], TunedName(report, "T"), kCalibratedColour)};
  return Figure(LineChart(spec),
                "<strong>Reliability diagram.</strong> Each point is one confidence bin: its mean "
                "confidence against how often the ensemble was right. Below the diagonal means "
                "over-confident, above it under-confident.") +
         Figure(BarChart(counts),
                "<strong>Predictions per confidence bin</strong>, before and "
                "after the temperature: how many inputs each point stands for.");
}

LineSeries CoverageSeries(const json& levels, std::string name, const char* colour, bool dashed) {
  LineSeries s;
  s.name = std::move(name);
  s.colour = colour;
  s.dashed = dashed;
  for (const json& level : levels) {
    s.x.push_back(level["nominal"]);
    s.y.push_back(level["observed"]);
  }
  return s;
}

std::string IntervalCoverageFigure(const json& report) {
  const json& c = report["interval_coverage"];
  const LineChartSpec spec = CalibrationChart(
      "Coverage of central predictive intervals on test", "nominal coverage of the central interval",
      "observed share of test targets inside",
      CoverageSeries(c["uncalibrated"], "scale 1", kUncalibratedColour, true),
      CoverageSeries(c["calibrated"], TunedName(report, "scale"), kCalibratedColour, false));
  return Figure(
      LineChart(spec),
      "<strong>Interval calibration</strong> (the regression counterpart of a reliability "
      "diagram). Below the diagonal: intervals too narrow; above: too wide.");
}

}  // namespace

std::string CalibrationFigures(const json& report) {
  if (IsClassificationReport(report) && report.contains("reliability")) {
    return "<div class=\"charts\">" + ReliabilityFigures(report) + "</div>";
  }
  if (!IsClassificationReport(report) && report.contains("interval_coverage")) {
    return "<div class=\"charts\">" + IntervalCoverageFigure(report) + "</div>";
  }
  return Note(
      "This report.json holds no calibration diagram (written by an older chorus); "
      "rerun <code>chorus run</code> to get one.");
}

namespace {

// One histogram group as the share (%) of its own inputs per bin, so groups of different sizes
// compare by shape.
BarGroup ShareGroup(const json& group, const json& edges, const std::string& quantity,
                    const char* colour) {
  double total = 0;
  for (const json& c : group["counts"]) total += c.get<double>();
  BarGroup g;
  g.name = group["name"].get<std::string>() + " (n = " + FormatFixed(total, 0) + ")";
  g.colour = colour;
  for (size_t b = 0; b < group["counts"].size(); ++b) {
    const double count = group["counts"][b];
    g.heights.push_back(total > 0 ? 100 * count / total : 0);
    g.tooltips.push_back(g.name + ": " + FormatFixed(count, 0) + " inputs (" +
                         FormatFixed(g.heights.back(), 1) + "%) with " + quantity + " " +
                         FormatSignificant(edges[b], 3) + " to " +
                         FormatSignificant(edges[b + 1], 3));
  }
  return g;
}

std::string HistogramFigure(const json& h, bool classification) {
  BarChartSpec spec;
  const std::string quantity = h["quantity"];
  spec.title = "Epistemic uncertainty on test: " + quantity;
  spec.x_label = quantity;
  spec.y_label = "share of the group (%)";
  spec.edges = h["edges"].get<std::vector<double>>();
  spec.groups = {ShareGroup(h["groups"][0], h["edges"], quantity, kCalibratedColour),
                 ShareGroup(h["groups"][1], h["edges"], quantity, kUncalibratedColour)};
  return Figure(BarChart(spec),
                std::string("<strong>Where the members disagree.</strong> Epistemic uncertainty ") +
                    (classification ? "for correct and wrong predictions"
                                    : "for targets inside and outside the 90% interval") +
                    ", each group as shares of itself. The last bin also holds the top 1%.");
}

std::string SelectiveFigure(const json& points, bool classification) {
  const char* key = classification ? "accuracy" : "rmse";
  LineChartSpec spec;
  spec.title = classification ? "Selective prediction: accuracy on the most confident inputs"
                              : "Selective prediction: RMSE on the least uncertain inputs";
  spec.x_label = classification ? "share of test inputs kept, most confident first"
                                : "share of test inputs kept, least total variance first";
  spec.y_label = classification ? "test accuracy" : "test RMSE (target units)";
  LineSeries s;
  s.name = classification ? "accuracy of the kept inputs" : "RMSE of the kept inputs";
  s.colour = kCalibratedColour;
  for (const json& p : points) {
    s.x.push_back(p["coverage"]);
    s.y.push_back(p[key]);
  }
  spec.series = {s};
  return Figure(
      LineChart(spec),
      classification
          ? "<strong>Selective prediction.</strong> Accuracy if only the most confident share of "
            "inputs is acted on and the rest goes to a person."
          : "<strong>Selective prediction.</strong> RMSE if only the least uncertain share of "
            "inputs is acted on and the rest goes to a person.");
}

}  // namespace

std::string UncertaintyFigures(const json& report) {
  const json& u = report["uncertainty"];
  const bool classification = IsClassificationReport(report);
  const char* selective = classification ? "selective_accuracy" : "selective_rmse";
  if (!u.contains("epistemic_histogram") || !u.contains(selective)) {
    return Note(
        "This report.json holds no uncertainty histogram or selective-prediction curve "
        "(written by an older chorus); rerun <code>chorus run</code> to get them.");
  }
  return "<div class=\"charts\">" + HistogramFigure(u["epistemic_histogram"], classification) +
         SelectiveFigure(u[selective], classification) + "</div>";
}

}  // namespace chorus
