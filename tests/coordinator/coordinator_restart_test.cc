// A real chorus-worker across a coordinator restart, on loopback: the coordinator it registered
// with goes away and a fresh one (as `chorus run --resume` starts, knowing no worker ids) takes
// its address. The new one refuses the old id with FAILED_PRECONDITION and a worker_unknown
// event; the worker registers again, trains the job and uploads its result.
#include <grpcpp/grpcpp.h>
#include <gtest/gtest.h>

#include <filesystem>
#include <memory>

#include "coordinator/coordinator_service.h"
#include "proto/data_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace coordinator_restart_test {

namespace fs = std::filesystem;

constexpr char kToken[] = "restart-test-token-5d02b7";

// One coordinator: its run directory, job table, service and server on 127.0.0.1:`port` (0 for
// an ephemeral one, then port() says which).
class Coordinator {
 public:
  Coordinator(const std::string& root, const std::string& name, const PreparedData& data,
              const std::vector<MemberSpec>& jobs, int port)
      : dir_(std::move(RunDirectory::Create(root, name)).value()), table_(0, 3, 30.0),
        service_(DispatchInputs{EncodePreparedData(data), data.hash, "restart-config", 30.0, kToken,
                                ServiceLimits{}}, &table_, &dir_) {
    if (!jobs.empty()) {
      service_.AddJobs(jobs);
      service_.Close();
    }
    grpc::ServerBuilder builder;
    builder.AddListeningPort("127.0.0.1:" + std::to_string(port), grpc::InsecureServerCredentials(), &port_);
    builder.RegisterService(&service_);
    builder.SetMaxReceiveMessageSize(kMaxReceiveMessageBytes);
    server_ = builder.BuildAndStart();
  }
  ~Coordinator() {
    if (server_) server_->Shutdown(std::chrono::system_clock::now());
  }

  bool listening() const { return server_ != nullptr && port_ != 0; }
  int port() const { return port_; }
  RunDirectory& dir() { return dir_; }
  const JobTable& table() const { return table_; }

  // Whether a registered worker has asked for a job (so it holds the id it was given).
  bool AWorkerHasAskedForWork() const {
    for (const auto& [id, w] : service_.Workers()) {
      if (w.last_refused != Clock::time_point{}) return true;
    }
    return false;
  }

  // Events of `kind` so far (0 before the first event).
  int CountEvents(const std::string& kind) const {
    const std::string path = dir_.File("events.jsonl");
    if (!fs::exists(path)) return 0;
    const std::string text = testing::ReadTextFile(path);
    const std::string needle = "\"event\":\"" + kind + "\"";
    int n = 0;
    for (size_t at = text.find(needle); at != std::string::npos; at = text.find(needle, at + 1)) ++n;
    return n;
  }

 private:
  RunDirectory dir_;
  JobTable table_;
  CoordinatorService service_;
  int port_ = 0;
  std::unique_ptr<grpc::Server> server_;
};

TEST(CoordinatorRestartTest, AWorkerWhoseIdTheNewCoordinatorDoesNotKnowRegistersAgain) {
  const std::string root = testing::MakeTempDir("chorus-restart");
  PreparedData data = testing::SmallClassificationData(5);
  data.hash = std::string(64, 'b');
  testing::WriteTextFile(root + "/token", std::string(kToken) + "\n");
  auto first = std::make_unique<Coordinator>(root, "first", data, std::vector<MemberSpec>{}, 0);
  ASSERT_TRUE(first->listening());
  const int port = first->port();
  testing::BackgroundProcess worker(
      {testing::BinaryPath("chorus-worker"), "--coordinator", "127.0.0.1:" + std::to_string(port),
       "--token-file", root + "/token", "--cache-dir", "", "--exit-when-done", "--max-backoff", "0.2"},
      root + "/worker.log");
  // Registered, and polling for work (the first coordinator has none yet). The registration
  // event alone is not enough: the coordinator logs it before its reply reaches the worker, and a
  // coordinator gone before the reply arrives leaves a worker that never had an id to lose.
  ASSERT_TRUE(testing::WaitFor(
      [&] { return first->CountEvents("worker_registered") == 1 && first->AWorkerHasAskedForWork(); }, 30))
      << testing::ReadTextFile(root + "/worker.log");
  first.reset();
  Coordinator second(root, "second", data, {testing::SmallMemberSpec(0, 3, 1, 32)}, port);
  ASSERT_TRUE(second.listening()) << "port " << port << " could not be taken again";
  EXPECT_EQ(worker.Wait(60), 0) << testing::ReadTextFile(root + "/worker.log");
  EXPECT_GE(second.CountEvents("worker_unknown"), 1);
  EXPECT_EQ(second.CountEvents("worker_registered"), 1);
  EXPECT_EQ(second.CountEvents("member_finished"), 1);
  EXPECT_EQ(second.table().Count(JobState::kFinished), 1);
  EXPECT_TRUE(fs::exists(second.dir().JobResultPath("0")));
  EXPECT_NE(testing::ReadTextFile(root + "/worker.log").find("registered again as w1-"), std::string::npos);
  if (!::testing::Test::HasFailure()) fs::remove_all(root);
}

}  // namespace coordinator_restart_test
}  // namespace chorus
