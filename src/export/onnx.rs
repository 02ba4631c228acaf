//! The model as an ONNX graph (opset 13) in double precision: one named input per
//! encoded feature, the input scaling, every layer and activation, and one output
//! (class probabilities, or values in the targets' units).
//!
//! Every operator used has a double-precision kernel in common runtimes, so the graph
//! computes stet's function in stet's precision. Leaky ReLU is written as
//! `Max(z, slope · z)` (equal for a slope below 1) rather than the `LeakyRelu`
//! operator, whose `alpha` is single precision.

use super::onnx_proto::{
    ATTRIBUTE_INT, AttributeProto, DOUBLE, Dimension, DimensionValue, GraphProto, ModelProto,
    NodeProto, OperatorSetIdProto, StringStringEntryProto, TensorProto, TensorShapeProto,
    TensorTypeProto, TypeProto, ValueInfoProto,
};
use super::{ExportedModel, Provenance, held_out_json, inputs_json};
use crate::document::spec::word;
use crate::nn::activation::LEAKY_SLOPE;
use crate::nn::{Activation, Layer};
use prost::Message;

/// Opset 13 is the oldest the issue accepts and the newest every operator here was
/// last changed in, so any runtime from 2021 on loads the file.
const OPSET: i64 = 13;
/// The IR version that goes with opset 13.
const IR_VERSION: i64 = 7;
/// Internal tensor names start with this, which no feature name may.
pub(crate) const RESERVED_PREFIX: &str = "stet:";
/// The name of the free first dimension of every input and the output: the rows.
const ROWS: &str = "rows";

/// The graph's one output: what the model computes.
pub(crate) fn output_name(model: &ExportedModel) -> &'static str {
    match model.classes {
        Some(_) => "probabilities",
        None => "predictions",
    }
}

/// What the graph's output holds; unlike the network's, always one column per class.
fn output_meaning(model: &ExportedModel) -> &'static str {
    match model.classes {
        Some(_) => "one probability per class, in the order of the classes metadata",
        None => {
            "the predicted value of each target in its own units, in the order of the targets metadata"
        }
    }
}

/// The feature name that cannot name a graph input (taken by another feature, the
/// output, or the names stet uses inside the graph), if any.
pub(crate) fn clashing_input_name(model: &ExportedModel) -> Option<&str> {
    model.features.iter().enumerate().find_map(|(i, name)| {
        let taken = name.starts_with(RESERVED_PREFIX)
            || name == output_name(model)
            || model.features[..i].contains(name);
        taken.then_some(name.as_str())
    })
}

/// The model's ONNX bytes.
pub(super) fn encode(
    model: &ExportedModel,
    provenance: &Provenance,
    document_hash: &str,
) -> Vec<u8> {
    let proto = ModelProto {
        ir_version: Some(IR_VERSION),
        producer_name: Some("stet".into()),
        producer_version: Some(provenance.stet_version.clone()),
        doc_string: Some(format!("{}: {}", output_name(model), output_meaning(model))),
        graph: Some(graph(model)),
        opset_import: vec![OperatorSetIdProto {
            domain: Some(String::new()),
            version: Some(OPSET),
        }],
        metadata_props: metadata(model, provenance, document_hash),
    };
    proto.encode_to_vec()
}

/// The graph's nodes and constants, built front to back.
#[derive(Default)]
struct Builder {
    nodes: Vec<NodeProto>,
    constants: Vec<TensorProto>,
}

impl Builder {
    /// Adds a node computing `output` from `inputs`; returns `output`.
    fn node(&mut self, op: &str, inputs: &[&str], output: String, axis: Option<i64>) -> String {
        let attribute = axis
            .map(|axis| AttributeProto {
                name: Some("axis".into()),
                i: Some(axis),
                r#type: Some(ATTRIBUTE_INT),
            })
            .into_iter()
            .collect();
        self.nodes.push(NodeProto {
            input: inputs.iter().map(|name| name.to_string()).collect(),
            output: vec![output.clone()],
            name: Some(output.clone()),
            op_type: Some(op.into()),
            attribute,
        });
        output
    }

    /// Adds a double constant of shape `dims`; returns its name.
    fn constant(&mut self, name: String, dims: &[usize], values: Vec<f64>) -> String {
        self.constants.push(TensorProto {
            dims: dims.iter().map(|&d| d as i64).collect(),
            data_type: Some(DOUBLE),
            name: Some(name.clone()),
            double_data: values,
        });
        name
    }

    /// One layer: the affine map, then its activation, whose result is named `output`.
    fn layer(&mut self, number: usize, layer: &Layer, input: &str, output: String) -> String {
        let weights = self.constant(
            format!("{RESERVED_PREFIX}weights{number}"),
            &[layer.weights.nrows(), layer.weights.ncols()],
            layer.weights.iter().copied().collect(),
        );
        let biases = self.constant(
            format!("{RESERVED_PREFIX}biases{number}"),
            &[layer.biases.len()],
            layer.biases.to_vec(),
        );
        let product = self.node(
            "MatMul",
            &[input, &weights],
            format!("{RESERVED_PREFIX}product{number}"),
            None,
        );
        let affine = self.node(
            "Add",
            &[&product, &biases],
            format!("{RESERVED_PREFIX}affine{number}"),
            None,
        );
        self.activation(layer.activation, &affine, output)
    }

    fn activation(&mut self, activation: Activation, input: &str, output: String) -> String {
        match activation {
            Activation::Sigmoid => self.node("Sigmoid", &[input], output, None),
            Activation::Tanh => self.node("Tanh", &[input], output, None),
            Activation::Relu => self.node("Relu", &[input], output, None),
            Activation::Linear => self.node("Identity", &[input], output, None),
            Activation::Softmax => self.node("Softmax", &[input], output, Some(1)),
            Activation::LeakyRelu => {
                let slope = self.constant(format!("{output}.slope"), &[], vec![LEAKY_SLOPE]);
                let sloped = self.node("Mul", &[input, &slope], format!("{output}.sloped"), None);
                self.node("Max", &[input, &sloped], output, None)
            }
        }
    }
}

fn graph(model: &ExportedModel) -> GraphProto {
    let mut builder = Builder::default();
    let features: Vec<&str> = model.features.iter().map(String::as_str).collect();
    let joined = builder.node(
        "Concat",
        &features,
        format!("{RESERVED_PREFIX}features"),
        Some(1),
    );
    let scaled = scale(&mut builder, model, &joined);
    let output = output_name(model);
    let layers = &model.network.layers;
    let mut current = scaled;
    for (index, layer) in layers.iter().enumerate() {
        let number = index + 1;
        let last_is_output = !model.single_probability() && model.target_scaler.is_identity();
        let name = if number == layers.len() && last_is_output {
            output.to_string()
        } else {
            format!("{RESERVED_PREFIX}layer{number}")
        };
        current = builder.layer(number, layer, &current, name);
    }
    if model.single_probability() {
        both_probabilities(&mut builder, &current, output);
    } else if !model.target_scaler.is_identity() {
        unscale_targets(&mut builder, model, &current, output);
    }
    let width = model.classes.as_ref().map_or(model.targets.len(), Vec::len);
    GraphProto {
        node: builder.nodes,
        name: Some("stet model".into()),
        initializer: builder.constants,
        input: model
            .features
            .iter()
            .map(|name| value_info(name, 1, "one encoded feature, unscaled".into()))
            .collect(),
        output: vec![value_info(output, width, output_meaning(model).into())],
    }
}

/// `(x − offset) / divisor`, feature by feature, as stet scales before the first layer.
fn scale(builder: &mut Builder, model: &ExportedModel, features: &str) -> String {
    let width = model.features.len();
    let scaler = &model.scaler;
    let offset = builder.constant(
        format!("{RESERVED_PREFIX}offset"),
        &[width],
        scaler.offset.clone(),
    );
    let divisor = builder.constant(
        format!("{RESERVED_PREFIX}divisor"),
        &[width],
        scaler.divisor.clone(),
    );
    let centred = builder.node(
        "Sub",
        &[features, &offset],
        format!("{RESERVED_PREFIX}centred"),
        None,
    );
    builder.node(
        "Div",
        &[&centred, &divisor],
        format!("{RESERVED_PREFIX}scaled"),
        None,
    )
}

/// `output · divisor + offset`, target by target: the network trained on scaled
/// targets, and this gives its outputs in the targets' units, as stet reports them.
fn unscale_targets(builder: &mut Builder, model: &ExportedModel, outputs: &str, name: &str) {
    let width = model.targets.len();
    let scaler = &model.target_scaler;
    let divisor = builder.constant(
        format!("{RESERVED_PREFIX}target_divisor"),
        &[width],
        scaler.divisor.clone(),
    );
    let offset = builder.constant(
        format!("{RESERVED_PREFIX}target_offset"),
        &[width],
        scaler.offset.clone(),
    );
    let stretched = builder.node(
        "Mul",
        &[outputs, &divisor],
        format!("{RESERVED_PREFIX}target_stretched"),
        None,
    );
    builder.node("Add", &[&stretched, &offset], name.into(), None);
}

/// Two classes with one sigmoid output: `[1 − p, p]`, as stet's predictions list them.
fn both_probabilities(builder: &mut Builder, probability: &str, output: &str) {
    let one = builder.constant(format!("{RESERVED_PREFIX}one"), &[], vec![1.0]);
    let other = builder.node(
        "Sub",
        &[&one, probability],
        format!("{RESERVED_PREFIX}complement"),
        None,
    );
    builder.node("Concat", &[&other, probability], output.into(), Some(1));
}

/// A double tensor of shape `[rows, width]`.
fn value_info(name: &str, width: usize, doc: String) -> ValueInfoProto {
    let dim = |value| Dimension { value: Some(value) };
    ValueInfoProto {
        name: Some(name.into()),
        r#type: Some(TypeProto {
            tensor_type: Some(TensorTypeProto {
                elem_type: Some(DOUBLE),
                shape: Some(TensorShapeProto {
                    dim: vec![
                        dim(DimensionValue::DimParam(ROWS.into())),
                        dim(DimensionValue::DimValue(width as i64)),
                    ],
                }),
            }),
        }),
        doc_string: Some(doc),
    }
}

/// Where the model came from and how to read it, as the model's metadata properties.
fn metadata(
    model: &ExportedModel,
    provenance: &Provenance,
    document_hash: &str,
) -> Vec<StringStringEntryProto> {
    let list = |items: &[String]| serde_json::to_string(items).expect("strings serialise");
    let mut entries = vec![
        ("stet_version", provenance.stet_version.clone()),
        ("document_hash", document_hash.to_string()),
        ("model_step", provenance.model_step.clone()),
        ("run_key", provenance.run_key.clone()),
        ("net", provenance.net_settings.clone()),
        ("train", provenance.train_settings.clone()),
        ("held_out", held_out_json(provenance).to_string()),
        ("data_file", provenance.data_file.clone()),
        ("data_hash", provenance.data_hash.clone()),
        ("task", word(&model.task).to_string()),
        ("inputs", inputs_json(model).to_string()),
        ("features", list(&model.features)),
        ("targets", list(&model.targets)),
    ];
    if let Some(classes) = &model.classes {
        entries.push(("classes", list(classes)));
    }
    entries
        .into_iter()
        .map(|(key, value)| StringStringEntryProto {
            key: Some(key.into()),
            value: Some(value),
        })
        .collect()
}
