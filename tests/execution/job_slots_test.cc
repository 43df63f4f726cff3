// execution/job_slots.h: every job taken once, its outcome the same as TrainMember's on one
// thread whatever the slot count, preparation errors and cancellation handed back as outcomes.
#include "execution/job_slots.h"

#include <gtest/gtest.h>

#include <mutex>
#include <optional>
#include <vector>

#include "common/rng.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace job_slots_test {

std::vector<MemberSpec> Specs(int count) {
  std::vector<MemberSpec> specs;
  for (int i = 0; i < count; ++i) {
    MemberSpec spec = testing::SmallMemberSpec(i, 3, 4, 16);
    spec.train.parts = 2;  // the parts go through the slots' ParallelFor
    specs.push_back(spec);
  }
  return specs;
}

// Hands out `specs` in order and records each outcome. prepare_error: returned by Prepare of the
// job at that position; cancel_at_epoch: jobs cancel themselves after that epoch (0: never).
class RecordingSource final : public JobSource {
 public:
  RecordingSource(const std::vector<MemberSpec>& specs, const PreparedData& data)
      : specs_(specs), data_(data), outcomes_(specs.size()), progress_calls_(specs.size(), 0) {}

  std::optional<size_t> failing_position;
  int cancel_at_epoch = 0;

  StatusOr<std::unique_ptr<TakenJob>> Take() override {
    std::lock_guard<std::mutex> lock(mu_);
    if (next_ == specs_.size()) return std::unique_ptr<TakenJob>();
    ++takes_;
    return std::unique_ptr<TakenJob>(std::make_unique<Job>(*this, next_++));
  }

  const std::vector<std::optional<StatusOr<MemberResult>>>& outcomes() const { return outcomes_; }
  const std::vector<int>& progress_calls() const { return progress_calls_; }
  size_t takes() const { return takes_; }

 private:
  class Job final : public TakenJob {
   public:
    Job(RecordingSource& source, size_t position) : source_(source), position_(position) {}
    Status Prepare(const MemberSpec** spec, const PreparedData** data) override {
      if (source_.failing_position == position_) return Status::InvalidInput("no data for this job");
      *spec = &source_.specs_[position_];
      *data = &source_.data_;
      return Status::Ok();
    }
    void OnProgress(const EpochProgress& p) override {
      std::lock_guard<std::mutex> lock(source_.mu_);
      ++source_.progress_calls_[position_];
      if (p.epoch == source_.cancel_at_epoch) cancel.store(true);
    }
    void Finish(const StatusOr<MemberResult>& outcome) override {
      std::lock_guard<std::mutex> lock(source_.mu_);
      source_.outcomes_[position_] = outcome;
    }

   private:
    RecordingSource& source_;
    const size_t position_;
  };

  const std::vector<MemberSpec>& specs_;
  const PreparedData& data_;
  std::mutex mu_;
  size_t next_ = 0, takes_ = 0;
  std::vector<std::optional<StatusOr<MemberResult>>> outcomes_;
  std::vector<int> progress_calls_;
};

TEST(JobSlotsTest, EveryJobRunsOnceAndGivesTheSameResultAsTrainingItAloneWhateverTheSlots) {
  const PreparedData data = testing::SmallClassificationData(17);
  const std::vector<MemberSpec> specs = Specs(5);
  std::vector<MemberResult> alone;
  for (const MemberSpec& spec : specs) alone.push_back(TrainMember(spec, data, nullptr).value());
  for (const int slots : {1, 3}) {
    RecordingSource source(specs, data);
    ASSERT_TRUE(RunJobSlots(source, slots).ok());
    EXPECT_EQ(source.takes(), specs.size());
    for (size_t i = 0; i < specs.size(); ++i) {
      ASSERT_TRUE(source.outcomes()[i].has_value()) << "job " << i << ", " << slots << " slots";
      ASSERT_TRUE(source.outcomes()[i]->ok()) << source.outcomes()[i]->status().ToString();
      const MemberResult& r = source.outcomes()[i]->value();
      EXPECT_EQ(r.parameters, alone[i].parameters) << "job " << i << ", " << slots << " slots";
      EXPECT_EQ(r.test_outputs, alone[i].test_outputs);
      EXPECT_EQ(source.progress_calls()[i], specs[i].train.epochs);
    }
  }
}

TEST(JobSlotsTest, APreparationErrorIsTheJobsOutcomeAndTheOtherJobsStillRun) {
  const PreparedData data = testing::SmallClassificationData(17);
  const std::vector<MemberSpec> specs = Specs(3);
  RecordingSource source(specs, data);
  source.failing_position = 1;
  ASSERT_TRUE(RunJobSlots(source, 2).ok());
  ASSERT_TRUE(source.outcomes()[1].has_value());
  EXPECT_EQ(source.outcomes()[1]->status().code(), Status::Code::kInvalidInput);
  EXPECT_EQ(source.progress_calls()[1], 0) << "nothing trained";
  EXPECT_TRUE(source.outcomes()[0]->ok());
  EXPECT_TRUE(source.outcomes()[2]->ok());
}

TEST(JobSlotsTest, AJobCancelledDuringTrainingEndsCancelledAtTheEndOfThatEpoch) {
  const PreparedData data = testing::SmallClassificationData(17);
  const std::vector<MemberSpec> specs = Specs(2);
  RecordingSource source(specs, data);
  source.cancel_at_epoch = 2;
  ASSERT_TRUE(RunJobSlots(source, 2).ok());
  for (size_t i = 0; i < specs.size(); ++i) {
    EXPECT_EQ(source.outcomes()[i]->status().code(), Status::Code::kCancelled);
    EXPECT_EQ(source.progress_calls()[i], 2);
  }
}

// A source that fails for one slot: RunJobSlots returns that error once every slot has ended.
class FailingSource final : public JobSource {
 public:
  StatusOr<std::unique_ptr<TakenJob>> Take() override {
    if (calls_.fetch_add(1) == 0) return Status::InvalidInput("token refused");
    return std::unique_ptr<TakenJob>();
  }

 private:
  std::atomic<int> calls_{0};
};

TEST(JobSlotsTest, ASlotsErrorIsReturnedAfterEverySlotHasEnded) {
  FailingSource source;
  const Status st = RunJobSlots(source, 3);
  EXPECT_EQ(st.code(), Status::Code::kInvalidInput);
  EXPECT_NE(st.message().find("token refused"), std::string::npos);
}

}  // namespace job_slots_test
}  // namespace chorus
