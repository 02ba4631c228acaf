//! The training loop: batching, shuffling, per-epoch losses and stopping.
//!
//! Each epoch visits the rows in order, or, with `shuffle`, in an order
//! redrawn every epoch by a ChaCha8 generator seeded with `seed` on its own
//! stream ([`SHUFFLE_STREAM`](super::SHUFFLE_STREAM), distinct from the one
//! used for initial weights). [`BatchSize::Rows`]`(k)` takes `k` consecutive
//! rows of that order per update, the last batch holding what is left;
//! [`BatchSize::Full`] makes one batch of every row. A single batch (`Full`,
//! or `Rows(k)` with `k ≥` the row count) is not shuffled: its order cannot
//! change the update beyond rounding.
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
//!    loss, gives [`StopReason::Diverged`], returning the weights as they
//!    were at that moment (for a batch, those that produced the bad loss);
//! 2. a training loss at or below `target_loss` gives [`StopReason::TargetLoss`];
//! 3. with `patience = Some(p)`, the validation loss (the training loss when
//!    there is no validation data) is monitored, and after `p` consecutive
//!    epochs without a strictly lower value the run stops with
//!    [`StopReason::NoImprovement`], returning the best epoch's weights
//!    (`Some(0)` stops at the first epoch that does not improve, like `Some(1)`);
//! 4. after `epochs` epochs the run ends with [`StopReason::EpochLimit`].
//!
//! Every reduction runs in a fixed order and all randomness is seeded, so
//! the same inputs give the same outcome bit for bit. Large matrix products
//! use `matrixmultiply` (through ndarray), whose threads split the output
//! matrix but never a dot product, so the thread count (`MATMUL_NUM_THREADS`,
//! default: physical cores) does not change any result; small ones use a
//! direct kernel with the same rounding (see the `gemm` module). It does pick
//! an FMA/AVX kernel at run time, so machines with different SIMD support may
//! differ in the last bits, as may platforms whose `tanh`/`ln` differ (the
//! `exp` of sigmoid and softmax is stet's own and the same everywhere).

use ndarray::{Array2, ArrayView2, Zip};
use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use super::backprop::Workspace;
use super::float::{Float, Precision};
use super::leading;
use super::loss::Loss;
use super::network::Network;
use super::optimizer::{Optimizer, OptimizerState};
use super::rows::Rows;

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

impl TrainConfig {
    /// Plain gradient descent as the reference checks run it: rows in order, no
    /// stopping rule but the epoch count, no L2, biases updated.
    pub fn plain(loss: Loss, optimizer: Optimizer, batch: BatchSize, epochs: usize) -> TrainConfig {
        TrainConfig {
            loss,
            optimizer,
            batch,
            epochs,
            target_loss: None,
            patience: None,
            l2: 0.0,
            shuffle: false,
            seed: 0,
            update_biases: true,
        }
    }
}

/// Losses recorded after one epoch.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EpochLosses {
    /// Row-weighted mean of the epoch's batch losses.
    pub train: f64,
    /// [`mean_loss`] on the validation data after the epoch, if given.
    pub(crate) validation: Option<f64>,
}

/// The result of [`train`].
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrainOutcome {
    /// The trained network: the last weights, except for
    /// [`StopReason::NoImprovement`] (the best epoch's) and
    /// [`StopReason::Diverged`] (the weights when the non-finite loss was
    /// seen: for a batch loss, those that produced it).
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
    pub(crate) best_epoch: Option<usize>,
}

/// Fits `network` to inputs `x` and targets `y` (rows are samples), with
/// optional validation data `(x, y)`.
///
/// # Panics
/// If `x` or the validation inputs have no rows, the shapes do not fit the
/// network, the loss does not [support](Loss::supports) the output
/// activation, or the batch size is `Rows(0)`.
pub fn train(
    network: Network,
    x: ArrayView2<f64>,
    y: ArrayView2<f64>,
    validation: Option<(ArrayView2<f64>, ArrayView2<f64>)>,
    config: &TrainConfig,
) -> TrainOutcome {
    let validation = validation.map(|(vx, vy)| Rows::all(vx, vy));
    train_rows(network, Rows::all(x, y), validation, config)
}

/// [`train`] on rows read through [`Rows`] (a subset of a shared matrix,
/// scaled as it is read).
///
/// # Panics
/// As [`train`].
pub fn train_rows(
    network: Network,
    rows: Rows,
    validation: Option<Rows>,
    config: &TrainConfig,
) -> TrainOutcome {
    train_with_progress(network, rows, validation, config, |_, _| {})
}

/// [`train_rows`], calling `on_epoch(epoch, losses)` (1-based epoch) after
/// each epoch that is recorded in the history, e.g. to drive a progress bar.
///
/// # Panics
/// As [`train`].
pub(crate) fn train_with_progress(
    network: Network,
    rows: Rows,
    validation: Option<Rows>,
    config: &TrainConfig,
    on_epoch: impl FnMut(usize, &EpochLosses),
) -> TrainOutcome {
    train_at(Precision::F64, network, rows, validation, config, on_epoch)
}

/// [`train_with_progress`] with its arithmetic in the float type `precision`
/// names. Data and networks stay `f64` outside: the network is rounded to that
/// type at the start, each batch as it is formed, and the trained network is
/// converted back (exactly). Losses are summed in `f64`; the validation loss is
/// that of the network converted back, i.e. of the network a run stores.
///
/// # Panics
/// As [`train`].
pub fn train_at(
    precision: Precision,
    network: Network,
    rows: Rows,
    validation: Option<Rows>,
    config: &TrainConfig,
    on_epoch: impl FnMut(usize, &EpochLosses),
) -> TrainOutcome {
    // Re-validate: the fields are public, so the network may not have been
    // built through `from_layers`.
    let network = Network::from_layers(network.layers);
    match precision {
        Precision::F64 => train_in::<f64>(network, rows, validation, config, on_epoch),
        Precision::F32 => train_in::<f32>(network, rows, validation, config, on_epoch),
    }
}

fn train_in<F: Float>(
    network: Network,
    rows: Rows,
    validation: Option<Rows>,
    config: &TrainConfig,
    mut on_epoch: impl FnMut(usize, &EpochLosses),
) -> TrainOutcome {
    let n = rows.len();
    check_data(&network, &rows, "training");
    if let Some(v) = &validation {
        check_data(&network, v, "validation");
    }
    // The validation targets do not change between epochs.
    let validation = validation.map(|v| (v, v.target_matrix()));
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
    let mut network = network.to_precision::<F>();
    let l2 = F::round_from(config.l2);

    let mut workspace = Workspace::new(&network, batch);
    let mut optimizer = OptimizerState::new(&config.optimizer, &network);
    let mut rng = ChaCha8Rng::seed_from_u64(config.seed);
    rng.set_stream(super::SHUFFLE_STREAM);
    let mut order: Vec<usize> = (0..n).collect();
    let mut batches = Batches::<F>::new(rows, batch, shuffling);
    // Grown as epochs run: `epochs` is only a bound, and reserving it up front would
    // size an allocation by a setting (a run that stops early needs far less).
    let mut history = Vec::new();
    let mut monitor = config.patience.map(Monitor::new);

    for epoch in 1..=config.epochs {
        if shuffling {
            order.iter_mut().enumerate().for_each(|(i, r)| *r = i);
            order.shuffle(&mut rng);
        }
        let mut total = 0.0;
        for start in (0..n).step_by(batch) {
            let end = (start + batch).min(n);
            let (xb, yb) = batches.get(&order, start, end);
            workspace.forward(&network, xb);
            // The batch's loss comes with its gradient; a non-finite one stops
            // the run before the network is updated with it.
            let batch_loss = workspace.backward(&network, xb, yb, config.loss);
            if !batch_loss.is_finite() {
                return stopped(network, history, StopReason::Diverged, epoch, monitor);
            }
            total += batch_loss;
            if config.l2 != 0.0 {
                for (g, layer) in workspace.gradients.iter_mut().zip(&network.layers) {
                    Zip::from(&mut g.weights)
                        .and(&layer.weights)
                        .for_each(|g, &w| *g += l2 * w);
                }
            }
            optimizer.step(&mut network, &workspace.gradients, config.update_biases);
        }

        let train_loss = total / n as f64;
        let validation_loss = validation.as_ref().map(|(rows, targets)| {
            outputs_and_mean_loss(&F::widened(&network), rows, targets.view(), config.loss).1
        });
        // Finite batch losses can still add up to infinity.
        if !train_loss.is_finite() || validation_loss.is_some_and(|v| !v.is_finite()) {
            return stopped(network, history, StopReason::Diverged, epoch, monitor);
        }
        let losses = EpochLosses {
            train: train_loss,
            validation: validation_loss,
        };
        on_epoch(epoch, &losses);
        history.push(losses);
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
/// If `x` has no rows, the shapes do not fit the network, or the loss does
/// not [support](Loss::supports) the output activation.
pub fn mean_loss(network: &Network, x: ArrayView2<f64>, y: ArrayView2<f64>, loss: Loss) -> f64 {
    evaluate(network, &Rows::all(x, y), loss).mean_loss
}

/// A network's outputs on some rows, their targets, and the mean loss.
#[derive(Clone, Debug, PartialEq)]
pub struct Evaluation {
    /// One row of outputs per data row.
    pub(crate) outputs: Array2<f64>,
    /// The rows' targets.
    pub(crate) targets: Array2<f64>,
    /// [`mean_loss`] of the outputs.
    pub(crate) mean_loss: f64,
}

/// Runs `network` on `rows` and measures the loss, as [`mean_loss`] does.
///
/// # Panics
/// As [`mean_loss`].
pub fn evaluate(network: &Network, rows: &Rows, loss: Loss) -> Evaluation {
    check_data(network, rows, "evaluation");
    let targets = rows.target_matrix();
    let (outputs, mean_loss) = outputs_and_mean_loss(network, rows, targets.view(), loss);
    Evaluation {
        outputs,
        targets,
        mean_loss,
    }
}

/// `network`'s outputs on `rows` and their mean loss against `targets` (the
/// rows' targets, gathered by the caller so that training gathers them once).
fn outputs_and_mean_loss(
    network: &Network,
    rows: &Rows,
    targets: ArrayView2<f64>,
    loss: Loss,
) -> (Array2<f64>, f64) {
    let output = network.layers[network.layers.len() - 1].activation;
    // One sum over all rows' outputs, so the result does not depend on how
    // the rows were chunked for prediction.
    let outputs = rows.predict(network);
    let mean_loss = loss.total(output, outputs.view(), targets) / rows.len() as f64;
    (outputs, mean_loss)
}

fn check_data(network: &Network, rows: &Rows, what: &str) {
    assert!(!rows.is_empty(), "{what} data needs at least one row");
    assert_eq!(
        rows.inputs(),
        network.input_size(),
        "{what} inputs: columns vs network inputs"
    );
    assert_eq!(
        rows.targets(),
        network.output_size(),
        "{what} targets: columns vs network outputs"
    );
}

/// Hands out the training batches in the engine's float type `F`: views of
/// the data where rows are read in order, unscaled and already `f64`,
/// otherwise rows gathered (and rounded to `F`) into reused buffers. A single
/// in-order batch is gathered once, not every epoch.
struct Batches<'a, F> {
    rows: Rows<'a>,
    shuffling: bool,
    x: Array2<F>,
    y: Array2<F>,
    /// The buffers hold the one in-order batch already.
    filled: bool,
}

impl<'a, F: Float> Batches<'a, F> {
    fn new(rows: Rows<'a>, batch: usize, shuffling: bool) -> Batches<'a, F> {
        let gathers = shuffling || Self::in_place(&rows, 0, 0).is_none();
        let shape = |columns| if gathers { (batch, columns) } else { (0, 0) };
        Batches {
            rows,
            shuffling,
            x: Array2::zeros(shape(rows.inputs())),
            y: Array2::zeros(shape(rows.targets())),
            filled: false,
        }
    }

    /// Rows `start..end` as views of the data, when they can be read in place
    /// in this float type.
    fn in_place(
        rows: &Rows<'a>,
        start: usize,
        end: usize,
    ) -> Option<(ArrayView2<'a, F>, ArrayView2<'a, F>)> {
        let (x, y) = rows.in_place(start, end)?;
        F::view(x).zip(F::view(y))
    }

    /// Rows `start..end` of the epoch's `order` (positions in `rows`).
    fn get(
        &mut self,
        order: &[usize],
        start: usize,
        end: usize,
    ) -> (ArrayView2<'_, F>, ArrayView2<'_, F>) {
        if !self.shuffling
            && let Some(views) = Self::in_place(&self.rows, start, end)
        {
            return views;
        }
        let single = !self.shuffling && start == 0 && end == self.rows.len();
        if !(single && self.filled) {
            let positions = order[start..end].iter().copied();
            self.rows
                .gather(positions, self.x.view_mut(), self.y.view_mut());
            self.filled = single;
        }
        (
            leading::rows(&self.x, end - start),
            leading::rows(&self.y, end - start),
        )
    }
}

/// Early-stopping bookkeeping for `patience`.
struct Monitor<F> {
    patience: usize,
    best: f64,
    best_epoch: Option<usize>,
    best_network: Option<Network<F>>,
    stale: usize,
}

impl<F: Float> Monitor<F> {
    fn new(patience: usize) -> Monitor<F> {
        Monitor {
            patience,
            best: f64::INFINITY,
            best_epoch: None,
            best_network: None,
            stale: 0,
        }
    }

    /// Records an epoch's monitored loss; true when it is time to stop.
    fn observe(&mut self, epoch: usize, value: f64, network: &Network<F>) -> bool {
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

/// The outcome, with the network converted back to `f64`.
fn stopped<F: Float>(
    network: Network<F>,
    history: Vec<EpochLosses>,
    stop: StopReason,
    epochs_run: usize,
    monitor: Option<Monitor<F>>,
) -> TrainOutcome {
    TrainOutcome {
        network: network.to_precision(),
        history,
        stop,
        epochs_run,
        best_epoch: monitor.and_then(|m| m.best_epoch),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{Activation, Init, Layer};
    use ndarray::{Array2, array, s};

    fn sgd(learning_rate: f64, momentum: f64) -> Optimizer {
        Optimizer::Sgd {
            learning_rate,
            momentum,
        }
    }

    fn config(optimizer: Optimizer, batch: BatchSize, epochs: usize) -> TrainConfig {
        TrainConfig::plain(Loss::Mse, optimizer, batch, epochs)
    }

    /// Seven rows of a smooth two-input function with one output.
    fn data() -> (Array2<f64>, Array2<f64>) {
        let x = Array2::from_shape_fn((7, 2), |(i, j)| ((i * 3 + j * 5) % 7) as f64 / 7.0 - 0.4);
        let y = Array2::from_shape_fn((7, 1), |(i, _)| (x[[i, 0]] * 2.0 - x[[i, 1]]).sin());
        (x, y)
    }

    fn small_net(seed: u64) -> Network {
        Network::initialise(
            &[2, 5, 1],
            Activation::Tanh,
            Activation::Linear,
            Init::Xavier,
            seed,
        )
    }

    #[test]
    fn epoch_loss_weights_batches_by_rows() {
        // With a zero learning rate nothing moves, so the epoch loss must be the
        // mean over all rows, not the mean of the three batch means (3, 3, 1 rows).
        let (x, y) = data();
        let net = small_net(1);
        let out = train(
            net.clone(),
            x.view(),
            y.view(),
            None,
            &config(sgd(0.0, 0.0), BatchSize::Rows(3), 2),
        );
        let expected = mean_loss(&net, x.view(), y.view(), Loss::Mse);
        assert!((out.history[0].train - expected).abs() < 1e-15);
        assert_eq!(out.history[0], out.history[1]);
        assert_eq!(out.network, net);
    }

    #[test]
    fn batch_losses_are_taken_before_each_update() {
        // Two rows, one update per row: the epoch loss is the mean of row 1's loss
        // at the initial weights and row 2's loss after the first update.
        let (x, y) = data();
        let (x2, y2) = (x.slice(s![..2, ..]), y.slice(s![..2, ..]));
        let net = small_net(2);
        let cfg = config(sgd(0.3, 0.0), BatchSize::Rows(1), 1);
        let after_first = train(
            net.clone(),
            x2.slice(s![..1, ..]),
            y2.slice(s![..1, ..]),
            None,
            &cfg,
        )
        .network;
        let expected = (mean_loss(
            &net,
            x2.slice(s![..1, ..]),
            y2.slice(s![..1, ..]),
            Loss::Mse,
        ) + mean_loss(
            &after_first,
            x2.slice(s![1.., ..]),
            y2.slice(s![1.., ..]),
            Loss::Mse,
        )) / 2.0;
        let out = train(net, x2, y2, None, &cfg);
        assert!((out.history[0].train - expected).abs() < 1e-15);
    }

    #[test]
    fn gathered_rows_train_exactly_like_a_scaled_copy() {
        // Training reads a subset of a shared matrix, scaled per batch; the
        // result must be the same bits as training on a scaled copy of those
        // rows, in order, shuffled and as one full batch, with validation.
        let (x, y) = data();
        let (offset, divisor) = ([0.2, -0.1], [0.7, 1.3]);
        let (train_pick, test_pick) = ([6, 0, 2, 5, 3], [1, 4]);
        let shared = Rows::all(x.view(), y.view());
        let training = shared.pick(&train_pick).scaled(&offset, &divisor);
        let test_rows = shared.pick(&test_pick).scaled(&offset, &divisor);
        let (train_x, train_y) = training.scaled_copy();
        let (test_x, test_y) = test_rows.scaled_copy();
        for (batch, shuffle) in [
            (BatchSize::Rows(2), false),
            (BatchSize::Rows(2), true),
            (BatchSize::Full, false),
        ] {
            let mut cfg = config(sgd(0.1, 0.9), batch, 20);
            cfg.shuffle = shuffle;
            cfg.seed = 5;
            let gathered = train_rows(small_net(3), training, Some(test_rows), &cfg);
            let copied = train(
                small_net(3),
                train_x.view(),
                train_y.view(),
                Some((test_x.view(), test_y.view())),
                &cfg,
            );
            assert_eq!(gathered, copied, "{batch:?}, shuffle {shuffle}");
        }
    }

    #[test]
    fn full_batch_is_rows_n_and_ignores_shuffle() {
        let (x, y) = data();
        let mut full = config(sgd(0.1, 0.9), BatchSize::Full, 5);
        let a = train(small_net(3), x.view(), y.view(), None, &full);
        full.batch = BatchSize::Rows(7);
        let b = train(small_net(3), x.view(), y.view(), None, &full);
        full.batch = BatchSize::Rows(100);
        full.shuffle = true;
        let c = train(small_net(3), x.view(), y.view(), None, &full);
        assert_eq!(a, b);
        assert_eq!(a, c);
    }

    #[test]
    fn same_seed_same_outcome_other_seed_differs() {
        let (x, y) = data();
        let mut cfg = config(sgd(0.05, 0.5), BatchSize::Rows(2), 20);
        cfg.shuffle = true;
        cfg.seed = 9;
        let validation = Some((x.view(), y.view()));
        let a = train(small_net(4), x.view(), y.view(), validation, &cfg);
        let b = train(small_net(4), x.view(), y.view(), validation, &cfg);
        assert_eq!(a, b);
        cfg.seed = 10;
        let c = train(small_net(4), x.view(), y.view(), validation, &cfg);
        assert_ne!(
            a.network, c.network,
            "another shuffle seed should give other weights"
        );
        cfg.shuffle = false;
        let d = train(small_net(4), x.view(), y.view(), validation, &cfg);
        assert_ne!(a.network, d.network, "shuffling should change the result");
    }

    #[test]
    fn l2_adds_l2_times_weights_to_the_gradient() {
        // One full-batch SGD step: w' = w − η (∂L/∂w + λ w); biases get no λ term.
        let (x, y) = data();
        let net = small_net(5);
        let (eta, lambda) = (0.1, 0.03);
        let mut cfg = config(sgd(eta, 0.0), BatchSize::Full, 1);
        cfg.l2 = lambda;
        let out = train(net.clone(), x.view(), y.view(), None, &cfg);
        let grads = crate::nn::gradients(&net, x.view(), y.view(), Loss::Mse);
        for ((before, after), g) in net.layers.iter().zip(&out.network.layers).zip(&grads) {
            let expected_w = &before.weights - &((&g.weights + &(&before.weights * lambda)) * eta);
            let expected_b = &before.biases - &(&g.biases * eta);
            assert!(
                (&after.weights - &expected_w)
                    .iter()
                    .all(|d| d.abs() < 1e-15)
            );
            assert!(
                (&after.biases - &expected_b)
                    .iter()
                    .all(|d| d.abs() < 1e-15)
            );
        }
        // The recorded loss excludes the penalty.
        assert_eq!(
            out.history[0].train,
            mean_loss(&net, x.view(), y.view(), Loss::Mse)
        );
    }

    #[test]
    fn fixed_biases() {
        let (x, y) = data();
        let net = small_net(6);
        let mut cfg = config(sgd(0.1, 0.9), BatchSize::Rows(2), 3);
        cfg.update_biases = false;
        let out = train(net.clone(), x.view(), y.view(), None, &cfg);
        for (before, after) in net.layers.iter().zip(&out.network.layers) {
            assert_eq!(before.biases, after.biases);
            assert_ne!(before.weights, after.weights);
        }
    }

    #[test]
    fn an_epoch_limit_near_the_largest_integer_allocates_only_the_epochs_run() {
        let (x, y) = data();
        let cfg = TrainConfig {
            // Every mean loss is at or below infinity, so the run stops after one epoch.
            target_loss: Some(f64::INFINITY),
            ..config(sgd(0.05, 0.0), BatchSize::Rows(4), usize::MAX)
        };
        let out = train(small_net(7), x.view(), y.view(), None, &cfg);
        assert_eq!(
            (out.stop, out.epochs_run, out.history.len()),
            (StopReason::TargetLoss, 1, 1)
        );
    }

    #[test]
    fn epoch_limit() {
        let (x, y) = data();
        let out = train(
            small_net(7),
            x.view(),
            y.view(),
            None,
            &config(sgd(0.05, 0.0), BatchSize::Rows(4), 12),
        );
        assert_eq!(
            (out.stop, out.epochs_run, out.history.len(), out.best_epoch),
            (StopReason::EpochLimit, 12, 12, None)
        );
        assert!(out.history.iter().all(|e| e.validation.is_none()));
        let none = train(
            small_net(7),
            x.view(),
            y.view(),
            None,
            &config(sgd(0.05, 0.0), BatchSize::Rows(4), 0),
        );
        assert_eq!(
            (none.stop, none.epochs_run, none.history.len()),
            (StopReason::EpochLimit, 0, 0)
        );
        assert_eq!(none.network, small_net(7));
    }

    #[test]
    fn target_loss_stops_at_the_first_epoch_below_it() {
        let (x, y) = data();
        let mut cfg = config(sgd(0.1, 0.5), BatchSize::Full, 2000);
        // Aim at a value the unconstrained run passes partway through.
        let free = train(small_net(8), x.view(), y.view(), None, &cfg);
        let target = free.history[50].train;
        cfg.target_loss = Some(target);
        let out = train(small_net(8), x.view(), y.view(), None, &cfg);
        assert_eq!(out.stop, StopReason::TargetLoss);
        let k = out.epochs_run;
        assert!(out.history[k - 1].train <= target);
        assert!(out.history[..k - 1].iter().all(|e| e.train > target));
        assert_eq!(out.history[..], free.history[..k]);
    }

    #[test]
    fn patience_on_a_flat_training_loss() {
        // Nothing learns at rate 0: epoch 1 is the best and never strictly beaten.
        let (x, y) = data();
        let mut cfg = config(sgd(0.0, 0.0), BatchSize::Full, 100);
        cfg.patience = Some(4);
        let out = train(small_net(9), x.view(), y.view(), None, &cfg);
        assert_eq!(
            (out.stop, out.epochs_run, out.best_epoch),
            (StopReason::NoImprovement, 5, Some(1))
        );
    }

    #[test]
    fn patience_returns_the_best_validation_weights() {
        // A wide net fitted to eight rows while validated on rows of another
        // function: the validation loss turns up and early stopping kicks in.
        let x = Array2::from_shape_fn((8, 2), |(i, j)| (i as f64 * 0.37 + j as f64 * 0.81).sin());
        let y = Array2::from_shape_fn((8, 1), |(i, _)| (3.0 * x[[i, 0]]).cos() * x[[i, 1]]);
        let vx = Array2::from_shape_fn((8, 2), |(i, j)| {
            (i as f64 * 0.53 + j as f64 * 0.29 + 0.2).cos()
        });
        let vy = Array2::from_shape_fn((8, 1), |(i, _)| vx[[i, 0]] - vx[[i, 1]]);
        let net = Network::initialise(
            &[2, 16, 1],
            Activation::Tanh,
            Activation::Linear,
            Init::Xavier,
            10,
        );
        let mut cfg = config(sgd(0.2, 0.9), BatchSize::Rows(3), 5000);
        cfg.patience = Some(10);
        let out = train(net, x.view(), y.view(), Some((vx.view(), vy.view())), &cfg);
        assert_eq!(out.stop, StopReason::NoImprovement);
        let best = out.best_epoch.expect("patience was set");
        assert_eq!(out.epochs_run, best + 10);
        let losses: Vec<f64> = out.history.iter().map(|e| e.validation.unwrap()).collect();
        let lowest = losses.iter().copied().fold(f64::INFINITY, f64::min);
        assert_eq!(losses[best - 1], lowest);
        assert_eq!(
            mean_loss(&out.network, vx.view(), vy.view(), Loss::Mse),
            lowest
        );
    }

    #[test]
    fn divergence_is_reported_not_panicked() {
        // y = 100 x with a far too large step: the linear fit overshoots further
        // at every update until the loss overflows.
        let x = Array2::from_shape_fn((10, 1), |(i, _)| i as f64);
        let y = &x * 100.0;
        let net = Network::from_layers(vec![Layer {
            weights: array![[0.0]],
            biases: array![0.0],
            activation: Activation::Linear,
        }]);
        let out = train(
            net,
            x.view(),
            y.view(),
            None,
            &config(sgd(10.0, 0.0), BatchSize::Full, 1000),
        );
        assert_eq!(out.stop, StopReason::Diverged);
        // Each step multiplies the weight error by about η·mean(x²) = 285 and so the
        // loss by about 8e4: it overflows f64 after some 60 epochs (63 here).
        assert!(
            (20..500).contains(&out.epochs_run),
            "diverged at epoch {}",
            out.epochs_run
        );
        assert_eq!(out.history.len(), out.epochs_run - 1);
        assert!(out.history.iter().all(|e| e.train.is_finite()));
        // The returned weights are those that gave the non-finite loss.
        assert!(!mean_loss(&out.network, x.view(), y.view(), Loss::Mse).is_finite());
    }

    #[test]
    fn progress_sees_every_recorded_epoch() {
        let (x, y) = data();
        let mut seen = Vec::new();
        let cfg = config(sgd(0.05, 0.5), BatchSize::Rows(3), 6);
        let rows = Rows::all(x.view(), y.view());
        let out = train_with_progress(small_net(11), rows, None, &cfg, |e, l| seen.push((e, *l)));
        let expected: Vec<_> = out
            .history
            .iter()
            .copied()
            .enumerate()
            .map(|(i, l)| (i + 1, l))
            .collect();
        assert_eq!(seen, expected);
        assert_eq!(seen.len(), 6);
    }

    /// Every weight of an `f32` run is an `f32` value widened.
    fn all_single(network: &Network) -> bool {
        network.layers.iter().all(|l| {
            l.weights
                .iter()
                .chain(&l.biases)
                .all(|&v| f64::from(v as f32) == v)
        })
    }

    #[test]
    fn an_f32_run_starts_from_the_rounded_draws() {
        let (x, y) = data();
        let net = small_net(12);
        let still = train_at(
            Precision::F32,
            net.clone(),
            Rows::all(x.view(), y.view()),
            None,
            &config(sgd(0.0, 0.0), BatchSize::Rows(3), 1),
            |_, _| {},
        );
        assert_eq!(still.network, net.to_precision::<f32>().to_precision());
        assert_ne!(still.network, net, "Xavier draws use all 53 bits");
    }

    #[test]
    fn an_f32_run_trains_in_single_precision_along_the_f64_path() {
        let (x, y) = data();
        let mut cfg = config(sgd(0.1, 0.9), BatchSize::Rows(3), 50);
        cfg.shuffle = true;
        let validation = Some((x.view(), y.view()));
        let double = train(small_net(13), x.view(), y.view(), validation, &cfg);
        let rows = Rows::all(x.view(), y.view());
        let single = train_at(
            Precision::F32,
            small_net(13),
            rows,
            Some(rows),
            &cfg,
            |_, _| {},
        );
        assert!(all_single(&single.network));
        assert!(!all_single(&double.network));
        let (a, b) = (single.history[49], double.history[49]);
        assert!(
            b.train < 0.5 * double.history[0].train,
            "the run should learn"
        );
        // Rounding at 6e-8 per operation, amplified a little by 150 updates.
        assert!((a.train - b.train).abs() < 1e-4 * b.train, "{a:?} vs {b:?}");
        // The validation loss is that of the stored (widened) network.
        assert_eq!(
            a.validation,
            Some(mean_loss(&single.network, x.view(), y.view(), Loss::Mse))
        );
    }

    #[test]
    #[should_panic(expected = "cannot follow")]
    fn cross_entropy_needs_probabilities() {
        let (x, y) = data();
        let mut cfg = config(sgd(0.1, 0.0), BatchSize::Full, 1);
        cfg.loss = Loss::CrossEntropy;
        train(small_net(0), x.view(), y.view(), None, &cfg);
    }

    #[test]
    fn config_serde_round_trip() {
        let mut cfg = config(
            Optimizer::Adam {
                learning_rate: 0.001,
                beta1: 0.9,
                beta2: 0.999,
                epsilon: 1e-8,
            },
            BatchSize::Rows(32),
            10,
        );
        cfg.patience = Some(3);
        let json = serde_json::to_string(&cfg).unwrap();
        assert!(
            json.contains("\"adam\"") && json.contains("\"rows\":32"),
            "{json}"
        );
        assert_eq!(serde_json::from_str::<TrainConfig>(&json).unwrap(), cfg);
    }
}
