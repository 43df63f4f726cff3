// chorus-demo-data: writes the invented demo data set. The scenario is fictional: the
// "Brackwater Valley Water Board" and its pump stations do not exist, and every number is drawn
// from the formulas below. Because the true class probabilities are known, the demo report can
// show the Bayes-optimal test NLL an ensemble is approaching.
//
// Files written to OUT_DIR:
//   alarms_train.csv, alarms_test.csv        classification: target column "cause"
//   alarms_test_probabilities.csv            the true P(cause | features) of each test row
//   faults_train.csv, faults_test.csv        regression: target column "hours_to_fault"
//   alarms_shifted.csv                       shifted inputs for data.shift_test: alarms exported
//                                            by a (fictional) faulty firmware that wrote the six
//                                            readings one column to the right, the last one first,
//                                            under the usual header; no cause column
#include <CLI/CLI.hpp>

#include <array>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "common/file_util.h"
#include "common/rng.h"

namespace {

constexpr std::array<const char*, 5> kStations = {"north_weir", "mill_lane", "harbour_road",
                                                  "quarry_hill", "fenside"};
constexpr std::array<const char*, 5> kCauses = {"bearing_wear", "cavitation", "electrical",
                                                "blockage", "sensor_fault"};
constexpr std::array<double, 5> kStationOffset = {0.4, -0.3, 0.0, 0.6, -0.5};

// One alarm: latent standardised state z and the sensor readings derived from it.
struct Alarm {
  int station = 0;
  double vib = 0, temp = 0, pressure = 0, flow = 0, current = 0, days = 0;  // z-scores
  std::array<double, 5> probs{};
  int cause = 0;
  double hours = 0;
};

Alarm Draw(chorus::Philox& rng) {
  Alarm a;
  a.station = static_cast<int>(rng.NextBelow(kStations.size()));
  const double s = kStationOffset[a.station];
  const double load = rng.NextNormal();  // shared factor: correlates flow, current and temperature
  a.vib = rng.NextNormal() + 0.3 * s;
  a.temp = 0.6 * load + 0.8 * rng.NextNormal();
  a.pressure = rng.NextNormal() - 0.4 * s;
  a.flow = 0.7 * load + 0.7 * rng.NextNormal();
  a.current = 0.7 * load + 0.7 * rng.NextNormal();
  a.days = rng.NextNormal();
  // True cause logits: smooth functions with interactions, so a network has something to learn.
  const std::array<double, 5> logit = {
      1.4 * a.vib + 0.8 * a.days + 0.5 * a.vib * a.days,
      -1.3 * a.pressure + 0.9 * a.flow + 0.8 * s,
      1.5 * a.current + 0.8 * a.temp - 0.4 * a.vib,
      -1.3 * a.flow + 0.9 * a.pressure + 0.5 * a.current,
      0.2 + 1.1 * std::fabs(a.temp - a.current) - 0.3 * a.days * a.days};
  // p = softmax(kSharpness * logit): larger sharpness, less label noise.
  constexpr double kSharpness = 1.8;
  double max = logit[0], sum = 0;
  for (double l : logit) max = std::max(max, l);
  for (size_t k = 0; k < logit.size(); ++k) sum += a.probs[k] = std::exp(kSharpness * (logit[k] - max));
  for (double& p : a.probs) p /= sum;
  // Sample the cause from the true probabilities by inverting their cumulative sum.
  const double u = rng.NextUniform();
  double cumulative = 0;
  a.cause = static_cast<int>(kCauses.size()) - 1;
  for (size_t k = 0; k < kCauses.size(); ++k) {
    cumulative += a.probs[k];
    if (u < cumulative) {
      a.cause = static_cast<int>(k);
      break;
    }
  }
  // Hours until the fault stops the pump: noise grows with motor temperature.
  const double mean = 160 - 28 * a.vib - 18 * a.days + 12 * std::sin(1.5 * a.flow) + 10 * s;
  a.hours = mean + (8 + 6 * std::fabs(a.temp)) * rng.NextNormal();
  return a;
}

// Readings in plausible physical units (invented calibrations).
std::string FeatureCells(const Alarm& a) {
  char buf[256];
  std::snprintf(buf, sizeof buf, "%s,%.3f,%.2f,%.3f,%.2f,%.2f,%.0f", kStations[a.station],
                std::exp(1.2 + 0.45 * a.vib), 58 + 9 * a.temp, 4.2 + 0.6 * a.pressure,
                85 + 14 * a.flow, 42 + 6 * a.current, std::max(0.0, std::round(120 + 45 * a.days)));
  return buf;
}

// The same readings as a faulty export writes them: each value one column to the right of its
// name (days since service under vibration, vibration under motor temperature, ...).
std::string ShiftedFeatureCells(const Alarm& a) {
  char buf[256];
  std::snprintf(buf, sizeof buf, "%s,%.0f,%.3f,%.2f,%.3f,%.2f,%.2f", kStations[a.station],
                std::max(0.0, std::round(120 + 45 * a.days)), std::exp(1.2 + 0.45 * a.vib),
                58 + 9 * a.temp, 4.2 + 0.6 * a.pressure, 85 + 14 * a.flow, 42 + 6 * a.current);
  return buf;
}

const char* kFeatureHeader =
    "station,vibration_mm_s,motor_temp_c,discharge_bar,flow_l_s,current_a,days_since_service";

struct Files {
  std::string alarms, faults, probs, shifted;
};

constexpr int kShiftedRows = 500;

Files Render(chorus::Philox& rng, int rows) {
  Files f;
  f.alarms = std::string(kFeatureHeader) + ",cause\n";
  f.faults = std::string(kFeatureHeader) + ",hours_to_fault\n";
  for (size_t k = 0; k < kCauses.size(); ++k) f.probs += std::string(k ? "," : "") + kCauses[k];
  f.probs += "\n";
  f.shifted = std::string(kFeatureHeader) + "\n";
  for (int i = 0; i < rows; ++i) {
    const Alarm a = Draw(rng);
    f.alarms += FeatureCells(a) + "," + kCauses[a.cause] + "\n";
    char hours[32];
    std::snprintf(hours, sizeof hours, ",%.1f\n", a.hours);
    f.faults += FeatureCells(a) + hours;
    if (i < kShiftedRows) f.shifted += ShiftedFeatureCells(a) + "\n";
    for (size_t k = 0; k < kCauses.size(); ++k) {
      char p[32];
      std::snprintf(p, sizeof p, "%s%.17g", k ? "," : "", a.probs[k]);
      f.probs += p;
    }
    f.probs += "\n";
  }
  return f;
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"chorus-demo-data: write the fictional pump-station alarm data set used by "
               "configs/demo.yaml and configs/demo_regression.yaml"};
  std::string out_dir;
  uint64_t seed = 2026;
  int train_rows = 6000, test_rows = 2000;
  app.add_option("OUT_DIR", out_dir, "directory to write the CSV files into")->required();
  app.add_option("--seed", seed, "generator seed")->capture_default_str();
  app.add_option("--train-rows", train_rows, "training rows")->check(CLI::Range(10, 10000000))->capture_default_str();
  app.add_option("--test-rows", test_rows, "test rows")->check(CLI::Range(10, 10000000))->capture_default_str();
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  chorus::Philox train_rng(chorus::Derive(seed, "train")), test_rng(chorus::Derive(seed, "test"));
  const Files train = Render(train_rng, train_rows), test = Render(test_rng, test_rows);
  chorus::Status st = chorus::MakeDirectories(out_dir);
  const std::vector<std::pair<std::string, const std::string*>> outputs = {
      {"alarms_train.csv", &train.alarms}, {"alarms_test.csv", &test.alarms},
      {"alarms_test_probabilities.csv", &test.probs}, {"faults_train.csv", &train.faults},
      {"faults_test.csv", &test.faults}, {"alarms_shifted.csv", &test.shifted}};
  for (const auto& [name, text] : outputs) {
    if (st.ok()) st = chorus::WriteFileAtomic(out_dir + "/" + name, *text);
  }
  if (!st.ok()) {
    std::fprintf(stderr, "chorus-demo-data: %s\n", st.ToString().c_str());
    return st.ExitCode();
  }
  std::printf("wrote %d training and %d test rows of fictional alarms to %s\n", train_rows, test_rows,
              out_dir.c_str());
  return 0;
}
