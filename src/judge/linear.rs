//! The model without a hidden layer, fitted to convergence on a partition's scaled
//! training rows: least squares with a ridge penalty for regression, L2-penalised
//! logistic regression (binary, or multinomial over softmax) for classification.
//!
//! Both minimise a *sum* over rows plus `½ · PENALTY · ‖w‖²` on the weights (never the
//! intercepts), which is scikit-learn's `Ridge(alpha=1.0)` and
//! `LogisticRegression(C=1.0)`, its defaults. Ridge is solved exactly (centred normal
//! equations, Cholesky); logistic regression by Newton's method with a backtracking
//! line search, which converges to machine precision in a few steps on the small tables
//! stet is for and needs no tuning. Everything is deterministic: no random start.

use ndarray::{Array1, Array2, ArrayView2, Axis, s};
use serde::{Deserialize, Serialize};

/// The L2 penalty λ on the weights: `Ridge(alpha=λ)`, `LogisticRegression(C=1/λ)`.
pub const PENALTY: f64 = 1.0;

/// Newton steps before giving up on a logistic fit (it converges in well under 30).
const MAX_NEWTON_STEPS: usize = 100;

/// A fitted linear model: `outputs = link(x · weights + intercepts)`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LinearModel {
    /// One column per output (`inputs × outputs`).
    pub weights: Array2<f64>,
    pub intercepts: Array1<f64>,
    pub link: Link,
}

/// How the linear scores become outputs.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Link {
    /// Regression: the scores themselves.
    Identity,
    /// Two classes: the probability of the second, in one column.
    Sigmoid,
    /// Several classes: one probability per class.
    Softmax,
}

impl LinearModel {
    /// The model's outputs for scaled inputs `x`, shaped as a network's outputs.
    pub fn predict(&self, x: ArrayView2<f64>) -> Array2<f64> {
        let scores = x.dot(&self.weights) + &self.intercepts;
        match self.link {
            Link::Identity => scores,
            Link::Sigmoid => scores.mapv(|z| 1.0 / (1.0 + (-z).exp())),
            Link::Softmax => softmax_rows(scores),
        }
    }
}

/// Ridge regression of every target column on `x` (scikit-learn's `Ridge`, which
/// centres inputs and targets so the intercepts go unpenalised).
pub fn fit_least_squares(x: ArrayView2<f64>, y: ArrayView2<f64>) -> LinearModel {
    let x_mean = x.mean_axis(Axis(0)).expect("training rows");
    let y_mean = y.mean_axis(Axis(0)).expect("training rows");
    let xc = &x - &x_mean;
    let yc = &y - &y_mean;
    let mut gram = xc.t().dot(&xc);
    gram.diag_mut().mapv_inplace(|v| v + PENALTY);
    // The penalty makes the system positive definite; only inputs so large that their
    // products overflow can break the factorisation, and then the model's outputs are
    // not numbers (shown as a dash) rather than a panic.
    let weights = solve_positive_definite(gram, xc.t().dot(&yc))
        .unwrap_or_else(|| Array2::from_elem((x.ncols(), y.ncols()), f64::NAN));
    let intercepts = &y_mean - &x_mean.dot(&weights);
    LinearModel {
        weights,
        intercepts,
        link: Link::Identity,
    }
}

/// L2-penalised logistic regression: binary when `y` has one 0/1 column, multinomial
/// when it is one-hot over several classes.
pub fn fit_logistic(x: ArrayView2<f64>, y: ArrayView2<f64>) -> LinearModel {
    let link = if y.ncols() == 1 {
        Link::Sigmoid
    } else {
        Link::Softmax
    };
    let (inputs, outputs) = (x.ncols(), y.ncols());
    let mut model = LinearModel {
        weights: Array2::zeros((inputs, outputs)),
        intercepts: Array1::zeros(outputs),
        link,
    };
    let mut objective = logistic_objective(&model, x, y);
    for _ in 0..MAX_NEWTON_STEPS {
        let (gradient, hessian) = logistic_derivatives(&model, x, y);
        if gradient
            .iter()
            .all(|g| g.abs() <= 1e-11 * (1.0 + x.nrows() as f64))
        {
            break;
        }
        let Some(step) = solve_positive_definite(hessian, gradient.insert_axis(Axis(1))) else {
            break;
        };
        let step = step.column(0).to_owned();
        // Backtracking (Armijo): Newton's full step can overshoot far from the optimum.
        let mut size = 1.0;
        let mut accepted = false;
        for _ in 0..50 {
            let trial = stepped(&model, &step, size);
            let value = logistic_objective(&trial, x, y);
            if value <= objective {
                model = trial;
                objective = value;
                accepted = true;
                break;
            }
            size /= 2.0;
        }
        if !accepted {
            break;
        }
    }
    model
}

/// Parameters in one vector: for each output column, its weights then its intercept.
fn stepped(model: &LinearModel, step: &Array1<f64>, size: f64) -> LinearModel {
    let mut next = model.clone();
    let width = model.weights.nrows() + 1;
    for k in 0..model.weights.ncols() {
        let block = step.slice(s![k * width..(k + 1) * width]);
        let mut column = next.weights.column_mut(k);
        column.scaled_add(-size, &block.slice(s![..width - 1]));
        next.intercepts[k] -= size * block[width - 1];
    }
    if model.link == Link::Softmax {
        // Adding one constant to every class's intercept changes no probability; keep
        // their sum at zero (as a solver started from zero does) so the fit is unique.
        let mean = next.intercepts.mean().unwrap_or(0.0);
        next.intercepts.mapv_inplace(|b| b - mean);
    }
    next
}

/// Sum of the rows' cross-entropy plus the weights' penalty.
fn logistic_objective(model: &LinearModel, x: ArrayView2<f64>, y: ArrayView2<f64>) -> f64 {
    let scores = x.dot(&model.weights) + &model.intercepts;
    let data: f64 = match model.link {
        // −[y·z − log(1 + eᶻ)], with log(1 + eᶻ) computed without overflow.
        Link::Sigmoid => scores
            .iter()
            .zip(y.iter())
            .map(|(&z, &t)| softplus(z) - t * z)
            .sum(),
        _ => scores
            .rows()
            .into_iter()
            .zip(y.rows())
            .map(|(z, t)| {
                let largest = z.fold(f64::NEG_INFINITY, |a, &b| a.max(b));
                let log_sum = largest + z.iter().map(|v| (v - largest).exp()).sum::<f64>().ln();
                log_sum - z.dot(&t)
            })
            .sum(),
    };
    data + 0.5 * PENALTY * model.weights.iter().map(|w| w * w).sum::<f64>()
}

fn softplus(z: f64) -> f64 {
    if z > 0.0 {
        z + (-z).exp().ln_1p()
    } else {
        z.exp().ln_1p()
    }
}

/// The objective's gradient and Hessian over the parameter vector (see `stepped`).
fn logistic_derivatives(
    model: &LinearModel,
    x: ArrayView2<f64>,
    y: ArrayView2<f64>,
) -> (Array1<f64>, Array2<f64>) {
    let (n, inputs) = x.dim();
    let outputs = model.weights.ncols();
    let width = inputs + 1;
    let mut augmented = Array2::ones((n, width));
    augmented.slice_mut(s![.., ..inputs]).assign(&x);
    let probabilities = model.predict(x);
    let residual = &probabilities - &y;
    let mut gradient = Array1::zeros(outputs * width);
    let mut hessian = Array2::zeros((outputs * width, outputs * width));
    for k in 0..outputs {
        let block = augmented.t().dot(&residual.column(k));
        gradient
            .slice_mut(s![k * width..(k + 1) * width])
            .assign(&block);
        for l in 0..outputs {
            // ∂p_k/∂z_l = p_k (δ_kl − p_l); for one sigmoid column, p (1 − p).
            let kronecker = f64::from(u8::from(k == l));
            let curvature: Array1<f64> = probabilities
                .rows()
                .into_iter()
                .map(|p| p[k] * (kronecker - p[l]))
                .collect();
            let weighted = &augmented * &curvature.insert_axis(Axis(1));
            hessian
                .slice_mut(s![k * width..(k + 1) * width, l * width..(l + 1) * width])
                .assign(&augmented.t().dot(&weighted));
        }
    }
    for k in 0..outputs {
        for j in 0..inputs {
            let at = k * width + j;
            gradient[at] += PENALTY * model.weights[[j, k]];
            hessian[[at, at]] += PENALTY;
        }
        // The softmax's intercepts share one flat direction (see `stepped`); a touch of
        // curvature there keeps the Newton system solvable without moving the optimum.
        let at = k * width + inputs;
        hessian[[at, at]] += 1e-9;
    }
    (gradient, hessian)
}

fn softmax_rows(mut scores: Array2<f64>) -> Array2<f64> {
    for mut row in scores.rows_mut() {
        let largest = row.fold(f64::NEG_INFINITY, |a, &b| a.max(b));
        row.mapv_inplace(|v| (v - largest).exp());
        let total = row.sum();
        row.mapv_inplace(|v| v / total);
    }
    scores
}

/// Solves `a · x = b` for symmetric positive definite `a` by Cholesky factorisation;
/// `None` when `a` is not positive definite in floating point.
fn solve_positive_definite(a: Array2<f64>, b: Array2<f64>) -> Option<Array2<f64>> {
    let n = a.nrows();
    let mut lower = Array2::<f64>::zeros((n, n));
    for i in 0..n {
        for j in 0..=i {
            let dot: f64 = (0..j).map(|k| lower[[i, k]] * lower[[j, k]]).sum();
            if i == j {
                let pivot = a[[i, i]] - dot;
                if pivot.is_nan() || pivot <= 0.0 {
                    return None;
                }
                lower[[i, i]] = pivot.sqrt();
            } else {
                lower[[i, j]] = (a[[i, j]] - dot) / lower[[j, j]];
            }
        }
    }
    let mut x = b;
    for mut column in x.columns_mut() {
        // Forward: L · z = b, then back: Lᵀ · x = z.
        for i in 0..n {
            let dot: f64 = (0..i).map(|k| lower[[i, k]] * column[k]).sum();
            column[i] = (column[i] - dot) / lower[[i, i]];
        }
        for i in (0..n).rev() {
            let dot: f64 = (i + 1..n).map(|k| lower[[k, i]] * column[k]).sum();
            column[i] = (column[i] - dot) / lower[[i, i]];
        }
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    // By hand: 4x + 2y = 2, 2x + 3y = 1 gives x = 1/2, y = 0.
    #[test]
    fn cholesky_solves_a_small_positive_definite_system() {
        let x =
            solve_positive_definite(array![[4.0, 2.0], [2.0, 3.0]], array![[2.0], [1.0]]).unwrap();
        assert!(
            (x[[0, 0]] - 0.5).abs() < 1e-15 && x[[1, 0]].abs() < 1e-15,
            "{x}"
        );
        assert!(solve_positive_definite(array![[0.0]], array![[1.0]]).is_none());
    }

    // With the penalty, an exact line y = 2x + 1 on x = −1, 0, 1 shrinks its slope to
    // Σxy / (Σx² + λ) = 4 / 3 (centred data), the intercept staying at the mean 1.
    #[test]
    fn ridge_shrinks_a_slope_by_the_penalty() {
        let x = array![[-1.0], [0.0], [1.0]];
        let y = array![[-1.0], [1.0], [3.0]];
        let model = fit_least_squares(x.view(), y.view());
        assert!((model.weights[[0, 0]] - 4.0 / 3.0).abs() < 1e-14);
        assert!((model.intercepts[0] - 1.0).abs() < 1e-14);
    }

    // At the optimum the gradient vanishes: Σ (p − y)·x + λw = 0 and Σ (p − y) = 0.
    #[test]
    fn a_binary_logistic_fit_ends_where_its_gradient_vanishes() {
        let x = array![[-2.0], [-1.0], [0.0], [0.5], [1.0], [2.0]];
        let y = array![[0.0], [0.0], [1.0], [0.0], [1.0], [1.0]];
        let model = fit_logistic(x.view(), y.view());
        let (gradient, _) = logistic_derivatives(&model, x.view(), y.view());
        assert!(gradient.iter().all(|g| g.abs() < 1e-9), "{gradient}");
        assert!(model.weights[[0, 0]] > 0.0);
    }
}
