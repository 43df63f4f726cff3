// Building an ONNX model (proto/onnx_model.proto, IR version 8, default operator set 13) one
// node at a time, without exposing Protobuf types: values are named by strings, constants are
// stored as initializers, and Finish serialises the ModelProto. Callers add nodes in topological
// order (every input named before the node that reads it), as the standard requires.
// Thread safety: a builder is used by one thread at a time.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "common/status.h"

namespace chorus::onnx {
class GraphProto;
}  // namespace chorus::onnx

namespace chorus {

constexpr int64_t kOnnxIrVersion = 8;
constexpr int64_t kOnnxOpsetVersion = 13;

// Element types of graph values; the numbers are ONNX's TensorProto.DataType.
enum class OnnxType : int { kFloat = 1, kInt64 = 7, kDouble = 11 };

// One node attribute: an INT (`ints` empty, `is_list` false) or an INTS list.
struct OnnxAttribute {
  std::string name;
  int64_t value = 0;
  std::vector<int64_t> ints;
  bool is_list = false;

  static OnnxAttribute Int(std::string name, int64_t value) { return {std::move(name), value, {}, false}; }
  static OnnxAttribute Ints(std::string name, std::vector<int64_t> values) {
    return {std::move(name), 0, std::move(values), true};
  }
};

// What the model file says about itself besides the graph.
struct OnnxModelInfo {
  std::string producer_version;
  std::string doc_string;
  std::vector<std::pair<std::string, std::string>> metadata;  // metadata_props, in this order
};

class OnnxGraphBuilder {
 public:
  explicit OnnxGraphBuilder(const std::string& graph_name);
  ~OnnxGraphBuilder();
  OnnxGraphBuilder(const OnnxGraphBuilder&) = delete;
  OnnxGraphBuilder& operator=(const OnnxGraphBuilder&) = delete;

  // Declares a graph input or output. dims: one per axis; kBatch marks the symbolic row count
  // "N". Outputs must name values some node produces.
  static constexpr int64_t kBatch = -1;
  void AddInput(const std::string& name, OnnxType type, const std::vector<int64_t>& dims,
                const std::string& doc);
  void AddOutput(const std::string& name, OnnxType type, const std::vector<int64_t>& dims,
                 const std::string& doc);

  // A constant tensor (row-major values, as many as the dims' product); returns its value name,
  // `hint` made unique.
  std::string FloatConstant(const std::string& hint, const std::vector<int64_t>& dims,
                            const float* values);
  std::string DoubleConstant(const std::string& hint, const std::vector<int64_t>& dims,
                             const std::vector<double>& values);
  std::string Int64Constant(const std::string& hint, const std::vector<int64_t>& values);  // 1-D
  std::string Int64Scalar(const std::string& hint, int64_t value);                        // 0-D

  // Adds op_type(inputs) with one output, named `output` if not empty (a graph output's name),
  // else a fresh name; returns that name.
  std::string Node(const std::string& op_type, const std::vector<std::string>& inputs,
                   const std::vector<OnnxAttribute>& attributes = {},
                   const std::string& output = "");

  // Bytes of the serialised graph so far (initializers dominate).
  int64_t GraphBytes() const;

  // The serialised ModelProto. Call once; the builder is empty afterwards. Errors: kInvalidInput
  // if the model exceeds Protobuf's 2 GiB message limit.
  StatusOr<std::string> Finish(const OnnxModelInfo& info);

 private:
  std::string FreshName(const std::string& hint);

  std::unique_ptr<onnx::GraphProto> graph_;
  int64_t next_id_ = 0;
};

}  // namespace chorus
