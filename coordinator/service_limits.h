// The bounds the coordinator's gRPC service puts on its peers, so that a peer with bad intent
// (or a broken one) cannot exhaust its memory, its handler threads or its event log. Each default
// is the value `chorus run` uses; tests pass smaller ones to reach a bound quickly.
// Thread safety: a plain value, copied into the service at construction.
#pragma once

#include <cstddef>
#include <cstdint>

namespace chorus {

// No message the coordinator receives may exceed this (proto/service.proto: chunks carry at most
// 1 MiB of payload, so every honest message is far below it). Bytes.
constexpr int kMaxReceiveMessageBytes = 4 << 20;

struct ServiceLimits {
  // Worker registrations the service keeps over its lifetime; Register beyond it gets
  // RESOURCE_EXHAUSTED. A registration is a few hundred bytes, so the bound caps that memory
  // far above any real cluster (each chorus-worker process registers once per coordinator).
  int max_workers = 4096;
  // The longest RegisterRequest.host accepted (a DNS name is at most 253 bytes). Bytes.
  size_t max_host_bytes = 255;
  // UploadResult streams open at once; one more gets RESOURCE_EXHAUSTED at once (and an honest
  // worker retries it). Every open stream holds one of the sync server's handler threads.
  int max_uploads = 64;
  // An upload that receives no chunk for this long is cancelled, so that idle streams cannot hold
  // the upload slots. Seconds, > 0. An honest chunk is at most 1 MiB.
  double upload_idle_seconds = 30;
  // Refusals of one kind from one peer address (IP, any port) are logged at most once per window:
  // the first refusal of a window gets its event, carrying how many went unlogged before it.
  // Seconds, > 0.
  double refusal_window_seconds = 10;
  // After this many wrong or missing tokens from one address within a window, its further
  // refusals in that window say the address is throttled (a right token still always passes).
  int max_token_failures = 5;
  // Peer addresses whose refusals are counted separately; past it, the rest share one count.
  size_t max_tracked_peers = 4096;
};

}  // namespace chorus
