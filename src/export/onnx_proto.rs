//! The few ONNX protobuf messages an exported model needs, derived by hand with prost.
//!
//! Field numbers and types are those of the ONNX project's `onnx/onnx.proto` (Apache
//! License 2.0); only the fields stet writes are declared, which protobuf allows, so no
//! `protoc` or C toolchain is needed to build stet. Every field is `optional` or
//! `repeated` there (proto2), hence the `Option`s.

/// `TensorProto.DataType.DOUBLE`.
pub(super) const DOUBLE: i32 = 11;
/// `AttributeProto.AttributeType.INT`.
pub(super) const ATTRIBUTE_INT: i32 = 2;

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct ModelProto {
    #[prost(int64, optional, tag = "1")]
    pub ir_version: Option<i64>,
    #[prost(string, optional, tag = "2")]
    pub producer_name: Option<String>,
    #[prost(string, optional, tag = "3")]
    pub producer_version: Option<String>,
    #[prost(string, optional, tag = "6")]
    pub doc_string: Option<String>,
    #[prost(message, optional, tag = "7")]
    pub graph: Option<GraphProto>,
    #[prost(message, repeated, tag = "8")]
    pub opset_import: Vec<OperatorSetIdProto>,
    #[prost(message, repeated, tag = "14")]
    pub metadata_props: Vec<StringStringEntryProto>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct OperatorSetIdProto {
    #[prost(string, optional, tag = "1")]
    pub domain: Option<String>,
    #[prost(int64, optional, tag = "2")]
    pub version: Option<i64>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct StringStringEntryProto {
    #[prost(string, optional, tag = "1")]
    pub key: Option<String>,
    #[prost(string, optional, tag = "2")]
    pub value: Option<String>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct GraphProto {
    #[prost(message, repeated, tag = "1")]
    pub node: Vec<NodeProto>,
    #[prost(string, optional, tag = "2")]
    pub name: Option<String>,
    #[prost(message, repeated, tag = "5")]
    pub initializer: Vec<TensorProto>,
    #[prost(message, repeated, tag = "11")]
    pub input: Vec<ValueInfoProto>,
    #[prost(message, repeated, tag = "12")]
    pub output: Vec<ValueInfoProto>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct NodeProto {
    #[prost(string, repeated, tag = "1")]
    pub input: Vec<String>,
    #[prost(string, repeated, tag = "2")]
    pub output: Vec<String>,
    #[prost(string, optional, tag = "3")]
    pub name: Option<String>,
    #[prost(string, optional, tag = "4")]
    pub op_type: Option<String>,
    #[prost(message, repeated, tag = "5")]
    pub attribute: Vec<AttributeProto>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct AttributeProto {
    #[prost(string, optional, tag = "1")]
    pub name: Option<String>,
    #[prost(int64, optional, tag = "3")]
    pub i: Option<i64>,
    #[prost(int32, optional, tag = "20")]
    pub r#type: Option<i32>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct TensorProto {
    #[prost(int64, repeated, packed = "true", tag = "1")]
    pub dims: Vec<i64>,
    #[prost(int32, optional, tag = "2")]
    pub data_type: Option<i32>,
    #[prost(string, optional, tag = "8")]
    pub name: Option<String>,
    #[prost(double, repeated, packed = "true", tag = "10")]
    pub double_data: Vec<f64>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct ValueInfoProto {
    #[prost(string, optional, tag = "1")]
    pub name: Option<String>,
    #[prost(message, optional, tag = "2")]
    pub r#type: Option<TypeProto>,
    #[prost(string, optional, tag = "3")]
    pub doc_string: Option<String>,
}

/// Only the tensor case of `TypeProto`'s `value` oneof.
#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct TypeProto {
    #[prost(message, optional, tag = "1")]
    pub tensor_type: Option<TensorTypeProto>,
}

/// `TypeProto.Tensor`.
#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct TensorTypeProto {
    #[prost(int32, optional, tag = "1")]
    pub elem_type: Option<i32>,
    #[prost(message, optional, tag = "2")]
    pub shape: Option<TensorShapeProto>,
}

#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct TensorShapeProto {
    #[prost(message, repeated, tag = "1")]
    pub dim: Vec<Dimension>,
}

/// `TensorShapeProto.Dimension`: a fixed size or a named, free one.
#[derive(Clone, PartialEq, prost::Message)]
pub(super) struct Dimension {
    #[prost(oneof = "DimensionValue", tags = "1, 2")]
    pub value: Option<DimensionValue>,
}

#[derive(Clone, PartialEq, prost::Oneof)]
pub(super) enum DimensionValue {
    #[prost(int64, tag = "1")]
    DimValue(i64),
    #[prost(string, tag = "2")]
    DimParam(String),
}
