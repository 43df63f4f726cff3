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
#include "coordinator/local_workers.h"
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

int LocalWorkerCount(const ClusterConfig& c) {
  if (c.local_workers >= 0) return c.local_workers;
  return std::max(1u, std::thread::hardware_concurrency());
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

// Re-queues expired leases (with events) until every job is settled; keeps the embedded workers
// alive (restarting ones that died, up to a budget) and draws progress.
Status Supervise(JobTable& table, CoordinatorService& service, RunDirectory& dir, LocalWorkers& workers,
                 int wanted_workers, const std::vector<std::string>& worker_args) {
  ProgressView view(stderr, static_cast<int>(table.Snapshot().size()));
  int restarts_left = wanted_workers + 3 * static_cast<int>(table.Snapshot().size());
  auto last_draw = Clock::now() - std::chrono::seconds(1);
  while (!table.AllSettled()) {
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    for (const ExpiredLease& e : table.ExpireLeases(Clock::now())) {
      dir.LogEvent(e.failed ? "member_failed" : "lease_expired",
                   {{"member", e.job}, {"job", e.job}, {"worker", e.worker},
                    {"cause", e.failed ? "lease expired too often" : ""}});
    }
    const int running = workers.WaitForExit(0);
    if (running < wanted_workers && !table.AllSettled()) {
      if (restarts_left <= 0) return Status::Internal("the embedded workers keep exiting; see worker.log");
      const int n = wanted_workers - running;
      restarts_left -= n;
      CHORUS_RETURN_IF_ERROR(workers.Start(WorkerBinaryPath(), worker_args, n, dir.File("worker.log")));
    }
    if (Clock::now() - last_draw >= std::chrono::seconds(1)) {
      view.Update(table.Snapshot(), service.Workers());
      last_draw = Clock::now();
    }
  }
  view.Finish(table.Snapshot());
  return Status::Ok();
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

}  // namespace

StatusOr<ClusterOutcome> RunJobsOnWorkers(const ClusterJobs& jobs, RunDirectory& dir) {
  const ClusterConfig& c = jobs.config->cluster;
  const int local = LocalWorkerCount(c);
  if (local > 0 && !c.tls_client_ca.empty()) {
    return Status::InvalidInput("cluster.tls.client_ca requires client certificates, which the "
                                "embedded workers do not have: set cluster.local_workers: 0");
  }
  CHORUS_ASSIGN_OR_RETURN(auto token, Token(c, dir));
  CHORUS_ASSIGN_OR_RETURN(auto creds, ServerCredentials(c));
  JobTable table(static_cast<int>(jobs.specs.size()), c.max_attempts, c.lease_seconds);
  for (size_t i = 0; i < jobs.already_finished.size(); ++i) {
    if (jobs.already_finished[i]) table.MarkFinished(static_cast<int>(i));
  }
  CoordinatorService service({jobs.specs, EncodePreparedData(*jobs.data), jobs.data->hash,
                              jobs.config_hash, c.lease_seconds, token.first}, &table, &dir);
  const std::string address = c.listen.empty() ? "127.0.0.1:0" : c.listen;
  int port = 0;
  grpc::ServerBuilder builder;
  builder.AddListeningPort(address, creds, &port);
  builder.RegisterService(&service);
  builder.SetMaxReceiveMessageSize(8 << 20);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (!server || port == 0) return Status::InvalidInput("cannot listen on " + address);
  const std::string bound = address.substr(0, address.rfind(':') + 1) + std::to_string(port);
  CHORUS_RETURN_IF_ERROR(WriteFileAtomic(dir.File("coordinator.json"),
      "{\"address\": \"" + bound + "\", \"token_file\": \"" + token.second + "\"}\n"));
  dir.LogEvent("coordinator_listening", {{"address", bound}, {"local_workers", local}});
  LogLine(stderr, LogLevel::kInfo, "coordinator listening on " + bound + "; " + std::to_string(local) +
          " local worker(s)", {{"address", bound}, {"local_workers", local}});
  LocalWorkers workers;
  const std::vector<std::string> args = LocalWorkerArgs(c, *jobs.config, port, token.second);
  CHORUS_RETURN_IF_ERROR(workers.Start(WorkerBinaryPath(), args, local, dir.File("worker.log")));
  const Status st = Supervise(table, service, dir, workers, local, args);
  if (!c.listen.empty()) TellRemoteWorkersDone(service, c.lease_seconds);
  workers.WaitForExit(5.0);  // they exit on their own once told the run is done
  workers.Stop(2.0);
  server->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(2));
  CHORUS_RETURN_IF_ERROR(st);
  ClusterOutcome outcome{table.Snapshot(), {}};
  for (const auto& [id, view] : service.Workers()) outcome.workers.emplace_back(id, view.host);
  return outcome;
}

}  // namespace chorus
