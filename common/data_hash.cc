#include "common/data_hash.h"

#include <cstddef>
#include <cstdint>
#include <vector>

#include "common/sha256.h"

namespace chorus {
namespace {

// Feeds values to SHA-256 with their lengths, so that different data never share a byte stream.
class DataHasher {
 public:
  void Bytes(const void* data, size_t n) { sha_.Update(data, n); }
  void Count(size_t n) {
    const uint64_t value = n;
    Bytes(&value, sizeof value);
  }
  void Text(const std::string& s) {
    Count(s.size());
    Bytes(s.data(), s.size());
  }
  void Texts(const std::vector<std::string>& texts) {
    Count(texts.size());
    for (const std::string& s : texts) Text(s);
  }
  template <typename T>
  void Values(const T* data, size_t n) {
    Count(n);
    Bytes(data, n * sizeof(T));
  }
  std::string Finish() { return sha_.FinishHex(); }

 private:
  Sha256 sha_;
};

}  // namespace

std::string DataHash(const PreparedData& d) {
  DataHasher h;
  h.Text(TaskName(d.task));
  h.Texts(d.feature_names);
  h.Texts(d.class_names);
  h.Count(d.plan.categorical.size());
  for (const CategoricalColumn& c : d.plan.categorical) {
    h.Text(c.name);
    h.Texts(c.vocabulary);
  }
  h.Values(d.standardizer.mean.data(), d.standardizer.mean.size());
  h.Values(d.standardizer.scale.data(), d.standardizer.scale.size());
  h.Values(&d.target_mean, 1);
  h.Values(&d.target_scale, 1);
  for (const Split* s : {&d.train, &d.validation, &d.test}) {
    h.Count(static_cast<size_t>(s->x.cols()));
    h.Values(s->x.data(), static_cast<size_t>(s->x.size()));
    h.Values(s->labels.data(), s->labels.size());
    h.Values(s->targets.data(), s->targets.size());
  }
  return h.Finish();
}

}  // namespace chorus
