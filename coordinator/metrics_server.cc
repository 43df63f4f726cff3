#include "coordinator/metrics_server.h"

#include <fcntl.h>
#include <netdb.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>
#include <sys/time.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

namespace chorus {
namespace metrics_server {

constexpr size_t kMaxRequestHeadBytes = 8192;
constexpr int kClientSeconds = 2;

void SendAll(int fd, const std::string& bytes) {
  size_t sent = 0;
  while (sent < bytes.size()) {
    const ssize_t n = ::send(fd, bytes.data() + sent, bytes.size() - sent, MSG_NOSIGNAL);
    if (n <= 0) return;  // the client went away or stalled past its time: nothing to do
    sent += static_cast<size_t>(n);
  }
}

std::string Response(const char* status, const std::string& content_type, const std::string& body,
                     bool with_body) {
  return std::string("HTTP/1.1 ") + status + "\r\nContent-Type: " + content_type +
         "\r\nContent-Length: " + std::to_string(body.size()) + "\r\nConnection: close\r\n\r\n" +
         (with_body ? body : "");
}

// The request head (up to the blank line), or what arrived before the client stopped, closed
// the connection or passed kClientSeconds.
std::string ReadHead(int fd) {
  timeval timeout{kClientSeconds, 0};
  ::setsockopt(fd, SOL_SOCKET, SO_RCVTIMEO, &timeout, sizeof timeout);
  ::setsockopt(fd, SOL_SOCKET, SO_SNDTIMEO, &timeout, sizeof timeout);
  std::string head;
  char buf[1024];
  while (head.size() < kMaxRequestHeadBytes && head.find("\r\n\r\n") == std::string::npos &&
         head.find("\n\n") == std::string::npos) {
    const ssize_t n = ::recv(fd, buf, sizeof buf, 0);
    if (n <= 0) break;
    head.append(buf, static_cast<size_t>(n));
  }
  return head;
}

}  // namespace metrics_server

StatusOr<std::unique_ptr<MetricsServer>> MetricsServer::Start(const std::string& address,
                                                              std::function<std::string()> render) {
  const size_t colon = address.rfind(':');
  const std::string host = colon == std::string::npos ? "" : address.substr(0, colon);
  const std::string port = colon == std::string::npos ? "" : address.substr(colon + 1);
  if (host.empty() || port.empty() || port.find_first_not_of("0123456789") != std::string::npos ||
      port.size() > 5 || std::stoi(port) > 65535) {
    return Status::InvalidInput("metrics address \"" + address + "\": expected HOST:PORT");
  }
  addrinfo hints{};
  hints.ai_family = AF_UNSPEC;
  hints.ai_socktype = SOCK_STREAM;
  hints.ai_flags = AI_PASSIVE;
  addrinfo* found = nullptr;
  const std::string bare = host.size() > 2 && host.front() == '[' ? host.substr(1, host.size() - 2) : host;
  if (const int rc = ::getaddrinfo(bare.c_str(), port.c_str(), &hints, &found); rc != 0) {
    return Status::InvalidInput("metrics address \"" + address + "\": " + gai_strerror(rc));
  }
  const int fd = ::socket(found->ai_family, found->ai_socktype | SOCK_CLOEXEC, found->ai_protocol);
  const int one = 1;
  if (fd >= 0) ::setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  const bool bound = fd >= 0 && ::bind(fd, found->ai_addr, found->ai_addrlen) == 0 && ::listen(fd, 16) == 0;
  const std::string error = bound ? "" : std::strerror(errno);
  ::freeaddrinfo(found);
  if (!bound) {
    if (fd >= 0) ::close(fd);
    return Status::InvalidInput("metrics address \"" + address + "\": cannot listen: " + error);
  }
  sockaddr_storage local{};
  socklen_t length = sizeof local;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&local), &length);
  const int bound_port = local.ss_family == AF_INET6 ? ntohs(reinterpret_cast<sockaddr_in6*>(&local)->sin6_port)
                                                     : ntohs(reinterpret_cast<sockaddr_in*>(&local)->sin_port);
  int stop[2];
  if (::pipe2(stop, O_CLOEXEC) != 0) {
    ::close(fd);
    return Status::Internal(std::string("metrics server: pipe: ") + std::strerror(errno));
  }
  return std::unique_ptr<MetricsServer>(new MetricsServer(fd, stop[0], stop[1], host + ":" + std::to_string(bound_port),
                                                          std::move(render)));
}

MetricsServer::MetricsServer(int listen_fd, int stop_read, int stop_write, std::string address,
                             std::function<std::string()> render)
    : listen_fd_(listen_fd), stop_read_(stop_read), stop_write_(stop_write), address_(std::move(address)),
      render_(std::move(render)), thread_([this] { Serve(); }) {}

MetricsServer::~MetricsServer() {
  const char byte = 0;
  while (::write(stop_write_, &byte, 1) < 0 && errno == EINTR) {
  }
  thread_.join();
  ::close(listen_fd_);
  ::close(stop_read_);
  ::close(stop_write_);
}

void MetricsServer::Serve() {
  while (true) {
    pollfd fds[2] = {{stop_read_, POLLIN, 0}, {listen_fd_, POLLIN, 0}};
    if (::poll(fds, 2, -1) < 0) {
      if (errno == EINTR) continue;
      return;
    }
    if (fds[0].revents != 0) return;
    if ((fds[1].revents & POLLIN) == 0) continue;
    const int client = ::accept4(listen_fd_, nullptr, nullptr, SOCK_CLOEXEC);
    if (client < 0) continue;
    Answer(client);
    ::close(client);
  }
}

void MetricsServer::Answer(int fd) {
  const std::string head = metrics_server::ReadHead(fd);
  const size_t line_end = head.find_first_of("\r\n");
  if (line_end == std::string::npos) {
    if (!head.empty()) metrics_server::SendAll(fd, metrics_server::Response("400 Bad Request", "text/plain", "expected an HTTP request\n", true));
    return;
  }
  const std::string line = head.substr(0, line_end);
  const size_t first = line.find(' '), second = line.find(' ', first + 1);
  if (first == std::string::npos || second == std::string::npos || line.compare(second + 1, 5, "HTTP/") != 0) {
    metrics_server::SendAll(fd, metrics_server::Response("400 Bad Request", "text/plain", "expected METHOD PATH HTTP/1.x\n", true));
    return;
  }
  const std::string method = line.substr(0, first);
  const std::string target = line.substr(first + 1, second - first - 1);
  const std::string path = target.substr(0, target.find('?'));
  if (method != "GET" && method != "HEAD") {
    metrics_server::SendAll(fd, metrics_server::Response("405 Method Not Allowed", "text/plain", "only GET and HEAD\n", true));
  } else if (path != "/metrics") {
    metrics_server::SendAll(fd, metrics_server::Response("404 Not Found", "text/plain", "not found; the metrics are at /metrics\n", method == "GET"));
  } else {
    metrics_server::SendAll(fd, metrics_server::Response("200 OK", "text/plain; version=0.0.4; charset=utf-8", render_(), method == "GET"));
  }
}

}  // namespace chorus
