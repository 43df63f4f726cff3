// chorus-worker: trains jobs for a chorus coordinator on this server.
#include <CLI/CLI.hpp>

#include <sys/prctl.h>
#include <unistd.h>

#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>

#include "common/file_util.h"
#include "common/heap_tuning.h"
#include "common/log_format.h"
#include "worker/worker_loop.h"

namespace {

std::atomic<bool> g_stop{false};

void OnSignal(int) { g_stop.store(true); }

std::string DefaultCacheDir() {
  if (const char* xdg = std::getenv("XDG_CACHE_HOME"); xdg != nullptr && *xdg) return std::string(xdg) + "/chorus";
  if (const char* home = std::getenv("HOME"); home != nullptr && *home) return std::string(home) + "/.cache/chorus";
  return "";
}

// The most memory this process has had resident at once, in bytes: VmHWM of /proc/self/status,
// or -1 if it cannot be read. (Not getrusage's ru_maxrss: Linux carries that across execve, so a
// worker spawned by `chorus run` would report its parent's peak when that is larger.)
long long PeakResidentBytes() {
  std::ifstream status("/proc/self/status");
  for (std::string line; std::getline(status, line);) {
    if (line.rfind("VmHWM:", 0) == 0) return std::atoll(line.c_str() + 6) * 1024;  // "VmHWM: N kB"
  }
  return -1;
}

// The last line a worker logs: how it ended and its peak resident set, so that memory use can be
// measured from the log (bench/worker_memory.sh reads it).
void LogExit(int exit_code) {
  const long long peak = PeakResidentBytes();
  char text[160];
  std::snprintf(text, sizeof text, "chorus-worker: exiting with code %d; peak resident set %.1f MiB",
                exit_code, static_cast<double>(peak) / 1048576.0);
  chorus::LogLine(stderr, exit_code == 0 ? chorus::LogLevel::kInfo : chorus::LogLevel::kError, text,
                  {{"exit_code", exit_code}, {"peak_rss_bytes", peak}});
}

}  // namespace

int main(int argc, char** argv) {
  chorus::KeepFreedHeapMemoryForReuse();
  CLI::App app{"chorus-worker: lease ensemble-member jobs from a chorus coordinator, train them on\n"
               "this server's CPUs and send the results back. Reconnects with backoff while the\n"
               "coordinator is away; on SIGTERM or SIGINT returns its leases and exits.\n\n"
               "Exit codes: 0 stopped or done, 1 internal failure, 2 bad usage or token refused."};
  chorus::WorkerOptions o;
  std::string token_file;
  o.cache_dir = DefaultCacheDir();
  app.add_option("--coordinator", o.connection.target, "HOST:PORT of the coordinator")->required();
  app.add_option("--token-file", token_file, "file holding the shared token (first line)")->required();
  app.add_option("--slots", o.slots,
                 "jobs to run at once; also the threads a job's train.parts may use")
      ->check(CLI::Range(1, 1024))
      ->capture_default_str();
  app.add_option("--cache-dir", o.cache_dir, "where fetched data sets are cached by hash ('' = none)")
      ->capture_default_str();
  app.add_option("--tls-ca", o.connection.tls_ca, "PEM CA certificate to trust (enables TLS)");
  app.add_option("--tls-cert", o.connection.tls_cert, "PEM client certificate (mutual TLS)")->needs("--tls-ca");
  app.add_option("--tls-key", o.connection.tls_key, "PEM client key (mutual TLS)")->needs("--tls-cert");
  app.add_flag("--exit-when-done", o.exit_when_done, "exit once the coordinator has no jobs left");
  bool exit_with_parent = false;
  app.add_flag("--exit-with-parent", exit_with_parent,
               "stop (as on SIGTERM) when the process that started this one exits");
  app.add_option("--max-backoff", o.max_backoff_seconds, "longest wait between reconnects, seconds")
      ->check(CLI::Range(0.1, 3600.0))->capture_default_str();
  std::string log_format = "text";
  app.add_option("--log-format", log_format,
                 "log lines on stderr: text, or json (one object per line: time, level, msg, fields)")
      ->check(CLI::IsMember({"text", "json"}))->capture_default_str();
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  chorus::SetLogFormat(log_format == "json" ? chorus::LogFormat::kJson : chorus::LogFormat::kText);
  chorus::StatusOr<std::string> token = chorus::ReadFileToString(token_file, 4096);
  if (!token.ok()) {
    chorus::LogPrintf(stderr, chorus::LogLevel::kError, "chorus-worker: %s",
                      token.status().ToString().c_str());
    return 2;
  }
  o.connection.token = token.value().substr(0, token.value().find_first_of("\r\n"));
  std::signal(SIGXFSZ, SIG_IGN);  // past RLIMIT_FSIZE a cache write fails (EFBIG) instead
  std::signal(SIGTERM, OnSignal);
  std::signal(SIGINT, OnSignal);
  if (exit_with_parent) {
    const pid_t parent = getppid();
    prctl(PR_SET_PDEATHSIG, SIGTERM);
    if (getppid() != parent) g_stop.store(true);  // the parent died before prctl took effect
  }
  const chorus::Status st = chorus::RunWorker(o, g_stop);
  if (!st.ok()) {
    chorus::LogPrintf(stderr, chorus::LogLevel::kError, "chorus-worker: %s", st.ToString().c_str());
  }
  LogExit(st.ExitCode());
  return st.ExitCode();
}
