//! The training loop: batching, shuffling, per-epoch losses and stopping.
//!
//! Each epoch visits the rows in order, or, with `shuffle`, in an order
//! redrawn every epoch by a ChaCha8 generator seeded with `seed` on its own
//! stream ([`SHUFFLE_STREAM`](super::SHUFFLE_STREAM), distinct from the one
//! used for initial weights). [`BatchSize::Rows`]`(k)` takes `k` consecutive
//! rows of that order per update, the last batch holding what is left;
//! [`BatchSize::Full`] makes one batch of every row (which is then not
//! shuffled: the order of a single batch cannot change the update beyond
//! rounding).
//!
//! The epoch's training loss is the row-weighted mean of the batch losses,
//! each computed in that batch's forward pass before its update, so it
//! costs no extra pass (with one batch per epoch it is the loss of the
//! weights the epoch started with). The validation loss is [`mean_loss`] on
//! the validation rows after the epoch's last update. Neither includes the
//! L2 term; L2 adds `l2 · W` to each weight gradient (not to biases), and is
//! not divided by the batch size (scikit-learn's `alpha` is: `alpha = l2 · n`
//! for batches of `n` rows).
//!
//! After each epoch, in this order:
//! 1. a non-finite batch loss (checked as each batch is seen, so the run stops
//!    mid-epoch before updating with it), or a non-finite epoch or validation
//!    loss, gives [`StopReason::Diverged`], returning the weights that
//!    produced it;
//! 2. a training loss at or below `target_loss` gives [`StopReason::TargetLoss`];
//! 3. with `patience = Some(p)`, the validation loss (the training loss when
//!    there is no validation data) is monitored, and after `p` consecutive
//!    epochs without a strictly lower value the run stops with
//!    [`StopReason::NoImprovement`], returning the best epoch's weights
//!    (`Some(0)` stops at the first epoch that does not improve, like `Some(1)`);
//! 4. after `epochs` epochs the run ends with [`StopReason::EpochLimit`].
//!
//! Everything is sequential and seeded, so the same inputs give the same
//! outcome bit for bit on a given machine. (Matrix products use
//! `matrixmultiply`, which picks an AVX/FMA kernel at run time, so machines
//! with different SIMD support may differ in the last bits.)

use ndarray::{Array2, ArrayView2, Zip, s};
use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use super::backprop::Workspace;
use super::loss::Loss;
use super::network::Network;
use super::optimizer::{Optimizer, OptimizerState};

/// Why training ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StopReason {
    /// The training loss reached `target_loss`.
    TargetLoss,
    /// All `epochs` ran.
    EpochLimit,
    /// The monitored loss did not improve for `patience` epochs.
    NoImprovement,
    /// A loss became NaN or infinite.
    Diverged,
}

/// How many rows go into each update.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BatchSize {
    /// This many consecutive rows per update (the last batch may be shorter);
    /// `Rows(1)` is one update per row.
    Rows(usize),
    /// All rows in one batch: one update per epoch.
    Full,
}

/// Everything [`train`] needs besides the network and the data.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrainConfig {
    /// The objective.
    pub loss: Loss,
    /// The update rule.
    pub optimizer: Optimizer,
    /// Rows per update.
    pub batch: BatchSize,
    /// The most epochs to run.
    pub epochs: usize,
    /// Stop once the epoch's training loss is at or below this.
    pub target_loss: Option<f64>,
    /// Stop after this many epochs without improvement of the monitored loss.
    pub patience: Option<usize>,
    /// L2 penalty coefficient on weights (0 for none).
    pub l2: f64,
    /// Redraw the row order every epoch.
    pub shuffle: bool,
    /// Seed for the row order.
    pub seed: u64,
    /// `false` only for reference checks that hold biases fixed.
    pub update_biases: bool,
}

/// Losses recorded after one epoch.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EpochLosses {
    /// Row-weighted mean of the epoch's batch losses.
    pub train: f64,
    /// [`mean_loss`] on the validation data after the epoch, if given.
    pub validation: Option<f64>,
}

/// The result of [`train`].
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrainOutcome {
    /// The trained network: the last weights, except for
    /// [`StopReason::NoImprovement`] (the best epoch's) and
    /// [`StopReason::Diverged`] (those that gave the non-finite loss).
    pub network: Network,
    /// One entry per completed epoch. All entries are finite: an epoch that
    /// diverged is not recorded, so then `history.len() == epochs_run − 1`.
    pub history: Vec<EpochLosses>,
    /// Why training ended.
    pub stop: StopReason,
    /// Epochs started, counting a diverged one.
    pub epochs_run: usize,
    /// 1-based epoch with the lowest monitored loss; `Some` only when
    /// `patience` is set and at least one epoch completed.
    pub best_epoch: Option<usize>,
}

/// Fits `network` to inputs `x` and targets `y` (rows are samples), with
/// optional validation data `(x, y)`.
///
/// # Panics
/// If `x` has no rows, the shapes do not fit the network, the loss does not
/// [support](Loss::supports) the output activation, or the batch size is
/// `Rows(0)`.
pub fn train(
    network: Network,
    x: ArrayView2<f64>,
    y: ArrayView2<f64>,
    validation: Option<(ArrayView2<f64>, ArrayView2<f64>)>,
    config: &TrainConfig,
) -> TrainOutcome {
    // Re-validate: the fields are public, so the network may not have been
    // built through `from_layers`.
    let mut network = Network::from_layers(network.layers);
    let n = x.nrows();
    assert!(n > 0, "training needs at least one row");
    check_data(&network, x, y, "training");
    if let Some((vx, vy)) = validation {
        check_data(&network, vx, vy, "validation");
    }
    let output = network.layers[network.layers.len() - 1].activation;
    assert!(
        config.loss.supports(output),
        "{:?} loss cannot follow a {output:?} output",
        config.loss
    );
    let batch = match config.batch {
        BatchSize::Rows(k) => {
            assert!(k > 0, "batch size must be at least one row");
            k.min(n)
        }
        BatchSize::Full => n,
    };
    let shuffling = config.shuffle && batch < n;

    let mut workspace = Workspace::new(&network, batch);
    let mut optimizer = OptimizerState::new(&config.optimizer, &network);
    let mut rng = ChaCha8Rng::seed_from_u64(config.seed);
    rng.set_stream(super::SHUFFLE_STREAM);
    let mut order: Vec<usize> = (0..n).collect();
    // Shuffled batches are gathered here; in-order batches are views of x, y.
    let (mut batch_x, mut batch_y) = if shuffling {
        (
            Array2::zeros((batch, x.ncols())),
            Array2::zeros((batch, y.ncols())),
        )
    } else {
        (Array2::zeros((0, 0)), Array2::zeros((0, 0)))
    };
    let mut history = Vec::with_capacity(config.epochs);
    let mut monitor = config.patience.map(Monitor::new);

    for epoch in 1..=config.epochs {
        if shuffling {
            order.iter_mut().enumerate().for_each(|(i, r)| *r = i);
            order.shuffle(&mut rng);
        }
        let mut total = 0.0;
        for start in (0..n).step_by(batch) {
            let end = (start + batch).min(n);
            let (xb, yb) = if shuffling {
                for (i, &row) in order[start..end].iter().enumerate() {
                    batch_x.row_mut(i).assign(&x.row(row));
                    batch_y.row_mut(i).assign(&y.row(row));
                }
                (
                    batch_x.slice(s![..end - start, ..]),
                    batch_y.slice(s![..end - start, ..]),
                )
            } else {
                (x.slice(s![start..end, ..]), y.slice(s![start..end, ..]))
            };
            let batch_loss = config
                .loss
                .total(output, workspace.forward(&network, xb), yb);
            if !batch_loss.is_finite() {
                return stopped(network, history, StopReason::Diverged, epoch, monitor);
            }
            total += batch_loss;
            workspace.backward(&network, xb, yb, config.loss);
            if config.l2 != 0.0 {
                for (g, layer) in workspace.gradients.iter_mut().zip(&network.layers) {
                    Zip::from(&mut g.weights)
                        .and(&layer.weights)
                        .for_each(|g, &w| *g += config.l2 * w);
                }
            }
            optimizer.step(&mut network, &workspace.gradients, config.update_biases);
        }

        let train_loss = total / n as f64;
        let validation_loss = validation.map(|(vx, vy)| mean_loss(&network, vx, vy, config.loss));
        // Finite batch losses can still add up to infinity.
        if !train_loss.is_finite() || validation_loss.is_some_and(|v| !v.is_finite()) {
            return stopped(network, history, StopReason::Diverged, epoch, monitor);
        }
        history.push(EpochLosses {
            train: train_loss,
            validation: validation_loss,
        });
        if config
            .target_loss
            .is_some_and(|target| train_loss <= target)
        {
            return stopped(network, history, StopReason::TargetLoss, epoch, monitor);
        }
        if let Some(m) = monitor.as_mut()
            && m.observe(epoch, validation_loss.unwrap_or(train_loss), &network)
        {
            let best = m.best_network.take().expect("an epoch has been recorded");
            return stopped(best, history, StopReason::NoImprovement, epoch, monitor);
        }
    }
    stopped(
        network,
        history,
        StopReason::EpochLimit,
        config.epochs,
        monitor,
    )
}

/// The training objective's mean per-row value on `(x, y)`, without any L2
/// term.
///
/// # Panics
/// If the shapes do not fit the network or the loss does not
/// [support](Loss::supports) the output activation.
pub fn mean_loss(network: &Network, x: ArrayView2<f64>, y: ArrayView2<f64>, loss: Loss) -> f64 {
    check_data(network, x, y, "evaluation");
    let output = network.layers[network.layers.len() - 1].activation;
    loss.total(output, network.predict(x).view(), y) / x.nrows() as f64
}

fn check_data(network: &Network, x: ArrayView2<f64>, y: ArrayView2<f64>, what: &str) {
    assert_eq!(
        x.ncols(),
        network.input_size(),
        "{what} inputs: columns vs network inputs"
    );
    assert_eq!(
        y.ncols(),
        network.output_size(),
        "{what} targets: columns vs network outputs"
    );
    assert_eq!(
        x.nrows(),
        y.nrows(),
        "{what} inputs and targets: row counts"
    );
}

/// Early-stopping bookkeeping for `patience`.
struct Monitor {
    patience: usize,
    best: f64,
    best_epoch: Option<usize>,
    best_network: Option<Network>,
    stale: usize,
}

impl Monitor {
    fn new(patience: usize) -> Monitor {
        Monitor {
            patience,
            best: f64::INFINITY,
            best_epoch: None,
            best_network: None,
            stale: 0,
        }
    }

    /// Records an epoch's monitored loss; true when it is time to stop.
    fn observe(&mut self, epoch: usize, value: f64, network: &Network) -> bool {
        if value < self.best {
            self.best = value;
            self.best_epoch = Some(epoch);
            self.best_network = Some(network.clone());
            self.stale = 0;
            false
        } else {
            self.stale += 1;
            self.stale >= self.patience
        }
    }
}

fn stopped(
    network: Network,
    history: Vec<EpochLosses>,
    stop: StopReason,
    epochs_run: usize,
    monitor: Option<Monitor>,
) -> TrainOutcome {
    TrainOutcome {
        network,
        history,
        stop,
        epochs_run,
        best_epoch: monitor.and_then(|m| m.best_epoch),
    }
}
