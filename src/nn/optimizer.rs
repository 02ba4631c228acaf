//! Update rules that turn a gradient into a step on the weights, and the
//! per-parameter state they carry between steps.
//!
//! * SGD with classic (heavy-ball) momentum: `v ← μ v − η g`, `w ← w + v`,
//!   i.e. `Δw(t) = −η ∂L/∂w + μ Δw(t−1)`, with `v` starting at zero
//!   (the same rule as scikit-learn's `SGDOptimizer` without Nesterov).
//! * Adam (Kingma & Ba, 2015, Algorithm 1): `m ← β₁ m + (1 − β₁) g`,
//!   `v ← β₂ v + (1 − β₂) g²`, `m̂ = m / (1 − β₁ᵗ)`, `v̂ = v / (1 − β₂ᵗ)`,
//!   `w ← w − η m̂ / (√v̂ + ε)`, with `t` counting updates from 1.
//!
//! Biases use the same rule as weights; a run may hold them fixed (for
//! reference checks that do so), in which case their state is never touched.

use ndarray::{ArrayRef, Dimension, Zip};
use serde::{Deserialize, Serialize};

use super::backprop::LayerGradient;
use super::float::Float;
use super::network::Network;
use super::vector;

/// The update rule and its hyper-parameters.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Optimizer {
    /// Stochastic gradient descent with classic momentum (`momentum = 0`
    /// for plain SGD).
    Sgd {
        /// Step size η.
        learning_rate: f64,
        /// Momentum μ, in `[0, 1)`; 0.9 is common practice.
        momentum: f64,
    },
    /// Adam with bias correction. The paper's suggested defaults are
    /// `learning_rate = 0.001`, `beta1 = 0.9`, `beta2 = 0.999`, `epsilon = 1e-8`.
    Adam {
        /// Step size η.
        learning_rate: f64,
        /// Decay of the first-moment estimate.
        beta1: f64,
        /// Decay of the second-moment estimate.
        beta2: f64,
        /// Added to `√v̂` so the step stays bounded where gradients vanish.
        epsilon: f64,
    },
}

/// An optimiser's running state for one network: allocated once, updated in
/// place at every step, in the network's float type (hyper-parameters rounded
/// to it).
pub(crate) struct OptimizerState<F> {
    rule: Optimizer,
    /// Velocity (SGD) or first moment (Adam), shaped like the parameters.
    first: Vec<LayerGradient<F>>,
    /// Second moment (Adam only; empty for SGD).
    second: Vec<LayerGradient<F>>,
    /// `β₁ᵗ` and `β₂ᵗ` for Adam's bias correction, kept as running products in
    /// `f64` whatever `F` is.
    beta_powers: (f64, f64),
}

impl<F: Float> OptimizerState<F> {
    pub(crate) fn new(rule: &Optimizer, network: &Network<F>) -> OptimizerState<F> {
        let second = match rule {
            Optimizer::Sgd { .. } => Vec::new(),
            Optimizer::Adam { .. } => LayerGradient::zeros_like(network),
        };
        OptimizerState {
            rule: rule.clone(),
            first: LayerGradient::zeros_like(network),
            second,
            beta_powers: (1.0, 1.0),
        }
    }

    /// Applies one update to `network` from `gradients` (one per layer).
    pub(crate) fn step(
        &mut self,
        network: &mut Network<F>,
        gradients: &[LayerGradient<F>],
        update_biases: bool,
    ) {
        match self.rule {
            Optimizer::Sgd {
                learning_rate,
                momentum,
            } => {
                let (learning_rate, momentum) =
                    (F::round_from(learning_rate), F::round_from(momentum));
                for ((layer, g), v) in network
                    .layers
                    .iter_mut()
                    .zip(gradients)
                    .zip(&mut self.first)
                {
                    sgd(
                        &mut layer.weights,
                        &g.weights,
                        &mut v.weights,
                        learning_rate,
                        momentum,
                    );
                    if update_biases {
                        sgd(
                            &mut layer.biases,
                            &g.biases,
                            &mut v.biases,
                            learning_rate,
                            momentum,
                        );
                    }
                }
            }
            Optimizer::Adam {
                learning_rate,
                beta1,
                beta2,
                epsilon,
            } => {
                self.beta_powers.0 *= beta1;
                self.beta_powers.1 *= beta2;
                let adam = Adam {
                    learning_rate: F::round_from(learning_rate),
                    beta1: F::round_from(beta1),
                    beta2: F::round_from(beta2),
                    epsilon: F::round_from(epsilon),
                    correction1: F::round_from(1.0 - self.beta_powers.0),
                    correction2: F::round_from(1.0 - self.beta_powers.1),
                };
                let layers = network.layers.iter_mut().zip(gradients);
                for ((layer, g), (m, v)) in layers.zip(self.first.iter_mut().zip(&mut self.second))
                {
                    adam.update(
                        &mut layer.weights,
                        &g.weights,
                        &mut m.weights,
                        &mut v.weights,
                    );
                    if update_biases {
                        adam.update(&mut layer.biases, &g.biases, &mut m.biases, &mut v.biases);
                    }
                }
            }
        }
    }
}

fn sgd<F: Float, D: Dimension>(
    w: &mut ArrayRef<F, D>,
    g: &ArrayRef<F, D>,
    v: &mut ArrayRef<F, D>,
    learning_rate: F,
    momentum: F,
) {
    let step = |w: &mut F, g: F, v: &mut F| {
        *v = momentum * *v - learning_rate * g;
        *w += *v;
    };
    // Parameters, gradients and velocities are all built row-major; as plain
    // slices the update is one vectorised loop, where a small layer's `Zip`
    // costs more in setting up than in arithmetic.
    if let (Some(ws), Some(gs), Some(vs)) = (w.as_slice_mut(), g.as_slice(), v.as_slice_mut())
        && ws.len() == gs.len()
        && ws.len() == vs.len()
    {
        vector::update(ws, vs, gs, |w, v, g| step(w, g, v));
        return;
    }
    Zip::from(w)
        .and(g)
        .and(v)
        .for_each(|w, &g, v| step(w, g, v));
}

/// Adam's constants for one step.
struct Adam<F> {
    learning_rate: F,
    beta1: F,
    beta2: F,
    epsilon: F,
    /// `1 − β₁ᵗ`.
    correction1: F,
    /// `1 − β₂ᵗ`.
    correction2: F,
}

impl<F: Float> Adam<F> {
    fn update<D: Dimension>(
        &self,
        w: &mut ArrayRef<F, D>,
        g: &ArrayRef<F, D>,
        m: &mut ArrayRef<F, D>,
        v: &mut ArrayRef<F, D>,
    ) {
        Zip::from(w).and(g).and(m).and(v).for_each(|w, &g, m, v| {
            *m = self.beta1 * *m + (F::one() - self.beta1) * g;
            *v = self.beta2 * *v + (F::one() - self.beta2) * g * g;
            let m_hat = *m / self.correction1;
            let v_hat = *v / self.correction2;
            *w -= self.learning_rate * m_hat / (v_hat.sqrt() + self.epsilon);
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{Activation, Layer};
    use ndarray::array;

    fn one_weight(w: f64) -> Network {
        Network::from_layers(vec![Layer {
            weights: array![[w]],
            biases: array![0.0],
            activation: Activation::Linear,
        }])
    }

    fn gradient(g: f64) -> Vec<LayerGradient> {
        vec![LayerGradient {
            weights: array![[g]],
            biases: array![g],
        }]
    }

    #[test]
    fn sgd_momentum_by_hand() {
        // η = 0.1, μ = 0.5, gradients 2 then −1:
        // v1 = −0.2, w = 0.8; v2 = 0.5·(−0.2) + 0.1 = 0, w = 0.8, worked by hand.
        let rule = Optimizer::Sgd {
            learning_rate: 0.1,
            momentum: 0.5,
        };
        let mut net = one_weight(1.0);
        let mut state = OptimizerState::new(&rule, &net);
        state.step(&mut net, &gradient(2.0), true);
        assert!((net.layers[0].weights[[0, 0]] - 0.8).abs() < 1e-15);
        assert!((net.layers[0].biases[0] + 0.2).abs() < 1e-15);
        state.step(&mut net, &gradient(-1.0), true);
        assert!((net.layers[0].weights[[0, 0]] - 0.8).abs() < 1e-15);
        // Third step with gradient 1: v3 = 0·0.5 − 0.1 = −0.1.
        state.step(&mut net, &gradient(1.0), true);
        assert!((net.layers[0].weights[[0, 0]] - 0.7).abs() < 1e-15);
    }

    #[test]
    fn adam_steps_by_hand() {
        let rule = Optimizer::Adam {
            learning_rate: 0.01,
            beta1: 0.9,
            beta2: 0.999,
            epsilon: 1e-8,
        };
        let mut net = one_weight(0.0);
        let mut state = OptimizerState::new(&rule, &net);
        // First step: m̂ = g and v̂ = g², so the step is η·g/(|g| + ε) ≈ η·sign(g).
        state.step(&mut net, &gradient(4.0), true);
        let w1 = net.layers[0].weights[[0, 0]];
        assert!((w1 + 0.01 * 4.0 / (4.0 + 1e-8)).abs() < 1e-15, "{w1}");
        // Second step with g = −2, by hand: m = 0.9·0.4 − 0.2 = 0.16, m̂ = 0.16/0.19;
        // v = 0.999·0.016 + 0.004 = 0.019984, v̂ = 0.019984/0.001999.
        state.step(&mut net, &gradient(-2.0), true);
        let m_hat = 0.16 / (1.0 - 0.81);
        let v_hat: f64 = 0.019984 / (1.0 - 0.998001);
        let expected = w1 - 0.01 * m_hat / (v_hat.sqrt() + 1e-8);
        assert!((net.layers[0].weights[[0, 0]] - expected).abs() < 1e-14);
    }

    #[test]
    fn fixed_biases_stay_put() {
        let rule = Optimizer::Adam {
            learning_rate: 0.1,
            beta1: 0.9,
            beta2: 0.999,
            epsilon: 1e-8,
        };
        let mut net = one_weight(1.0);
        let mut state = OptimizerState::new(&rule, &net);
        state.step(&mut net, &gradient(1.0), false);
        assert_eq!(net.layers[0].biases[0], 0.0);
        assert!(net.layers[0].weights[[0, 0]] < 1.0);
    }
}
