// A registry with a history, made by the real commands on shared demo runs (the same runs as the
// promote tests): `weaker` promoted into the empty registry, `better` promoted over it, `weaker`
// refused, then one rollback (back to `weaker`'s version). For the tests of `chorus history`.
// Thread safety: not thread-safe (runs processes); call from one test thread.
#pragma once

#include <string>

namespace chorus::testing {

// Builds the registry at `dir` (which must not exist); returns "" on success, else what failed.
std::string MakeRegistryWithHistory(const std::string& dir);

}  // namespace chorus::testing
