#include "coordinator/cluster_run.h"

#include <grpcpp/grpcpp.h>
#include <openssl/rand.h>
#include <sys/stat.h>

#include <chrono>
#include <cstdio>
#include <thread>

#include "common/file_util.h"
#include "common/log_format.h"
#include "coordinator/coordinator_service.h"
#include "coordinator/job_table.h"
#include "coordinator/local_workers.h"
#include "coordinator/metrics_server.h"
#include "coordinator/metrics_text.h"
#include "coordinator/progress_view.h"
#include "proto/data_codec.h"

namespace chorus {
namespace {

// The shared token: from cluster.token_file, or a fresh random one written (mode 0600) into the
// run directory for the embedded workers. Returns {token, path of the file holding it}.
StatusOr<std::pair<std::string, std::string>> Token(const ClusterConfig& c, const RunDirectory& dir) {
  if (!c.token_file.empty()) {
    CHORUS_ASSIGN_OR_RETURN(std::string text, ReadFileToString(c.token_file, 4096));
    const std::string token = text.substr(0, text.find_first_of("\r\n"));
    if (token.size() < 16) return Status::InvalidInput(c.token_file + ": token shorter than 16 characters");
    return std::make_pair(token, c.token_file);
  }
  unsigned char raw[24];
  if (RAND_bytes(raw, sizeof raw) != 1) return Status::Internal("no random bytes for the token");
  std::string token;
  for (unsigned char b : raw) token += "0123456789abcdef"[b >> 4], token += "0123456789abcdef"[b & 15];
  const std::string path = dir.File("worker.token");
  CHORUS_RETURN_IF_ERROR(WriteFileAtomic(path, token + "\n"));
  ::chmod(path.c_str(), 0600);
  return std::make_pair(token, path);
}

StatusOr<std::shared_ptr<grpc::ServerCredentials>> ServerCredentials(const ClusterConfig& c) {
  if (c.tls_cert.empty()) return grpc::InsecureServerCredentials();
  grpc::SslServerCredentialsOptions ssl(c.tls_client_ca.empty()
      ? GRPC_SSL_DONT_REQUEST_CLIENT_CERTIFICATE
      : GRPC_SSL_REQUEST_AND_REQUIRE_CLIENT_CERTIFICATE_AND_VERIFY);
  grpc::SslServerCredentialsOptions::PemKeyCertPair pair;
  CHORUS_ASSIGN_OR_RETURN(pair.cert_chain, ReadFileToString(c.tls_cert, 1 << 20));
  CHORUS_ASSIGN_OR_RETURN(pair.private_key, ReadFileToString(c.tls_key, 1 << 20));
  ssl.pem_key_cert_pairs.push_back(pair);
  if (!c.tls_client_ca.empty()) {
    CHORUS_ASSIGN_OR_RETURN(ssl.pem_root_certs, ReadFileToString(c.tls_client_ca, 1 << 20));
  }
  return grpc::SslServerCredentials(ssl);
}

std::vector<std::string> LocalWorkerArgs(const ClusterConfig& c, const Config& config, int port,
                                         const std::string& token_path) {
  std::vector<std::string> args = {"--coordinator", "127.0.0.1:" + std::to_string(port),
                                   "--token-file", token_path, "--slots", "1", "--exit-when-done", "--exit-with-parent",
                                   "--max-backoff", "1", "--cache-dir", config.run.out_dir + "/.cache"};
  if (!c.tls_cert.empty()) args.insert(args.end(), {"--tls-ca", c.tls_cert});
  if (GetLogFormat() == LogFormat::kJson) args.insert(args.end(), {"--log-format", "json"});
  return args;
}

// Keeps serving until every registered worker has asked for work since the run settled (and so
// was told DONE), or a third of a lease plus 2 s has passed: remote workers started with
// --exit-when-done then exit instead of retrying a coordinator that is gone.
void TellRemoteWorkersDone(const CoordinatorService& service, double lease_seconds) {
  const Clock::time_point settled = Clock::now();
  const auto all_told = [&] {
    for (const auto& [id, w] : service.Workers()) {
      if (w.last_seen <= settled || !w.job.empty()) return false;
    }
    return true;
  };
  const auto until = settled + std::chrono::duration_cast<Clock::duration>(
                                   std::chrono::duration<double>(lease_seconds / 3 + 2));
  while (!all_told() && Clock::now() < until) std::this_thread::sleep_for(std::chrono::milliseconds(50));
}

class WorkerPoolRunner final : public JobRunner {
 public:
  WorkerPoolRunner(const RunJobsInputs& in, RunDirectory& dir)
      : in_(in), dir_(dir), c_(in.config->cluster),
        table_(0, c_.max_attempts, c_.lease_seconds) {}

  ~WorkerPoolRunner() override { Close(); }

  StatusOr<std::vector<std::string>> Run(const std::vector<MemberSpec>& specs) override {
    if (!server_) CHORUS_RETURN_IF_ERROR(Start());
    const int first = service_->AddJobs(specs);
    CHORUS_RETURN_IF_ERROR(Supervise(first, static_cast<int>(specs.size())));
    const std::vector<JobSnapshot> jobs = table_.Snapshot();
    std::vector<std::string> causes;
    for (size_t i = 0; i < specs.size(); ++i) {
      const JobSnapshot& j = jobs[first + i];
      causes.push_back(j.state == JobState::kFailed ? (j.cause.empty() ? "failed" : j.cause) : "");
    }
    return causes;
  }

  WorkersSeen Workers() const override {
    WorkersSeen seen;
    if (!service_) return seen;
    for (const auto& [id, view] : service_->Workers()) seen.emplace_back(id, view.host);
    return seen;
  }

  void Close() override {
    if (!server_) return;
    metrics_.reset();
    service_->Close();
    if (!c_.listen.empty()) TellRemoteWorkersDone(*service_, c_.lease_seconds);
    workers_.WaitForExit(5.0);  // they exit on their own once told the run is done
    workers_.Stop(2.0);
    server_->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(2));
    server_.reset();
  }

 private:
  // The server, the token and the embedded workers.
  Status Start() {
    local_ = LocalWorkerCount(c_);
    if (local_ > 0 && !c_.tls_client_ca.empty()) {
      return Status::InvalidInput("cluster.tls.client_ca requires client certificates, which the "
                                  "embedded workers do not have: set cluster.local_workers: 0");
    }
    CHORUS_ASSIGN_OR_RETURN(auto token, Token(c_, dir_));
    CHORUS_ASSIGN_OR_RETURN(auto creds, ServerCredentials(c_));
    service_ = std::make_unique<CoordinatorService>(
        DispatchInputs{EncodePreparedData(*in_.data), in_.data->hash, in_.config_hash, c_.lease_seconds,
                       token.first, ServiceLimits{}}, &table_, &dir_);
    const std::string address = c_.listen.empty() ? "127.0.0.1:0" : c_.listen;
    int port = 0;
    grpc::ServerBuilder builder;
    builder.AddListeningPort(address, creds, &port);
    builder.RegisterService(service_.get());
    builder.SetMaxReceiveMessageSize(kMaxReceiveMessageBytes);
    server_ = builder.BuildAndStart();
    if (!server_ || port == 0) {
      server_.reset();
      return Status::InvalidInput("cannot listen on " + address);
    }
    const std::string bound = address.substr(0, address.rfind(':') + 1) + std::to_string(port);
    std::string metrics_address;
    if (!c_.metrics_listen.empty()) {
      auto render = [this] {
        return PrometheusText({table_.Snapshot(), service_->Workers(), service_->RefusedCalls(),
                               service_->UploadsOpen()});
      };
      CHORUS_ASSIGN_OR_RETURN(metrics_, MetricsServer::Start(c_.metrics_listen, render));
      metrics_address = metrics_->address();
      dir_.LogEvent("metrics_listening", {{"address", metrics_address}});
      LogLine(stderr, LogLevel::kInfo, "metrics at http://" + metrics_address + "/metrics",
              {{"metrics_address", metrics_address}});
    }
    CHORUS_RETURN_IF_ERROR(WriteFileAtomic(dir_.File("coordinator.json"),
        "{\"address\": \"" + bound + "\", \"token_file\": \"" + token.second + "\"" +
        (metrics_address.empty() ? "" : ", \"metrics_address\": \"" + metrics_address + "\"") + "}\n"));
    dir_.LogEvent("coordinator_listening", {{"address", bound}, {"local_workers", local_}});
    LogLine(stderr, LogLevel::kInfo, "coordinator listening on " + bound + "; " + std::to_string(local_) +
            " local worker(s)", {{"address", bound}, {"local_workers", local_}});
    worker_args_ = LocalWorkerArgs(c_, *in_.config, port, token.second);
    restarts_left_ = local_ + 3;
    return workers_.Start(WorkerBinaryPath(), worker_args_, local_, dir_.File("worker.log"));
  }

  // Re-queues expired leases (with events) until jobs [first, first + count) are settled; keeps
  // the embedded workers alive (restarting ones that died, up to a budget) and draws progress.
  Status Supervise(int first, int count) {
    ProgressView view(stderr, count);
    restarts_left_ += 3 * count;
    auto stage = [&] {
      const std::vector<JobSnapshot> all = table_.Snapshot();
      return std::vector<JobSnapshot>(all.begin() + first, all.begin() + first + count);
    };
    auto last_draw = Clock::now() - std::chrono::seconds(1);
    while (!table_.AllSettled()) {
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
      for (const ExpiredLease& e : table_.ExpireLeases(Clock::now())) {
        const MemberSpec spec = service_->Spec(e.job);
        if (e.failed) {
          dir_.LogJobEvent(spec, true, {{"worker", e.worker}, {"cause", "lease expired too often"}});
        } else {
          dir_.LogEvent("lease_expired", {{"member", spec.index}, {"job", JobName(spec)}, {"worker", e.worker}});
        }
      }
      const int running = workers_.WaitForExit(0);
      if (running < local_ && !table_.AllSettled()) {
        if (restarts_left_ <= 0) return Status::Internal("the embedded workers keep exiting; see worker.log");
        const int n = local_ - running;
        restarts_left_ -= n;
        CHORUS_RETURN_IF_ERROR(workers_.Start(WorkerBinaryPath(), worker_args_, n, dir_.File("worker.log")));
      }
      if (Clock::now() - last_draw >= std::chrono::seconds(1)) {
        view.Update(stage(), service_->Workers());
        last_draw = Clock::now();
      }
    }
    view.Finish(stage());
    return Status::Ok();
  }

  RunJobsInputs in_;
  RunDirectory& dir_;
  const ClusterConfig& c_;
  JobTable table_;
  std::unique_ptr<CoordinatorService> service_;
  std::unique_ptr<grpc::Server> server_;
  std::unique_ptr<MetricsServer> metrics_;  // after service_ and table_, which it reads; stopped first
  LocalWorkers workers_;
  std::vector<std::string> worker_args_;
  int local_ = 0;
  int restarts_left_ = 0;
};

}  // namespace

int LocalWorkerCount(const ClusterConfig& c) {
  if (c.local_workers >= 0) return c.local_workers;
  return std::max(1u, std::thread::hardware_concurrency());
}


std::unique_ptr<JobRunner> MakeWorkerPoolRunner(const RunJobsInputs& inputs, RunDirectory& dir) {
  return std::make_unique<WorkerPoolRunner>(inputs, dir);
}

}  // namespace chorus
