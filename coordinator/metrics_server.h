// A minimal HTTP/1.1 server for Prometheus scrapes: GET /metrics answers render()'s text
// (Content-Type text/plain; version=0.0.4), any other path 404, any other method 405, a request
// that is not HTTP 400. One connection at a time, each closed after its answer; a client gets
// 2 s to send its request. Nothing else is served and nothing is read but the request head.
// Thread safety: render runs on the server's thread and must be safe to call concurrently with
// the rest of the program; Start and the destructor are called from one thread.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <thread>

#include "common/status.h"

namespace chorus {

class MetricsServer {
 public:
  // Listens on `address` ("HOST:PORT"; PORT 0 picks a free one). Errors (kInvalidInput): a
  // malformed address, or one that cannot be bound.
  static StatusOr<std::unique_ptr<MetricsServer>> Start(const std::string& address,
                                                        std::function<std::string()> render);
  ~MetricsServer();  // stops listening; waits for the connection in progress
  MetricsServer(const MetricsServer&) = delete;
  MetricsServer& operator=(const MetricsServer&) = delete;

  // "HOST:PORT" with the port bound.
  const std::string& address() const { return address_; }

 private:
  MetricsServer(int listen_fd, int stop_read, int stop_write, std::string address,
                std::function<std::string()> render);
  void Serve();
  void Answer(int fd);

  const int listen_fd_, stop_read_, stop_write_;
  const std::string address_;
  const std::function<std::string()> render_;
  std::thread thread_;
};

}  // namespace chorus
