//! Published worked examples of backpropagation, and the classic XOR fit,
//! reproduced through the public API.

use ndarray::{Array2, array};
use stet::nn::{
    Activation, BatchSize, Init, Layer, Loss, Network, Optimizer, StopReason, TrainConfig,
    gradients, mean_loss, train,
};

fn assert_close(got: f64, expected: f64, tolerance: f64, what: &str) {
    assert!(
        (got - expected).abs() <= tolerance,
        "{what}: got {got}, expected {expected} ± {tolerance}"
    );
}

fn sgd_config(learning_rate: f64, momentum: f64, batch: BatchSize, epochs: usize) -> TrainConfig {
    let optimizer = Optimizer::Sgd {
        learning_rate,
        momentum,
    };
    TrainConfig::plain(Loss::Mse, optimizer, batch, epochs)
}

/// Matt Mazur, "A Step by Step Backpropagation Example" (2015): a 2-2-2
/// sigmoid network trained for one step on one sample, biases held fixed.
#[test]
fn mazur_step_by_step() {
    // The source names w1: i1→h1, w2: i2→h1, w3: i1→h2, w4: i2→h2, w5: h1→o1,
    // w6: h2→o1, w7: h1→o2, w8: h2→o2. Our W[i][j] connects input i to unit j,
    // so W_hidden = [[w1, w3], [w2, w4]] and W_out = [[w5, w7], [w6, w8]].
    let network = Network::from_layers(vec![
        Layer {
            weights: array![[0.15, 0.25], [0.20, 0.30]],
            biases: array![0.35, 0.35],
            activation: Activation::Sigmoid,
        },
        Layer {
            weights: array![[0.40, 0.50], [0.45, 0.55]],
            biases: array![0.60, 0.60],
            activation: Activation::Sigmoid,
        },
    ]);
    let x = array![[0.05, 0.10]];
    let y = array![[0.01, 0.99]];

    let outputs = network.predict(x.view());
    assert_close(outputs[[0, 0]], 0.75136507, 5e-9, "out_o1 (Mazur 2015)");
    assert_close(outputs[[0, 1]], 0.772928465, 5e-10, "out_o2 (Mazur 2015)");
    // E_total = Σ ½(target − output)², which is our MSE for one row.
    let error = mean_loss(&network, x.view(), y.view(), Loss::Mse);
    assert_close(error, 0.298371109, 5e-10, "E_total (Mazur 2015)");

    let mut config = sgd_config(0.5, 0.0, BatchSize::Rows(1), 1);
    config.update_biases = false;
    let outcome = train(network, x.view(), y.view(), None, &config);
    assert_close(
        outcome.history[0].train,
        0.298371109,
        5e-10,
        "epoch loss before the update",
    );

    let hidden = &outcome.network.layers[0].weights;
    let out = &outcome.network.layers[1].weights;
    // Updated weights from the source, to the digits it gives (tolerance half a unit
    // in the last digit; the source's values are within that of the exact ones).
    assert_close(hidden[[0, 0]], 0.149780716, 5e-10, "w1+");
    assert_close(hidden[[1, 0]], 0.19956143, 5e-9, "w2+");
    assert_close(hidden[[0, 1]], 0.24975114, 5e-9, "w3+");
    assert_close(hidden[[1, 1]], 0.29950229, 5e-9, "w4+");
    assert_close(out[[0, 0]], 0.35891648, 5e-9, "w5+");
    assert_close(out[[1, 0]], 0.408666186, 5e-10, "w6+");
    assert_close(out[[0, 1]], 0.511301270, 5e-10, "w7+");
    assert_close(out[[1, 1]], 0.561370121, 5e-10, "w8+");
    assert_eq!(outcome.network.layers[0].biases, array![0.35, 0.35]);
    assert_eq!(outcome.network.layers[1].biases, array![0.60, 0.60]);
}

/// A. Schiendorfer, "A worked example of backpropagation" (2020): a 2-2-2
/// sigmoid network without biases and loss Σ(t − o)².
#[test]
fn schiendorfer_worked_example() {
    // Convention worked out from the numbers: reading W as (inputs, outputs)
    // (W[i][j] from input i to unit j, our convention) gives h = σ(16, −4) and
    // outputs (0.73194171, 0.12303186) as in the source; reading it as
    // (outputs, inputs) would give h = σ(15, −1) and o1 ≈ 0.6135, which it does not.
    // The same holds for V and for the gradient, whose rows are hidden units.
    let network = Network::from_layers(vec![
        Layer {
            weights: array![[6.0, -3.0], [-2.0, 5.0]],
            biases: array![0.0, 0.0],
            activation: Activation::Sigmoid,
        },
        Layer {
            weights: array![[1.0, -2.0], [0.25, 2.0]],
            biases: array![0.0, 0.0],
            activation: Activation::Sigmoid,
        },
    ]);
    let x = array![[3.0, 1.0]];
    let y = array![[1.0, 0.0]];

    let outputs = network.predict(x.view());
    assert_close(outputs[[0, 0]], 0.73194171, 5e-9, "o1 (Schiendorfer 2020)");
    assert_close(outputs[[0, 1]], 0.12303186, 5e-9, "o2 (Schiendorfer 2020)");
    // The source's loss has no ½; ours does, so it is half of 0.0869920826.
    let loss = mean_loss(&network, x.view(), y.view(), Loss::Mse);
    assert_close(2.0 * loss, 0.0869920826, 5e-11, "loss (Schiendorfer 2020)");

    // ∂L/∂V from the source, halved for our ½ convention.
    let source_dv = array![[-0.10518769, 0.02654905], [-0.00189193, 0.00047752]];
    let dv = &gradients(&network, x.view(), y.view(), Loss::Mse)[1].weights;
    for ((i, j), &expected) in source_dv.indexed_iter() {
        assert_close(
            2.0 * dv[[i, j]],
            expected,
            5e-9,
            &format!("dL/dV[{i}][{j}] (Schiendorfer 2020)"),
        );
    }
}

/// XOR, the classic problem a single-layer network cannot solve (Rumelhart,
/// Hinton & Williams, 1986), fitted by a 2-3-1 sigmoid network.
#[test]
fn xor_is_learned() {
    let x = array![[0.0, 0.0], [0.0, 1.0], [1.0, 0.0], [1.0, 1.0]];
    let y = array![[0.0], [1.0], [1.0], [0.0]];
    // Seed 1, Xavier init, full-batch SGD with η = 0.5 and μ = 0.9: it gets
    // there in 261 epochs. These settings were tried on seeds 0–7 with 2, 3 and
    // 4 hidden units and reached 0.01 within 800 epochs in 23 of the 24 runs
    // (2 units with seed 4 got stuck, as XOR nets sometimes do).
    let network = Network::initialise(
        &[2, 3, 1],
        Activation::Sigmoid,
        Activation::Sigmoid,
        Init::Xavier,
        1,
    );
    let mut config = sgd_config(0.5, 0.9, BatchSize::Full, 5_000);
    config.target_loss = Some(0.01);
    let outcome = train(network, x.view(), y.view(), None, &config);
    assert_eq!(
        outcome.stop,
        StopReason::TargetLoss,
        "after {} epochs",
        outcome.epochs_run
    );
    let loss = mean_loss(&outcome.network, x.view(), y.view(), Loss::Mse);
    assert!(loss < 0.01, "final loss {loss}");
    let predicted = outcome.network.predict(x.view());
    let classes: Array2<f64> = predicted.mapv(|p| if p >= 0.5 { 1.0 } else { 0.0 });
    assert_eq!(classes, y);
}
