//! The neural-network engine: small fully connected feed-forward networks
//! fitted to tabular data by backpropagation.
//!
//! Conventions used throughout: rows are samples; a layer maps `a` to
//! `f(a · W + b)` with `W` of shape `(inputs, outputs)`; losses and their
//! gradients are averaged over the rows of a batch (as scikit-learn's MLP
//! does). Each module's header states its formulas and their sources:
//!
//! * [`activation`]: non-linearities and their derivatives;
//! * [`loss`]: objectives and their output-layer gradients;
//! * [`network`]: layers, initialisation and the forward pass;
//! * [`backprop`]: gradients of a batch's loss;
//! * [`optimizer`]: SGD with momentum and Adam;
//! * [`train`](mod@train): batching, shuffling and stopping;
//! * [`metrics`]: classification and regression scores for reports.

pub mod activation;
pub mod backprop;
pub mod loss;
pub mod metrics;
pub mod network;
pub mod optimizer;
pub mod train;

pub use activation::Activation;
pub use backprop::{LayerGradient, gradients};
pub use loss::Loss;
pub use metrics::{
    ClassificationMetrics, RegressionMetrics, classification_metrics, regression_metrics,
};
pub use network::{Init, Layer, Network, NetworkError};
pub use optimizer::Optimizer;
pub use train::{
    BatchSize, EpochLosses, StopReason, TrainConfig, TrainOutcome, mean_loss, train,
    train_with_progress,
};

/// ChaCha8 stream used for initial weights. Initialisation and shuffling use
/// different streams so that the same seed value given to both does not
/// make them draw the same numbers.
pub const INIT_STREAM: u64 = 1;
/// ChaCha8 stream used for the per-epoch row order.
pub const SHUFFLE_STREAM: u64 = 2;
