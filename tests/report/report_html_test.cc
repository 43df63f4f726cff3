#include "report/report_html.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "report/html_text.h"
#include "report/report_model.h"
#include "tests/testing/sample_report.h"

namespace chorus {
namespace report_html_test {

using nlohmann::json;

size_t Count(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t at = text.find(needle); at != std::string::npos; at = text.find(needle, at + 1)) ++n;
  return n;
}

// The data marks (elements with class "data ...") of each chart <svg>, in page order.
std::vector<size_t> DataMarksPerChart(const std::string& html) {
  std::vector<size_t> marks;
  for (size_t at = html.find("<svg class=\"chart\""); at != std::string::npos;
       at = html.find("<svg class=\"chart\"", at + 1)) {
    const size_t end = html.find("</svg>", at);
    marks.push_back(Count(html.substr(at, end - at), "class=\"data "));
  }
  return marks;
}

TEST(ReportHtmlTest, IsOneSelfContainedPageWithoutScriptsOrNetwork) {
  const std::string html = ReportHtml(testing::SampleReport(Task::kClassification));
  EXPECT_EQ(html.rfind("<!DOCTYPE html>", 0), 0u);
  EXPECT_NE(html.find("Content-Security-Policy\" content=\"default-src 'none'"), std::string::npos);
  for (const char* banned : {"<script", "src=", "href=", "url(", "@import", "<link", "<iframe"}) {
    EXPECT_EQ(html.find(banned), std::string::npos) << banned;
  }
  // The only URL is the SVG namespace name, which is an identifier, never fetched.
  EXPECT_EQ(Count(html, "://"), Count(html, "xmlns=\"http://www.w3.org/2000/svg\""));
}

TEST(ReportHtmlTest, IsAPureFunctionOfReportJson) {
  const json report = testing::SampleReport(Task::kClassification);
  const std::string html = ReportHtml(report);
  EXPECT_EQ(html, ReportHtml(report));
  EXPECT_EQ(html, ReportHtml(json::parse(report.dump(2))));  // as read back from report.json
}

TEST(ReportHtmlTest, ShowsHashesFailuresWorkersAndTheCaution) {
  json report = testing::SampleReport(Task::kClassification);
  const std::string before = ReportHtml(report);
  EXPECT_NE(before.find(EscapeHtml(kCautionText)), std::string::npos);
  EXPECT_NE(before.find(std::string(64, 'a')), std::string::npos);  // data hash
  EXPECT_NE(before.find(std::string(64, 'c')), std::string::npos);  // config hash
  EXPECT_NE(before.find("member 3: diverged: loss is NaN in epoch 2"), std::string::npos);
  EXPECT_NE(before.find("run <code>chorus report RUN_DIR</code>"), std::string::npos);
  report["manifest"] = {{"status", "complete"},
                        {"wall_seconds", 12.3},
                        {"workers", {{{"host", "node-7"}, {"slots", 2}}}}};
  const std::string after = ReportHtml(report);
  EXPECT_NE(after.find("host: node-7, slots: 2"), std::string::npos);
  EXPECT_NE(after.find("12.3 s"), std::string::npos);
}

TEST(ReportHtmlTest, DrawsEveryChartOfAClassificationReportWithData) {
  const std::string html = ReportHtml(testing::SampleReport(Task::kClassification));
  // Size curves: NLL, accuracy, ECE against members and against samples; reliability diagram and
  // its bin counts; epistemic histogram; selective prediction.
  const std::vector<size_t> marks = DataMarksPerChart(html);
  ASSERT_EQ(marks.size(), 10u);
  for (size_t i = 0; i < marks.size(); ++i) EXPECT_GE(marks[i], 2u) << "chart " << i;
  EXPECT_NE(html.find("Reliability diagram"), std::string::npos);
  EXPECT_NE(html.find("perfectly calibrated"), std::string::npos);
  EXPECT_NE(html.find("correct (n = "), std::string::npos);
  EXPECT_NE(html.find("Bayes-optimal test NLL"), std::string::npos);
}

TEST(ReportHtmlTest, RegressionReportShowsIntervalCalibrationInsteadOfReliability) {
  const std::string html = ReportHtml(testing::SampleReport(Task::kRegression));
  const std::vector<size_t> marks = DataMarksPerChart(html);
  ASSERT_EQ(marks.size(), 9u);  // 6 size curves, interval coverage, histogram, selective RMSE
  for (size_t i = 0; i < marks.size(); ++i) EXPECT_GE(marks[i], 2u) << "chart " << i;
  EXPECT_EQ(html.find("Reliability diagram"), std::string::npos);
  EXPECT_NE(html.find("Interval calibration"), std::string::npos);
  EXPECT_NE(html.find("inside 90% interval (n = "), std::string::npos);
  EXPECT_NE(html.find("test RMSE (target units)"), std::string::npos);
}

TEST(ReportHtmlTest, AnOlderReportWithoutChartDataGetsNotesInstead) {
  json report = testing::SampleReport(Task::kClassification);
  report.erase("reliability");
  report["uncertainty"].erase("epistemic_histogram");
  const std::string html = ReportHtml(report);
  EXPECT_EQ(Count(html, "written by an older chorus"), 2u);
  EXPECT_EQ(DataMarksPerChart(html).size(), 6u);  // the size curves remain
}

// The linear baseline's row and verdict, and the Training section with the search grid, render
// from the keys chorus run writes (coordinator/training_facts.h, BaselineJson).
TEST(ReportHtmlTest, ShowsTheBaselineVerdictAndHowTheMembersWereTrained) {
  nlohmann::json r = testing::SampleReport(Task::kClassification);
  r["baseline"] = {{"model", "logistic regression"}, {"verdict", "The linear baseline beats the ensemble."},
                   {"better_on_validation", true}, {"temperature", 0.75},
                   {"test", {{"accuracy", 0.5}, {"nll", 0.123456}, {"brier", 0.25}, {"ece", 0.125}}}};
  r["validation"] = {{"method", "cross-fitting"}, {"folds", 5}, {"rows", 400}};
  r["early_stopping"] = {{"on", true}, {"patience", 7}};
  r["settings"] = {{"hidden", {16}}, {"lr", 0.01}, {"weight_decay", 0.001}, {"beta_nll", 0.5}, {"epochs", 100}};
  r["search"] = {{"chosen", 1},
                 {"points", {{{"hidden", {8}}, {"lr", 0.01}, {"weight_decay", 0.0}, {"beta_nll", 0.5},
                              {"validation_nll", 0.5}, {"best_epoch", 3}},
                             {{"hidden", {16}}, {"lr", 0.01}, {"weight_decay", 0.001}, {"beta_nll", 0.5},
                              {"validation_nll", 0.25}, {"best_epoch", 9}}}}};
  for (auto& m : r["members"]) m.update({{"best_epoch", 9}, {"epochs_trained", 9}, {"stop_epoch", 9}});
  const std::string html = ReportHtml(r);
  EXPECT_NE(html.find("linear baseline, T = 0.750"), std::string::npos);
  EXPECT_NE(html.find("0.1235"), std::string::npos) << "the baseline's test NLL";
  EXPECT_NE(html.find("class=\"verdict warn\">The linear baseline beats the ensemble."), std::string::npos);
  EXPECT_NE(html.find("<h2>Training</h2>"), std::string::npos);
  EXPECT_NE(html.find("5-fold cross-fitting over all 400 training rows"), std::string::npos);
  EXPECT_NE(html.find("patience 7 epochs"), std::string::npos);
  EXPECT_NE(html.find("<td>1 (chosen)</td>"), std::string::npos);
  EXPECT_EQ(html.find("beta-NLL 0.5,"), std::string::npos) << "beta only matters for regression";
  const std::string older = ReportHtml(testing::SampleReport(Task::kClassification));
  EXPECT_EQ(older.find("<h2>Training</h2>"), std::string::npos) << "older reports render without it";
}

TEST(ReportHtmlTest, EscapesTextFromTheReport) {
  json report = testing::SampleReport(Task::kClassification);
  report["name"] = "<b>alarms</b> & co";
  const std::string html = ReportHtml(report);
  EXPECT_NE(html.find("&lt;b&gt;alarms&lt;/b&gt; &amp; co"), std::string::npos);
  EXPECT_EQ(html.find("<b>alarms"), std::string::npos);
}

}  // namespace report_html_test
}  // namespace chorus
