// A registry: a directory of promoted bundles with a pointer to the current one (docs/design.md).
//
//   DIR/.lock                      flock(2)ed by the one process changing the registry
//   DIR/current -> versions/ID     symlink; replaced atomically (new link, then rename(2))
//   DIR/versions/ID/bundle.chorus  a promoted bundle, byte-identical to the run's
//   DIR/versions/ID/decision.json  the gate's decision that let it in
//   DIR/versions/ID/report.json    the run's report, when it had one
//   DIR/refused/ID.json            the decision of a refused candidate (its bundle is not kept)
//   DIR/rollbacks.jsonl            one line per `chorus rollback`: time, from, to
//
// ID is "<UTC time YYYYMMDDTHHMMSS.mmmZ>-<first 12 hex digits of the bundle's payload SHA-256>"
// ("-2", "-3"... appended if taken), so names sort by time (promotions hold the lock for far
// longer than a millisecond). A version directory is built as
// versions/.staging-ID-PID, its bundle re-read and its checksum verified, fsynced, then renamed
// into place; only then may `current` point at it. A crash at any point leaves `current` at a
// complete, verified bundle (or absent, in a registry that never had one); leftovers of
// interrupted promotions are removed by the next Open.
// Thread safety: a Registry is used by one thread; the lock excludes other processes (and other
// Registry objects) for its lifetime.
#pragma once

#include <chrono>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "common/status.h"

namespace chorus {

class Registry {
 public:
  // Creates DIR, DIR/versions and DIR/refused as needed, takes the exclusive lock on DIR/.lock
  // (calling on_wait once and then blocking if another process holds it), and removes leftovers
  // of interrupted promotions (versions/.staging-*, current.tmp-*). Errors: kIo naming the path.
  static StatusOr<std::unique_ptr<Registry>> Open(const std::string& dir,
                                                  const std::function<void()>& on_wait);
  ~Registry();  // releases the lock
  Registry(const Registry&) = delete;
  Registry& operator=(const Registry&) = delete;

  const std::string& dir() const { return dir_; }
  std::string VersionDir(const std::string& id) const { return dir_ + "/versions/" + id; }
  std::string BundlePath(const std::string& id) const { return VersionDir(id) + "/bundle.chorus"; }

  // For readers and commands that must not create one: kInvalidInput "DIR: not a registry" unless
  // DIR/versions exists.
  static Status CheckIsRegistry(const std::string& dir);

  // The version `current` points at, or nullopt if there is no `current` yet. Errors
  // (kInvalidInput): `current` is not a symlink to versions/ID, or that version has no bundle.
  StatusOr<std::optional<std::string>> Current() const { return CurrentIn(dir_); }
  // The same for registry directory `dir`, without the lock (for readers).
  static StatusOr<std::optional<std::string>> CurrentIn(const std::string& dir);

  // The IDs under versions/, oldest first (IDs sort by promotion time). Errors: kIo.
  StatusOr<std::vector<std::string>> Versions() const { return VersionsIn(dir_); }
  static StatusOr<std::vector<std::string>> VersionsIn(const std::string& dir);

  // One line of DIR/rollbacks.jsonl.
  struct Rollback {
    std::string time;  // UTC, RFC 3339 with milliseconds
    std::string from, to;
  };
  // Appends {"time", "from", "to"} for a switch of `current` made by chorus rollback. Errors: kIo.
  Status RecordRollback(const std::string& from, const std::string& to,
                        std::chrono::system_clock::time_point now);
  // Every recorded rollback of registry directory `dir`, oldest first (none without the file).
  // Errors: kIo; kInvalidInput naming FILE:LINE for a line chorus rollback did not write.
  static StatusOr<std::vector<Rollback>> RollbacksIn(const std::string& dir);

  // A fresh ID for a bundle with this payload SHA-256, promoted at `now`.
  std::string NewId(const std::string& payload_sha256,
                    std::chrono::system_clock::time_point now) const;

  // Writes versions/ID with bundle.chorus = bundle_bytes and the other (name, contents) files,
  // verifying that the bundle read back from disk has payload SHA-256 `payload_sha256`.
  // Errors: kIo; kInternal if the copy does not verify. On error versions/ID does not exist.
  Status AddVersion(const std::string& id, const std::string& bundle_bytes,
                    const std::string& payload_sha256,
                    const std::vector<std::pair<std::string, std::string>>& files);

  // Points `current` at versions/ID (which must exist). Errors: kIo; `current` is unchanged.
  Status SwitchCurrent(const std::string& id);

  // Writes refused/ID.json. Errors: kIo.
  Status RecordRefusal(const std::string& id, const std::string& decision_json);

  // Removes the oldest versions beyond the newest `keep` (never the current one), and the
  // oldest refusal records beyond `keep`. Requires keep >= 1. Returns the removed version IDs.
  StatusOr<std::vector<std::string>> Prune(int keep);

 private:
  Registry(std::string dir, int lock_fd) : dir_(std::move(dir)), lock_fd_(lock_fd) {}

  std::string dir_;
  int lock_fd_;
};

// Test hook, for crash tests only: if the environment variable CHORUS_PROMOTE_CRASH_AT equals
// `stage` ("after_copy", "before_switch_rename"), the process kills itself with SIGKILL, as a
// power cut or kill -9 would stop it there.
void CrashPointForTest(const char* stage);

}  // namespace chorus
