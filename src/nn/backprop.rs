//! Backpropagation: the gradient of a batch's mean loss with respect to
//! every weight and bias, computed in buffers allocated once per training
//! run.
//!
//! With `a_0 = x`, `a_l = f_l(a_{l−1} · W_l + b_l)` and `δ_l = ∂L/∂z_l`
//! (shape `(n, units)`):
//!
//! * `δ_L` comes from [`Loss::output_delta`] (it already carries the `1/n`);
//! * `∂L/∂W_l = a_{l−1}ᵀ · δ_l`, `∂L/∂b_l = Σ_rows δ_l`;
//! * `δ_{l−1} = (δ_l · W_lᵀ) ⊙ f'_{l−1}(a_{l−1})`, the derivative applied
//!   in place by [`Activation::backprop`](super::Activation::backprop).
//!
//! Matrix products go through [`gemm`](super::gemm) into the preallocated
//! buffers; bias sums run over rows in order, so results do not depend on
//! threads.

use ndarray::{Array1, Array2, ArrayView2};

use super::float::Float;
use super::leading;
use super::loss::Loss;
use super::network::Network;

/// The gradient of the loss with respect to one layer's parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct LayerGradient<F = f64> {
    /// `∂L/∂W`, shape `(inputs, outputs)` like the weights.
    pub weights: Array2<F>,
    /// `∂L/∂b`.
    pub biases: Array1<F>,
}

impl<F: Float> LayerGradient<F> {
    /// Zeros shaped like each layer of `network`.
    pub(crate) fn zeros_like(network: &Network<F>) -> Vec<LayerGradient<F>> {
        network
            .layers
            .iter()
            .map(|l| LayerGradient {
                weights: Array2::zeros(l.weights.raw_dim()),
                biases: Array1::zeros(l.biases.raw_dim()),
            })
            .collect()
    }
}

/// The gradient of the mean loss over the rows of `x` (targets `y`) with
/// respect to each layer's weights and biases, without any L2 term, computed in
/// the network's float type.
///
/// # Panics
/// If the shapes do not fit the network, `x` has no rows, or the loss does
/// not [support](Loss::supports) the output activation.
pub fn gradients<F: Float>(
    network: &Network<F>,
    x: ArrayView2<F>,
    y: ArrayView2<F>,
    loss: Loss,
) -> Vec<LayerGradient<F>> {
    assert!(x.nrows() > 0, "gradients need at least one row");
    assert_eq!(x.nrows(), y.nrows(), "inputs and targets: row counts");
    let mut workspace = Workspace::new(network, x.nrows());
    workspace.forward(network, x);
    workspace.backward(network, x, y, loss);
    workspace.gradients
}

/// Activations, deltas and gradients for batches of up to `capacity` rows.
/// A shorter batch uses the leading rows of each buffer, which stay
/// contiguous because the buffers are row-major.
pub(crate) struct Workspace<F> {
    activations: Vec<Array2<F>>,
    deltas: Vec<Array2<F>>,
    pub(crate) gradients: Vec<LayerGradient<F>>,
    /// `W_lᵀ` in row-major order for the products `δ_l · W_lᵀ` that take a
    /// kernel reading its right operand by rows; refreshed each batch. Entry 0
    /// is unused (no delta goes below the first layer).
    transposed: Vec<Array2<F>>,
}

impl<F: Float> Workspace<F> {
    pub(crate) fn new(network: &Network<F>, capacity: usize) -> Workspace<F> {
        let buffers = || -> Vec<Array2<F>> {
            network
                .layers
                .iter()
                .map(|l| Array2::zeros((capacity, l.outputs())))
                .collect()
        };
        Workspace {
            activations: buffers(),
            deltas: buffers(),
            gradients: LayerGradient::zeros_like(network),
            transposed: network
                .layers
                .iter()
                .map(|l| Array2::zeros((l.outputs(), l.inputs())))
                .collect(),
        }
    }

    /// Runs the forward pass on the batch `x` and returns the network's
    /// outputs for it.
    pub(crate) fn forward(&mut self, network: &Network<F>, x: ArrayView2<F>) -> ArrayView2<'_, F> {
        let n = x.nrows();
        assert_eq!(x.ncols(), network.input_size(), "input columns");
        for (l, layer) in network.layers.iter().enumerate() {
            let (before, rest) = self.activations.split_at_mut(l);
            let input = match before.last() {
                Some(previous) => leading::rows(previous, n),
                None => x.view(),
            };
            layer.forward_into(input, leading::rows_mut(&mut rest[0], n));
        }
        leading::rows(&self.activations[network.layers.len() - 1], n)
    }

    /// Fills [`Self::gradients`] for the batch `(x, y)` whose forward pass
    /// has just been run by [`Self::forward`], and returns the batch's
    /// [total loss](Loss::total), found in the same pass as the output delta.
    pub(crate) fn backward(
        &mut self,
        network: &Network<F>,
        x: ArrayView2<F>,
        y: ArrayView2<F>,
        loss: Loss,
    ) -> f64 {
        let n = x.nrows();
        let last = network.layers.len() - 1;
        let total = loss.total_and_output_delta(
            network.layers[last].activation,
            leading::rows(&self.activations[last], n),
            y,
            leading::rows_mut(&mut self.deltas[last], n),
        );
        for l in (0..=last).rev() {
            let (lower, upper) = self.deltas.split_at_mut(l);
            let delta = leading::rows(&upper[0], n);
            let input = if l == 0 {
                x.view()
            } else {
                leading::rows(&self.activations[l - 1], n)
            };
            let gradient = &mut self.gradients[l];
            F::gemm(input.t(), delta, false, gradient.weights.view_mut());
            sum_rows(delta, &mut gradient.biases);
            if l > 0 {
                let mut below = leading::rows_mut(&mut lower[l - 1], n);
                let weights = &network.layers[l].weights;
                let (inputs, outputs) = weights.dim();
                if F::reads_rows(n, outputs, inputs) {
                    let transposed = &mut self.transposed[l];
                    transpose_into(weights, transposed);
                    F::gemm(delta, transposed.view(), false, below.view_mut());
                } else {
                    F::gemm(delta, weights.t(), false, below.view_mut());
                }
                network.layers[l - 1].activation.backprop(input, below);
            }
        }
        total
    }
}

/// `out ← weightsᵀ`, by plain loops over the row-major buffers where
/// ndarray's assignment of a transposed view costs more, for a small layer,
/// than the copying.
fn transpose_into<F: Float>(weights: &Array2<F>, out: &mut Array2<F>) {
    let (inputs, outputs) = weights.dim();
    match (weights.as_slice(), out.as_slice_mut()) {
        (Some(w), Some(o)) if inputs > 0 && outputs > 0 => {
            for (i, row) in w.chunks_exact(outputs).enumerate() {
                for (j, &value) in row.iter().enumerate() {
                    o[j * inputs + i] = value;
                }
            }
        }
        _ => out.assign(&weights.t()),
    }
}

/// `sums ← Σ_rows delta`, adding the rows in order (the same sums, bit for
/// bit, as adding whole rows to a zero vector one after another).
fn sum_rows<F: Float>(delta: ArrayView2<F>, sums: &mut Array1<F>) {
    let sums = sums
        .as_slice_mut()
        .expect("gradient vectors are contiguous");
    let width = delta.ncols();
    if let Some(values) = delta.as_slice()
        && width > 0
    {
        // A group of columns at a time, its running sums held in registers:
        // adding each row into `sums` in memory would make every addition
        // wait for the store of the one before.
        for (group, out) in sums.chunks_mut(SUM_GROUP).enumerate() {
            let start = group * SUM_GROUP;
            match out.len() {
                1 => column_sums::<F, 1>(values, width, start, out),
                2 => column_sums::<F, 2>(values, width, start, out),
                3 => column_sums::<F, 3>(values, width, start, out),
                4 => column_sums::<F, 4>(values, width, start, out),
                5 => column_sums::<F, 5>(values, width, start, out),
                6 => column_sums::<F, 6>(values, width, start, out),
                7 => column_sums::<F, 7>(values, width, start, out),
                _ => column_sums::<F, SUM_GROUP>(values, width, start, out),
            }
        }
        return;
    }
    sums.fill(F::zero());
    for row in delta.rows() {
        sums.iter_mut().zip(row).for_each(|(s, &d)| *s += d);
    }
}

/// Columns summed together by [`sum_rows`].
const SUM_GROUP: usize = 8;

/// `out[q] ← Σ_rows values[row · width + start + q]` for `q < W`, rows in order.
#[inline(always)]
fn column_sums<F: Float, const W: usize>(values: &[F], width: usize, start: usize, out: &mut [F]) {
    let mut acc = [F::zero(); W];
    for row in values.chunks_exact(width) {
        let columns: &[F; W] = row[start..start + W]
            .try_into()
            .expect("a group lies inside a row");
        for (a, &d) in acc.iter_mut().zip(columns) {
            *a += d;
        }
    }
    out.copy_from_slice(&acc);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{Activation, Layer};
    use ndarray::array;
    use ndarray::s;

    /// Column sums by groups equal adding whole rows one after another, bit
    /// for bit, for every width around the group size and a strided view.
    #[test]
    fn bias_sums_match_row_by_row_addition() {
        for width in 1..=19 {
            let delta = Array2::from_shape_fn((37, width), |(i, j)| {
                ((i * 31 + j * 17) % 23) as f64 * 0.1371 - 1.3 + 1e-9 * (i as f64)
            });
            let mut expected = Array1::zeros(width);
            for row in delta.rows() {
                expected += &row;
            }
            let mut sums = Array1::from_elem(width, 7.0);
            sum_rows(delta.view(), &mut sums);
            assert_eq!(sums, expected, "width {width}");
            let mut strided = Array1::zeros(width);
            sum_rows(delta.slice(s![..;2, ..]), &mut strided);
            let mut every_other = Array1::zeros(width);
            for row in delta.slice(s![..;2, ..]).rows() {
                every_other += &row;
            }
            assert_eq!(strided, every_other, "width {width}, strided");
        }
    }

    /// The loops give ndarray's transpose, for square, wide and tall layers.
    #[test]
    fn transposing_by_loops_gives_the_transposed_view() {
        for (inputs, outputs) in [(1, 1), (4, 8), (8, 3), (3, 16)] {
            let weights = Array2::from_shape_fn((inputs, outputs), |(i, j)| (i * 100 + j) as f64);
            let mut out = Array2::from_elem((outputs, inputs), f64::NAN);
            transpose_into(&weights, &mut out);
            assert_eq!(out, weights.t(), "{inputs} x {outputs}");
        }
    }

    /// One linear unit with squared error: ∂L/∂w = (1/n) Σ (o − t) x and
    /// ∂L/∂b = (1/n) Σ (o − t), worked by hand.
    #[test]
    fn linear_regression_gradient_by_hand() {
        let net = Network::from_layers(vec![Layer {
            weights: array![[2.0]],
            biases: array![1.0],
            activation: Activation::Linear,
        }]);
        let x = array![[1.0], [3.0]];
        let y = array![[2.0], [10.0]];
        // o = (3, 7); residuals (1, −3); ∂w = (1·1 + −3·3)/2 = −4, ∂b = (1 − 3)/2 = −1.
        let g = gradients(&net, x.view(), y.view(), Loss::Mse);
        assert_eq!(g[0].weights, array![[-4.0]]);
        assert_eq!(g[0].biases, array![-1.0]);
    }

    /// A workspace sized for 4 rows gives the same gradient for a 3-row
    /// batch as a fresh one sized exactly, even after holding another batch.
    #[test]
    fn short_batches_reuse_buffers_correctly() {
        let net = Network::initialise(
            &[2, 3, 2],
            Activation::Tanh,
            Activation::Softmax,
            crate::nn::Init::Xavier,
            4,
        );
        let x = array![[0.1, -0.4], [0.9, 0.3], [-0.5, 0.5], [0.2, 0.2]];
        let y = array![[1.0, 0.0], [0.0, 1.0], [1.0, 0.0], [0.0, 1.0]];
        let mut ws = Workspace::new(&net, 4);
        ws.forward(&net, x.view());
        ws.backward(&net, x.view(), y.view(), Loss::CrossEntropy);
        let (x3, y3) = (x.slice(s![1.., ..]), y.slice(s![1.., ..]));
        ws.forward(&net, x3);
        ws.backward(&net, x3, y3, Loss::CrossEntropy);
        assert_eq!(ws.gradients, gradients(&net, x3, y3, Loss::CrossEntropy));
    }
}
