// The coordinator's Prometheus metrics: the text (coordinator/metrics_text.h), read back by
// prometheus_client's own parser (Debian python3-prometheus-client), and the HTTP server
// (coordinator/metrics_server.h) answering real sockets on loopback.
#include <arpa/inet.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <gtest/gtest.h>

#include <atomic>
#include <filesystem>
#include <set>
#include <sstream>
#include <string>

#include "coordinator/metrics_server.h"
#include "coordinator/metrics_text.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace coordinator_metrics_test {

// Sends `request` to 127.0.0.1:port and returns everything the server sent before closing.
std::string Exchange(int port, const std::string& request) {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in to{};
  to.sin_family = AF_INET;
  to.sin_port = htons(static_cast<uint16_t>(port));
  to.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  if (::connect(fd, reinterpret_cast<sockaddr*>(&to), sizeof to) != 0) {
    ::close(fd);
    return "connect failed";
  }
  if (!request.empty()) ::send(fd, request.data(), request.size(), MSG_NOSIGNAL);
  std::string reply;
  char buf[4096];
  for (ssize_t n; (n = ::recv(fd, buf, sizeof buf, 0)) > 0;) reply.append(buf, static_cast<size_t>(n));
  ::close(fd);
  return reply;
}

int PortOf(const MetricsServer& server) {
  return std::stoi(server.address().substr(server.address().rfind(':') + 1));
}

CoordinatorCounts SomeCounts() {
  CoordinatorCounts c;
  c.jobs = {{JobState::kFinished, 1, "", ""}, {JobState::kFinished, 3, "", ""}, {JobState::kLeased, 2, "w1", ""},
            {JobState::kQueued, 0, "", ""},   {JobState::kFailed, 3, "", "lease expired too often"}};
  WorkerView busy;
  busy.job = "2";
  busy.samples_per_second = 41000.5;
  WorkerView idle;
  c.workers = {{"w1", busy}, {"w2", idle}, {"w3", idle}};
  c.refused_calls = 7;
  c.uploads_open = 1;
  return c;
}

TEST(MetricsTextTest, PrometheusClientsParserReadsEveryFamilyAndValue) {
  const std::string dir = testing::MakeTempDir("chorus-metrics");
  const std::string page = dir + "/metrics.txt";
  testing::WriteTextFile(page, PrometheusText(SomeCounts()));
  std::istringstream out(testing::RunReferenceScript("prometheus_text.py", {page}));
  std::set<std::string> lines;
  for (std::string line; std::getline(out, line);) lines.insert(line);
  for (const char* expected : {
           "chorus_jobs{state=queued} 1.0", "chorus_jobs{state=leased} 1.0", "chorus_jobs{state=finished} 2.0",
           "chorus_jobs{state=failed} 1.0", "chorus_leases_active{} 1.0",
           "chorus_job_retries_total{} 5.0",  // attempts 1, 3, 2, 0, 3: 0 + 2 + 1 + 0 + 2
           "chorus_workers{state=busy} 1.0", "chorus_workers{state=idle} 2.0",
           "chorus_training_samples_per_second{} 41000.5", "chorus_refused_calls_total{} 7.0",
           "chorus_uploads_open{} 1.0", "type chorus_jobs gauge", "type chorus_job_retries counter",
           "type chorus_refused_calls counter", "families 7"}) {
    EXPECT_EQ(lines.count(expected), 1u) << expected << " in:\n" << [&] { std::string all; for (const auto& l : lines) all += l + "\n"; return all; }();
  }
  std::filesystem::remove_all(dir);
}

TEST(MetricsServerTest, AnswersScrapesAndRefusesEverythingElse) {
  std::atomic<int> renders{0};
  StatusOr<std::unique_ptr<MetricsServer>> started = MetricsServer::Start("127.0.0.1:0", [&] {
    ++renders;
    return std::string("chorus_up 1\n");
  });
  ASSERT_TRUE(started.ok()) << started.status().ToString();
  const MetricsServer& server = *started.value();
  const int port = PortOf(server);
  ASSERT_GT(port, 0);
  const std::string ok = Exchange(port, "GET /metrics HTTP/1.1\r\nHost: x\r\n\r\n");
  EXPECT_EQ(ok.rfind("HTTP/1.1 200 OK\r\n", 0), 0u) << ok;
  EXPECT_NE(ok.find("Content-Type: text/plain; version=0.0.4"), std::string::npos);
  EXPECT_NE(ok.find("Content-Length: 12\r\n"), std::string::npos);
  EXPECT_EQ(ok.substr(ok.size() - 12), "chorus_up 1\n");
  EXPECT_NE(Exchange(port, "GET /metrics?x=1 HTTP/1.0\r\n\r\n").find("chorus_up 1"), std::string::npos);
  const std::string head = Exchange(port, "HEAD /metrics HTTP/1.1\r\n\r\n");
  EXPECT_EQ(head.rfind("HTTP/1.1 200 OK", 0), 0u);
  EXPECT_EQ(head.find("chorus_up"), std::string::npos) << "HEAD has no body";
  EXPECT_EQ(renders.load(), 3);
  EXPECT_EQ(Exchange(port, "GET / HTTP/1.1\r\n\r\n").rfind("HTTP/1.1 404", 0), 0u);
  EXPECT_EQ(Exchange(port, "POST /metrics HTTP/1.1\r\n\r\n").rfind("HTTP/1.1 405", 0), 0u);
  EXPECT_EQ(Exchange(port, "hello\r\n\r\n").rfind("HTTP/1.1 400", 0), 0u);
  EXPECT_EQ(Exchange(port, std::string(20000, 'x')).rfind("HTTP/1.1 400", 0), 0u) << "an endless head";
  EXPECT_EQ(renders.load(), 3);
  // A client that connects and says nothing is dropped after its 2 s; the next one is served.
  EXPECT_EQ(Exchange(port, ""), "");
  EXPECT_NE(Exchange(port, "GET /metrics HTTP/1.1\r\n\r\n").find("chorus_up 1"), std::string::npos);
}

TEST(MetricsServerTest, BadAddressesAreRefused) {
  for (const char* address : {"127.0.0.1", "127.0.0.1:http", "127.0.0.1:99999", ":9464", "no-such-host.invalid:1"}) {
    const auto r = MetricsServer::Start(address, [] { return std::string(); });
    EXPECT_EQ(r.status().code(), Status::Code::kInvalidInput) << address;
  }
  StatusOr<std::unique_ptr<MetricsServer>> first = MetricsServer::Start("127.0.0.1:0", [] { return std::string(); });
  ASSERT_TRUE(first.ok());
  const auto taken = MetricsServer::Start(first.value()->address(), [] { return std::string(); });
  EXPECT_NE(taken.status().message().find("cannot listen"), std::string::npos) << taken.status().ToString();
}

}  // namespace coordinator_metrics_test
}  // namespace chorus
