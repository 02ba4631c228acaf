//! Finite-difference check of backpropagation for every hidden activation,
//! output activation and loss that may follow it.

use ndarray::{Array2, ArrayView2};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use stet::nn::{Activation, Init, Loss, Network, gradients, mean_loss};

const HIDDEN: [Activation; 5] = [
    Activation::Sigmoid,
    Activation::Tanh,
    Activation::Relu,
    Activation::LeakyRelu,
    Activation::Linear,
];
const OUTPUT: [Activation; 6] = [
    Activation::Sigmoid,
    Activation::Tanh,
    Activation::Relu,
    Activation::LeakyRelu,
    Activation::Linear,
    Activation::Softmax,
];
const ROWS: usize = 5;
/// Central-difference step.
const H: f64 = 1e-6;
/// Pre-activations of relu-like units are kept at least this far from the
/// kink, so that a step of `H` cannot cross it.
const KINK_MARGIN: f64 = 1e-3;

/// Targets suited to the loss: any values for squared error, probabilities
/// for binary cross-entropy, probability rows summing to one for softmax.
fn targets(rng: &mut ChaCha8Rng, loss: Loss, output: Activation, columns: usize) -> Array2<f64> {
    let mut t = Array2::from_shape_fn((ROWS, columns), |_| rng.random_range(0.05..0.95));
    match (loss, output) {
        (Loss::Mse, _) => t.mapv_inplace(|v| 2.0 * v - 1.0),
        (Loss::CrossEntropy, Activation::Softmax) => {
            for mut row in t.rows_mut() {
                let sum = row.sum();
                row.mapv_inplace(|v| v / sum);
            }
        }
        (Loss::CrossEntropy, _) => {}
    }
    t
}

/// Whether every relu-like unit's pre-activation is clear of its kink, and
/// every relu unit is active on some row (so no weight's check is trivially 0).
fn suitable(network: &Network, x: ArrayView2<f64>) -> bool {
    let mut a = x.to_owned();
    for layer in &network.layers {
        let z = a.dot(&layer.weights) + &layer.biases;
        let kinked = matches!(layer.activation, Activation::Relu | Activation::LeakyRelu);
        if kinked && z.iter().any(|v| v.abs() < KINK_MARGIN) {
            return false;
        }
        if layer.activation == Activation::Relu
            && z.columns().into_iter().any(|c| c.iter().all(|&v| v < 0.0))
        {
            return false;
        }
        a = z;
        layer.activation.apply(a.view_mut());
    }
    true
}

/// Weight `index` (row-major) of layer `l`, or for `index` past the weights,
/// its bias `index − weights`.
fn parameter(network: &mut Network, l: usize, index: usize) -> &mut f64 {
    let layer = &mut network.layers[l];
    let weights = layer.weights.len();
    if index < weights {
        &mut layer.weights.as_slice_mut().expect("row-major weights")[index]
    } else {
        &mut layer.biases[index - weights]
    }
}

/// Analytic and central-difference gradients, flattened layer by layer
/// (weights then biases).
fn both_gradients(
    network: &Network,
    x: ArrayView2<f64>,
    y: ArrayView2<f64>,
    loss: Loss,
) -> (Vec<f64>, Vec<f64>) {
    let analytic = gradients(network, x, y, loss)
        .into_iter()
        .flat_map(|g| g.weights.into_iter().chain(g.biases))
        .collect();
    let mut numeric = Vec::new();
    let mut probe = network.clone();
    for l in 0..network.layers.len() {
        for index in 0..network.layers[l].weights.len() + network.layers[l].biases.len() {
            let original = *parameter(&mut probe, l, index);
            *parameter(&mut probe, l, index) = original + H;
            let plus = mean_loss(&probe, x, y, loss);
            *parameter(&mut probe, l, index) = original - H;
            let minus = mean_loss(&probe, x, y, loss);
            *parameter(&mut probe, l, index) = original;
            numeric.push((plus - minus) / (2.0 * H));
        }
    }
    (analytic, numeric)
}

fn norm(v: impl Iterator<Item = f64>) -> f64 {
    v.map(|e| e * e).sum::<f64>().sqrt()
}

/// Calls `check(network, x, y, loss, context)` for every hidden activation,
/// output activation and loss that may follow it, on two shapes, with networks
/// and inputs drawn until they suit the check; returns the number of checks.
fn for_each_case(mut check: impl FnMut(&Network, &Array2<f64>, &Array2<f64>, Loss, &str)) -> u64 {
    let mut checked = 0;
    for hidden in HIDDEN {
        for output in OUTPUT {
            for loss in [Loss::Mse, Loss::CrossEntropy] {
                if !loss.supports(output) {
                    continue;
                }
                // A softmax over one output is constant, so give it three.
                let last = if output == Activation::Softmax { 3 } else { 1 };
                for sizes in [vec![3, 4, 2], vec![3, 4, 3, last]] {
                    let mut rng = ChaCha8Rng::seed_from_u64(checked);
                    // Draw networks and inputs until they suit the check.
                    let (network, x) = (0u64..)
                        .map(|attempt| {
                            let network = Network::initialise(
                                &sizes,
                                hidden,
                                output,
                                Init::Xavier,
                                1000 * checked + attempt,
                            );
                            let x =
                                Array2::from_shape_fn((ROWS, 3), |_| rng.random_range(-1.0..1.0));
                            (network, x)
                        })
                        .find(|(network, x)| suitable(network, x.view()))
                        .expect("some draw avoids the kinks");
                    let y = targets(&mut rng, loss, output, network.output_size());
                    let context =
                        format!("{hidden:?} hidden, {output:?} output, {loss:?}, sizes {sizes:?}");
                    check(&network, &x, &y, loss, &context);
                    checked += 1;
                }
            }
        }
    }
    checked
}

/// `‖a − n‖ / (‖a‖ + ‖n‖)`, asserting that the gradient did not vanish.
fn relative_error(analytic: &[f64], numeric: &[f64], context: &str) -> f64 {
    let difference = norm(analytic.iter().zip(numeric).map(|(a, n)| a - n));
    let scale = norm(analytic.iter().copied()) + norm(numeric.iter().copied());
    assert!(
        scale > 1e-6,
        "{context}: gradient vanished, the check would be empty"
    );
    difference / scale
}

#[test]
fn backprop_matches_central_differences() {
    let mut worst: f64 = 0.0;
    let checked = for_each_case(|network, x, y, loss, context| {
        let (analytic, numeric) = both_gradients(network, x.view(), y.view(), loss);
        // Relative error of the whole gradient vector, ‖a − n‖ / (‖a‖ + ‖n‖):
        // common practice, as single entries near zero make element-wise ratios noisy.
        let relative = relative_error(&analytic, &numeric, context);
        assert!(relative < 1e-6, "{context}: relative error {relative:e}");
        for (a, n) in analytic.iter().zip(&numeric) {
            assert!((a - n).abs() < 1e-8, "{context}: entry {a} vs numeric {n}");
        }
        worst = worst.max(relative);
    });
    // 5 hidden × (6 outputs with MSE + 2 with cross-entropy) × 2 shapes.
    assert_eq!(checked, 80);
    eprintln!("worst relative error over {checked} checks: {worst:e}");
}

/// The same check for backpropagation in single precision: the gradient computed
/// in `f32` against central differences at the same point (the network and data
/// rounded to `f32`). The differences are taken in `f64`: in `f32` the loss
/// carries only 24 bits, and a central difference loses about a third of them
/// to cancellation at its best step, which would hide everything but gross errors.
#[test]
fn backprop_in_f32_matches_central_differences() {
    let mut worst: f64 = 0.0;
    let checked = for_each_case(|network, x, y, loss, context| {
        // Rounding moves pre-activations by about 1e-7, far inside the kink margin.
        let single = network.to_precision::<f32>();
        let (x32, y32) = (x.mapv(|v| v as f32), y.mapv(|v| v as f32));
        let analytic: Vec<f64> = gradients(&single, x32.view(), y32.view(), loss)
            .into_iter()
            .flat_map(|g| g.weights.into_iter().chain(g.biases))
            .map(f64::from)
            .collect();
        let (x, y) = (x32.mapv(f64::from), y32.mapv(f64::from));
        let (_, numeric) = both_gradients(&single.to_precision(), x.view(), y.view(), loss);
        // f32's unit roundoff is 6e-8; the gradient goes through at most three
        // layers of sums of up to five terms, each rounding once per operation, so
        // its error stays within some tens of roundoffs of its size; 1e-5 allows
        // about 170 (measured: 2e-7).
        let relative = relative_error(&analytic, &numeric, context);
        assert!(relative < 1e-5, "{context}: relative error {relative:e}");
        worst = worst.max(relative);
    });
    assert_eq!(checked, 80);
    eprintln!("worst relative error in f32 over {checked} checks: {worst:e}");
}
