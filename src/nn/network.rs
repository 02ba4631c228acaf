//! The network itself: fully connected layers, their initialisation, and
//! the forward pass.
//!
//! Rows are samples. A layer maps a batch `a` of shape `(n, inputs)` to
//! `f(a · W + b)` with `W` of shape `(inputs, outputs)` (so `W[i][j]` is the
//! weight from input `i` to unit `j`) and `b` of length `outputs`.
//!
//! Initialisation, for a layer with `fan_in` inputs and `fan_out` outputs:
//!
//! * [`Init::Xavier`]: weights and biases from `U(−r, r)`,
//!   `r = √(6 / (fan_in + fan_out))` (Glorot & Bengio, 2010);
//! * [`Init::He`]: weights from `N(0, 2 / fan_in)` (He et al., 2015), drawn
//!   with the Box–Muller transform; biases zero;
//! * [`Init::Uniform`]: weights and biases from `U(−r, r)`, `r = 1 / √fan_in`.
//!
//! Xavier with uniform biases follows scikit-learn's MLP initialisation
//! (its `_init_coef` uses that bound for weights and intercepts, with 2 in
//! place of 6 for logistic layers).
//! Draws come from a ChaCha8 generator seeded with `seed` on its own stream
//! ([`INIT_STREAM`](super::INIT_STREAM)), layer by layer, weights in
//! row-major order before biases, so the same seed gives the same network
//! everywhere. Uniform numbers are built from the top 53 bits of a `u64`
//! rather than through a `rand` distribution so that a change in `rand`'s
//! sampling code cannot silently change every initial network.

use std::borrow::Cow;

use ndarray::{Array1, Array2, ArrayView2, ArrayViewMut2};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use thiserror::Error;

use super::activation::Activation;
use super::float::Float;

/// How initial weights are drawn; see the module documentation.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Init {
    /// Glorot/Xavier uniform; suits sigmoid and tanh layers (common practice).
    Xavier,
    /// He normal; suits relu-like layers (common practice).
    He,
    /// `U(±1/√fan_in)`.
    Uniform,
}

/// One fully connected layer: `a_out = activation(a_in · weights + biases)`, in the
/// float type `F` (`f64` but while an `f32` run trains).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Layer<F = f64> {
    /// Shape `(inputs, outputs)`: `weights[[i, j]]` connects input `i` to unit `j`.
    pub weights: Array2<F>,
    /// One bias per unit.
    pub biases: Array1<F>,
    /// Applied after the affine map.
    pub activation: Activation,
}

/// A feed-forward network: layers applied in order. Networks are built, stored and
/// applied in `f64`; `Network<f32>` exists only while an `f32` run trains.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Network<F = f64> {
    /// From the input side to the output layer.
    pub layers: Vec<Layer<F>>,
}

/// Why a list of layers does not form a network.
#[derive(Clone, Debug, PartialEq, Eq, Error)]
pub(crate) enum NetworkError {
    /// There were no layers.
    #[error("a network needs at least one layer")]
    Empty,
    /// A layer has no inputs or no outputs.
    #[error("layer {layer} has an empty weight matrix ({inputs} inputs, {outputs} outputs)")]
    EmptyLayer {
        /// 0-based layer index.
        layer: usize,
        /// Rows of its weight matrix.
        inputs: usize,
        /// Columns of its weight matrix.
        outputs: usize,
    },
    /// A bias vector does not have one entry per unit.
    #[error("layer {layer} has {biases} biases for {outputs} units")]
    BiasLength {
        /// 0-based layer index.
        layer: usize,
        /// Length of its bias vector.
        biases: usize,
        /// Columns of its weight matrix.
        outputs: usize,
    },
    /// A layer's inputs do not match the previous layer's outputs.
    #[error("layer {layer} takes {inputs} inputs but the layer before gives {previous}")]
    Mismatch {
        /// 0-based layer index.
        layer: usize,
        /// Rows of its weight matrix.
        inputs: usize,
        /// Outputs of the layer before.
        previous: usize,
    },
    /// Softmax used before the output layer.
    #[error("layer {layer} is hidden and cannot use softmax")]
    HiddenSoftmax {
        /// 0-based layer index.
        layer: usize,
    },
}

impl<F: Float> Layer<F> {
    /// Number of inputs (rows of `weights`).
    pub(crate) fn inputs(&self) -> usize {
        self.weights.nrows()
    }

    /// Number of units (columns of `weights`).
    pub(crate) fn outputs(&self) -> usize {
        self.weights.ncols()
    }

    /// Computes this layer's activations for `input` into `out`, which must
    /// have shape `(input.nrows(), self.outputs())`. Allocates nothing.
    pub(crate) fn forward_into(&self, input: ArrayView2<F>, mut out: ArrayViewMut2<F>) {
        // Owned bias vectors are contiguous unless sliced in place.
        let biases = match self.biases.as_slice() {
            Some(biases) => Cow::Borrowed(biases),
            None => Cow::Owned(self.biases.to_vec()),
        };
        F::affine(input, self.weights.view(), &biases, out.view_mut());
        self.activation.apply(out);
    }
}

impl Network {
    /// A new network with `sizes = [inputs, hidden..., outputs]`: every
    /// hidden layer uses `hidden`, the last one `output`.
    ///
    /// # Panics
    /// If `sizes` has fewer than two entries or a zero entry, or `hidden` is
    /// softmax while there are hidden layers.
    pub fn initialise(
        sizes: &[usize],
        hidden: Activation,
        output: Activation,
        init: Init,
        seed: u64,
    ) -> Network {
        assert!(
            sizes.len() >= 2,
            "sizes must list at least inputs and outputs, got {sizes:?}"
        );
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(super::INIT_STREAM);
        let last = sizes.len() - 2;
        let layers = sizes
            .windows(2)
            .enumerate()
            .map(|(l, pair)| {
                let (fan_in, fan_out) = (pair[0], pair[1]);
                let activation = if l == last { output } else { hidden };
                let mut weights = Array2::zeros((fan_in, fan_out));
                let mut biases = Array1::zeros(fan_out);
                match init {
                    Init::Xavier => {
                        let r = (6.0 / (fan_in + fan_out) as f64).sqrt();
                        fill_uniform(&mut rng, r, weights.iter_mut().chain(biases.iter_mut()));
                    }
                    Init::Uniform => {
                        let r = 1.0 / (fan_in as f64).sqrt();
                        fill_uniform(&mut rng, r, weights.iter_mut().chain(biases.iter_mut()));
                    }
                    Init::He => {
                        let sd = (2.0 / fan_in as f64).sqrt();
                        fill_normal(&mut rng, sd, weights.iter_mut());
                    }
                }
                Layer {
                    weights,
                    biases,
                    activation,
                }
            })
            .collect();
        Network::from_layers(layers)
    }

    /// A network from explicit layers.
    ///
    /// # Panics
    /// If [`Network::try_from_layers`] would return an error.
    pub fn from_layers(layers: Vec<Layer>) -> Network {
        Network::try_from_layers(layers).unwrap_or_else(|e| panic!("invalid network: {e}"))
    }

    /// A network from explicit layers, checking that their shapes chain and
    /// that softmax appears only on the output layer. Weight matrices are
    /// stored in standard (row-major) layout.
    pub(crate) fn try_from_layers(mut layers: Vec<Layer>) -> Result<Network, NetworkError> {
        if layers.is_empty() {
            return Err(NetworkError::Empty);
        }
        let count = layers.len();
        for (l, layer) in layers.iter_mut().enumerate() {
            let (inputs, outputs) = layer.weights.dim();
            if inputs == 0 || outputs == 0 {
                return Err(NetworkError::EmptyLayer {
                    layer: l,
                    inputs,
                    outputs,
                });
            }
            if layer.biases.len() != outputs {
                return Err(NetworkError::BiasLength {
                    layer: l,
                    biases: layer.biases.len(),
                    outputs,
                });
            }
            if l + 1 < count && !layer.activation.valid_for_hidden() {
                return Err(NetworkError::HiddenSoftmax { layer: l });
            }
            if !layer.weights.is_standard_layout() {
                layer.weights = layer.weights.as_standard_layout().into_owned();
            }
        }
        for l in 1..count {
            let (previous, inputs) = (layers[l - 1].outputs(), layers[l].inputs());
            if previous != inputs {
                return Err(NetworkError::Mismatch {
                    layer: l,
                    inputs,
                    previous,
                });
            }
        }
        Ok(Network { layers })
    }
}

impl<F: Float> Network<F> {
    /// The same network in the float type `G`: each value rounded to the nearest
    /// (exact when `G` is at least as wide as `F`).
    pub fn to_precision<G: Float>(&self) -> Network<G> {
        let convert = |v: &F| G::round_from(v.widen());
        Network {
            layers: self
                .layers
                .iter()
                .map(|l| Layer {
                    weights: l.weights.map(convert),
                    biases: l.biases.map(convert),
                    activation: l.activation,
                })
                .collect(),
        }
    }

    /// Number of input features.
    pub(crate) fn input_size(&self) -> usize {
        self.layers[0].inputs()
    }

    /// Number of outputs.
    pub fn output_size(&self) -> usize {
        self.layers[self.layers.len() - 1].outputs()
    }

    /// The network's outputs for each row of `x`.
    ///
    /// # Panics
    /// If `x` does not have [`input_size`](Self::input_size) columns.
    pub fn predict(&self, x: ArrayView2<F>) -> Array2<F> {
        assert_eq!(x.ncols(), self.input_size(), "input columns");
        let n = x.nrows();
        let mut current: Option<Array2<F>> = None;
        for layer in &self.layers {
            let mut out = Array2::zeros((n, layer.outputs()));
            let input = current.as_ref().map_or(x, |a| a.view());
            layer.forward_into(input, out.view_mut());
            current = Some(out);
        }
        current.expect("a network has at least one layer")
    }
}

/// A uniform number in `[0, 1)` from the top 53 bits of one `u64`.
fn unit(rng: &mut ChaCha8Rng) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

fn fill_uniform<'a>(rng: &mut ChaCha8Rng, r: f64, values: impl Iterator<Item = &'a mut f64>) {
    for v in values {
        *v = r * (2.0 * unit(rng) - 1.0);
    }
}

/// Normal draws with standard deviation `sd`, two per pair of uniforms
/// (Box & Muller, 1958).
fn fill_normal<'a>(rng: &mut ChaCha8Rng, sd: f64, values: impl Iterator<Item = &'a mut f64>) {
    let mut spare = None;
    for v in values {
        *v = sd
            * match spare.take() {
                Some(z) => z,
                None => {
                    // 1 − u lies in (0, 1], so the logarithm is finite.
                    let radius = (-2.0 * (1.0 - unit(rng)).ln()).sqrt();
                    let angle = std::f64::consts::TAU * unit(rng);
                    spare = Some(radius * angle.sin());
                    radius * angle.cos()
                }
            };
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    fn all_weights(net: &Network) -> Vec<f64> {
        net.layers
            .iter()
            .flat_map(|l| l.weights.iter().copied())
            .collect()
    }

    #[test]
    fn shapes_and_activations() {
        let net = Network::initialise(
            &[3, 5, 4, 2],
            Activation::Tanh,
            Activation::Softmax,
            Init::Xavier,
            1,
        );
        let dims: Vec<_> = net
            .layers
            .iter()
            .map(|l| (l.weights.dim(), l.biases.len()))
            .collect();
        assert_eq!(dims, vec![((3, 5), 5), ((5, 4), 4), ((4, 2), 2)]);
        let acts: Vec<_> = net.layers.iter().map(|l| l.activation).collect();
        assert_eq!(
            acts,
            vec![Activation::Tanh, Activation::Tanh, Activation::Softmax]
        );
        assert_eq!((net.input_size(), net.output_size()), (3, 2));
    }

    #[test]
    fn same_seed_same_network_other_seed_differs() {
        let make = |seed| {
            Network::initialise(
                &[4, 6, 3],
                Activation::Relu,
                Activation::Linear,
                Init::He,
                seed,
            )
        };
        assert_eq!(make(7), make(7));
        assert_ne!(all_weights(&make(7)), all_weights(&make(8)));
    }

    #[test]
    fn xavier_and_uniform_respect_their_bounds() {
        let net = Network::initialise(
            &[10, 30],
            Activation::Linear,
            Activation::Linear,
            Init::Xavier,
            3,
        );
        let r = (6.0f64 / 40.0).sqrt();
        let layer = &net.layers[0];
        assert!(
            layer
                .weights
                .iter()
                .chain(layer.biases.iter())
                .all(|w| w.abs() <= r)
        );
        // 330 draws from U(−r, r) should reach well past half the bound.
        assert!(layer.weights.iter().any(|w| w.abs() > 0.9 * r));
        let net = Network::initialise(
            &[16, 30],
            Activation::Linear,
            Activation::Linear,
            Init::Uniform,
            3,
        );
        assert!(net.layers[0].weights.iter().all(|w| w.abs() <= 0.25));
        assert!(net.layers[0].biases.iter().all(|b| b.abs() <= 0.25));
        assert!(net.layers[0].biases.iter().any(|b| *b != 0.0));
    }

    #[test]
    fn he_has_the_right_spread_and_zero_biases() {
        let net = Network::initialise(
            &[50, 400],
            Activation::Relu,
            Activation::Linear,
            Init::He,
            11,
        );
        let w = &net.layers[0].weights;
        let n = w.len() as f64;
        let mean = w.sum() / n;
        let var = w.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n;
        // 20000 draws: the standard error of the mean is 0.2/√20000 ≈ 0.0014 and
        // of the variance about 0.04·√(2/20000) ≈ 0.0004, so these bounds are generous.
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 2.0 / 50.0).abs() < 0.003, "variance {var}");
        assert!(net.layers[0].biases.iter().all(|b| *b == 0.0));
    }

    #[test]
    fn predict_by_hand() {
        // h = relu((1, 2)·W + b) = relu(1·1 + 2·(−1) + 0.5, 1·2 + 2·0 − 1) = (0, 1); o = 3·0 − 2·1 + 0.25.
        let net = Network::from_layers(vec![
            Layer {
                weights: array![[1.0, 2.0], [-1.0, 0.0]],
                biases: array![0.5, -1.0],
                activation: Activation::Relu,
            },
            Layer {
                weights: array![[3.0], [-2.0]],
                biases: array![0.25],
                activation: Activation::Linear,
            },
        ]);
        assert_eq!(
            net.predict(array![[1.0, 2.0], [0.0, 0.0]].view()),
            array![[-1.75], [1.75]]
        );
    }

    #[test]
    fn layer_errors() {
        let layer = |i, o, b, f| Layer {
            weights: Array2::zeros((i, o)),
            biases: Array1::zeros(b),
            activation: f,
        };
        use Activation::{Linear, Softmax};
        assert_eq!(Network::try_from_layers(vec![]), Err(NetworkError::Empty));
        assert_eq!(
            Network::try_from_layers(vec![layer(2, 3, 3, Linear), layer(4, 1, 1, Linear)]),
            Err(NetworkError::Mismatch {
                layer: 1,
                inputs: 4,
                previous: 3
            })
        );
        assert_eq!(
            Network::try_from_layers(vec![layer(2, 3, 2, Linear)]),
            Err(NetworkError::BiasLength {
                layer: 0,
                biases: 2,
                outputs: 3
            })
        );
        assert_eq!(
            Network::try_from_layers(vec![layer(2, 3, 3, Softmax), layer(3, 1, 1, Linear)]),
            Err(NetworkError::HiddenSoftmax { layer: 0 })
        );
        assert!(
            Network::try_from_layers(vec![layer(2, 3, 3, Linear), layer(3, 2, 2, Softmax)]).is_ok()
        );
    }

    #[test]
    fn column_major_weights_are_stored_row_major() {
        let weights = array![[1.0, 2.0], [3.0, 4.0]].reversed_axes();
        let net = Network::from_layers(vec![Layer {
            weights: weights.clone(),
            biases: array![0.0, 0.0],
            activation: Activation::Linear,
        }]);
        assert!(net.layers[0].weights.is_standard_layout());
        assert_eq!(net.layers[0].weights, weights);
    }

    #[test]
    fn serde_round_trip() {
        let net = Network::initialise(
            &[2, 3, 1],
            Activation::Sigmoid,
            Activation::Sigmoid,
            Init::Xavier,
            5,
        );
        let json = serde_json::to_string(&net).unwrap();
        let back: Network = serde_json::from_str(&json).unwrap();
        assert_eq!(back, net);
    }
}
