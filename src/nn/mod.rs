//! The neural-network engine: small fully connected feed-forward networks
//! fitted to tabular data by backpropagation.
//!
//! Conventions used throughout: rows are samples; a layer maps `a` to
//! `f(a · W + b)` with `W` of shape `(inputs, outputs)`; losses and their
//! gradients are averaged over the rows of a batch (as scikit-learn's MLP
//! does). Each module's header states its formulas and their sources:
//!
//! * [`float`]: the float type training runs in (`f64`, or `f32` for speed);
//! * [`activation`]: non-linearities and their derivatives;
//! * [`loss`]: objectives and their output-layer gradients;
//! * [`network`]: layers, initialisation and the forward pass;
//! * [`backprop`]: gradients of a batch's loss;
//! * [`optimizer`]: SGD with momentum and Adam;
//! * [`train`](mod@train): batching, shuffling and stopping;
//! * [`Rows`]: the rows of a shared data matrix a run reads, gathered and
//!   scaled a batch at a time;
//! * [`metrics`]: classification and regression scores for reports.
//!
//! ```
//! use ndarray::array;
//! use stet::nn::{Activation, BatchSize, Init, Loss, Network, Optimizer, StopReason, TrainConfig, train};
//!
//! let x = array![[0.0, 0.0], [0.0, 1.0], [1.0, 0.0], [1.0, 1.0]];
//! let y = array![[0.0], [1.0], [1.0], [0.0]];
//! let network = Network::initialise(&[2, 3, 1], Activation::Sigmoid, Activation::Sigmoid, Init::Xavier, 1);
//! let config = TrainConfig {
//!     loss: Loss::Mse,
//!     optimizer: Optimizer::Sgd { learning_rate: 0.5, momentum: 0.9 },
//!     batch: BatchSize::Full,
//!     epochs: 5_000,
//!     target_loss: Some(0.01),
//!     patience: None,
//!     l2: 0.0,
//!     shuffle: false,
//!     seed: 0,
//!     update_biases: true,
//! };
//! let outcome = train(network, x.view(), y.view(), None, &config);
//! assert_eq!(outcome.stop, StopReason::TargetLoss);
//! let predictions = outcome.network.predict(x.view());
//! assert!(predictions[[1, 0]] > 0.5 && predictions[[3, 0]] < 0.5);
//! ```

pub mod activation;
pub(crate) mod backprop;
pub(crate) mod float;
mod gemm;
mod leading;
pub(crate) mod loss;
pub(crate) mod metrics;
pub mod network;
pub(crate) mod optimizer;
mod rows;
pub mod train;
mod vector;

pub use activation::Activation;
pub use backprop::{LayerGradient, gradients};
pub use float::{Float, Precision};
pub use loss::Loss;
pub(crate) use metrics::{
    ClassificationMetrics, RegressionMetrics, classification_metrics, regression_metrics,
};
pub use network::{Init, Layer, Network};
pub use optimizer::Optimizer;
pub use rows::Rows;
pub use train::evaluate;
pub use train::{
    BatchSize, StopReason, TrainConfig, TrainOutcome, mean_loss, train, train_at, train_rows,
};

/// ChaCha8 stream used for initial weights. Initialisation and shuffling use
/// different streams so that the same seed value given to both does not
/// make them draw the same numbers.
pub(crate) const INIT_STREAM: u64 = 1;
/// ChaCha8 stream used for the per-epoch row order.
pub(crate) const SHUFFLE_STREAM: u64 = 2;
