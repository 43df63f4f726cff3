// What the benchmarks of the coordinator's service (bench/coordinator_capacity.cc,
// bench/hostile_peers.cc, bench/many_workers.cc) share: the smallest data set and member specs a
// coordinator can serve (the data only has to exist and encode, and no job is trained), a server
// on loopback, a nearest-rank percentile and the machine line.
#pragma once

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include <grpcpp/grpcpp.h>

#include "common/member_training.h"
#include "common/prepared_data.h"
#include "coordinator/service_limits.h"

namespace chorus::bench {

// Two features, two classes, four rows in each split; `hash` stands in for the content hash.
inline PreparedData TinyData(const std::string& hash) {
  PreparedData data;
  data.feature_names = {"x0", "x1"};
  data.class_names = {"a", "b"};
  for (Split* split : {&data.train, &data.validation, &data.test}) {
    split->x = Matrix::Constant(4, 2, 0.5f);
    split->labels = {0, 1, 0, 1};
  }
  data.hash = hash;
  return data;
}

// `jobs` one-epoch members of a 4-unit network, member i seeded with i.
inline std::vector<MemberSpec> TinySpecs(int jobs) {
  std::vector<MemberSpec> specs(static_cast<size_t>(jobs));
  for (int i = 0; i < jobs; ++i) {
    specs[i].index = i;
    specs[i].seed = static_cast<uint64_t>(i);
    specs[i].model.hidden = {4};
    specs[i].train.epochs = 1;
  }
  return specs;
}

// A gRPC server for `service` on 127.0.0.1 at an ephemeral port (written to *port), bounding
// received messages as `chorus run` does (coordinator/service_limits.h); null if it cannot listen.
inline std::unique_ptr<grpc::Server> ServeOnLoopback(grpc::Service* service, int* port) {
  grpc::ServerBuilder builder;
  builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), port);
  builder.RegisterService(service);
  builder.SetMaxReceiveMessageSize(kMaxReceiveMessageBytes);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  return server && *port != 0 ? std::move(server) : nullptr;
}

// Nearest-rank percentile (q in [0, 1]) of `v`, which it sorts; 0 for an empty vector.
inline double Percentile(std::vector<double>& v, double q) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  const size_t rank = static_cast<size_t>(q * static_cast<double>(v.size()) + 0.999999);
  return v[std::clamp<size_t>(rank, 1, v.size()) - 1];
}

// Prints "machine: nproc=N loadavg=..."; other work on the machine skews every figure, and the
// load average says how much there was.
inline void PrintMachine() {
  std::ifstream loadavg("/proc/loadavg");
  std::string one, five, fifteen;
  loadavg >> one >> five >> fifteen;
  std::printf("machine: nproc=%u loadavg=\"%s %s %s\"\n", std::thread::hardware_concurrency(),
              one.c_str(), five.c_str(), fifteen.c_str());
}

}  // namespace chorus::bench
