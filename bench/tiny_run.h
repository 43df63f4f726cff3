// The smallest data set and member specs a coordinator can serve, for benchmarks of the
// coordinator's service rather than of training (bench/coordinator_capacity.cc,
// bench/hostile_peers.cc): the data only has to exist and encode, and no job is trained.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/member_training.h"
#include "common/prepared_data.h"

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

}  // namespace chorus::bench
