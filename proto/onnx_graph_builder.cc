#include "proto/onnx_graph_builder.h"

#include <limits>

#include "onnx_model.pb.h"

namespace chorus {
namespace onnx_builder_detail {

void SetType(onnx::ValueInfoProto* value, OnnxType type, const std::vector<int64_t>& dims) {
  onnx::TypeProto::Tensor* tensor = value->mutable_type()->mutable_tensor_type();
  tensor->set_elem_type(static_cast<int>(type));
  onnx::TensorShapeProto* shape = tensor->mutable_shape();
  for (const int64_t d : dims) {
    onnx::TensorShapeProto::Dimension* dim = shape->add_dim();
    if (d == OnnxGraphBuilder::kBatch) {
      dim->set_dim_param("N");
    } else {
      dim->set_dim_value(d);
    }
  }
}

onnx::TensorProto* AddTensor(onnx::GraphProto* graph, const std::string& name, OnnxType type,
                             const std::vector<int64_t>& dims) {
  onnx::TensorProto* t = graph->add_initializer();
  t->set_name(name);
  t->set_data_type(static_cast<int>(type));
  for (const int64_t d : dims) t->add_dims(d);
  return t;
}

int64_t Elements(const std::vector<int64_t>& dims) {
  int64_t n = 1;
  for (const int64_t d : dims) n *= d;
  return n;
}

}  // namespace onnx_builder_detail

OnnxGraphBuilder::OnnxGraphBuilder(const std::string& graph_name)
    : graph_(std::make_unique<onnx::GraphProto>()) {
  graph_->set_name(graph_name);
}

OnnxGraphBuilder::~OnnxGraphBuilder() = default;

void OnnxGraphBuilder::AddInput(const std::string& name, OnnxType type,
                                const std::vector<int64_t>& dims, const std::string& doc) {
  onnx::ValueInfoProto* value = graph_->add_input();
  value->set_name(name);
  value->set_doc_string(doc);
  onnx_builder_detail::SetType(value, type, dims);
}

void OnnxGraphBuilder::AddOutput(const std::string& name, OnnxType type,
                                 const std::vector<int64_t>& dims, const std::string& doc) {
  onnx::ValueInfoProto* value = graph_->add_output();
  value->set_name(name);
  value->set_doc_string(doc);
  onnx_builder_detail::SetType(value, type, dims);
}

std::string OnnxGraphBuilder::FreshName(const std::string& hint) {
  return hint + "_" + std::to_string(next_id_++);
}

std::string OnnxGraphBuilder::FloatConstant(const std::string& hint,
                                            const std::vector<int64_t>& dims, const float* values) {
  const std::string name = FreshName(hint);
  onnx::TensorProto* t = onnx_builder_detail::AddTensor(graph_.get(), name, OnnxType::kFloat, dims);
  t->mutable_float_data()->Add(values, values + onnx_builder_detail::Elements(dims));
  return name;
}

std::string OnnxGraphBuilder::DoubleConstant(const std::string& hint,
                                             const std::vector<int64_t>& dims,
                                             const std::vector<double>& values) {
  const std::string name = FreshName(hint);
  onnx::TensorProto* t = onnx_builder_detail::AddTensor(graph_.get(), name, OnnxType::kDouble, dims);
  t->mutable_double_data()->Add(values.begin(), values.end());
  return name;
}

std::string OnnxGraphBuilder::Int64Constant(const std::string& hint,
                                            const std::vector<int64_t>& values) {
  const std::string name = FreshName(hint);
  onnx::TensorProto* t = onnx_builder_detail::AddTensor(
      graph_.get(), name, OnnxType::kInt64, {static_cast<int64_t>(values.size())});
  t->mutable_int64_data()->Add(values.begin(), values.end());
  return name;
}

std::string OnnxGraphBuilder::Int64Scalar(const std::string& hint, int64_t value) {
  const std::string name = FreshName(hint);
  onnx_builder_detail::AddTensor(graph_.get(), name, OnnxType::kInt64, {})->add_int64_data(value);
  return name;
}

std::string OnnxGraphBuilder::Node(const std::string& op_type,
                                   const std::vector<std::string>& inputs,
                                   const std::vector<OnnxAttribute>& attributes,
                                   const std::string& output) {
  onnx::NodeProto* node = graph_->add_node();
  const std::string name = output.empty() ? FreshName(op_type) : output;
  node->set_name(name);
  node->set_op_type(op_type);
  for (const std::string& in : inputs) node->add_input(in);
  node->add_output(name);
  for (const OnnxAttribute& a : attributes) {
    onnx::AttributeProto* attr = node->add_attribute();
    attr->set_name(a.name);
    if (a.is_list) {
      attr->set_type(onnx::AttributeProto::INTS);
      for (const int64_t v : a.ints) attr->add_ints(v);
    } else {
      attr->set_type(onnx::AttributeProto::INT);
      attr->set_i(a.value);
    }
  }
  return name;
}

int64_t OnnxGraphBuilder::GraphBytes() const {
  return static_cast<int64_t>(graph_->ByteSizeLong());
}

StatusOr<std::string> OnnxGraphBuilder::Finish(const OnnxModelInfo& info) {
  onnx::ModelProto model;
  model.set_ir_version(kOnnxIrVersion);
  onnx::OperatorSetIdProto* opset = model.add_opset_import();
  opset->set_domain("");
  opset->set_version(kOnnxOpsetVersion);
  model.set_producer_name("chorus");
  model.set_producer_version(info.producer_version);
  model.set_model_version(1);
  model.set_doc_string(info.doc_string);
  for (const auto& [key, value] : info.metadata) {
    onnx::StringStringEntryProto* entry = model.add_metadata_props();
    entry->set_key(key);
    entry->set_value(value);
  }
  model.set_allocated_graph(graph_.release());
  graph_ = std::make_unique<onnx::GraphProto>();
  const size_t bytes = model.ByteSizeLong();
  if (bytes > static_cast<size_t>(std::numeric_limits<int>::max())) {
    return Status::InvalidInput("the ONNX model would take " + std::to_string(bytes) +
                                " bytes, over Protobuf's 2 GiB limit for one message");
  }
  std::string out;
  if (!model.SerializeToString(&out)) return Status::Internal("serialising the ONNX model failed");
  return out;
}

}  // namespace chorus
