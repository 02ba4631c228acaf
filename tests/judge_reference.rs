//! The statistics and the model without a hidden layer (`stet::judge`) against the
//! outside: Wilson intervals and McNemar's exact test against statsmodels, ridge and
//! logistic regression against scikit-learn (script in `tests/reference/`), and the
//! percentile bootstrap's coverage on a population whose R² is known.
//!
//! The Python checks need `STET_PYTHON` (see tests/common); without it they skip.

mod common;

use ndarray::{Array2, Axis};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::{Value, json};
use stet::judge::linear::{fit_least_squares, fit_logistic};
use stet::judge::stats::{bootstrap, mcnemar_exact, wilson};

use common::{project, reference_python, reference_script};

/// Runs tests/reference/judge_reference.py on `request`.
fn reference(python: &std::path::Path, request: &Value) -> Value {
    reference_script(python, "judge_reference.py", request)
}

fn matrix(value: &Value) -> Vec<Vec<f64>> {
    value
        .as_array()
        .unwrap()
        .iter()
        .map(|row| {
            row.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect()
        })
        .collect()
}

fn to_json(array: &Array2<f64>) -> Value {
    json!(
        array
            .rows()
            .into_iter()
            .map(|r| r.to_vec())
            .collect::<Vec<_>>()
    )
}

/// Fisher's Iris data (tests/data/README.md): the four measurements and the species index.
fn iris() -> (Array2<f64>, Vec<usize>) {
    let mut reader = csv::Reader::from_path(project().join("tests/data/iris.csv")).unwrap();
    let species = ["setosa", "versicolor", "virginica"];
    let mut x = Vec::new();
    let mut labels = Vec::new();
    for record in reader.records() {
        let record = record.unwrap();
        x.extend((0..4).map(|i| record[i].parse::<f64>().unwrap()));
        labels.push(species.iter().position(|s| *s == &record[4]).unwrap());
    }
    (
        Array2::from_shape_vec((labels.len(), 4), x).unwrap(),
        labels,
    )
}

#[test]
fn wilson_intervals_and_mcnemar_p_values_match_statsmodels() {
    let Some(python) = reference_python("Wilson and McNemar against statsmodels") else {
        return;
    };
    let proportions = [
        (0, 1),
        (1, 1),
        (0, 10),
        (8, 10),
        (10, 10),
        (45, 50),
        (88, 100),
        (1, 1000),
        (731, 1000),
    ];
    // McNemar reads only the discordant cells b and c.
    let tables = [
        [5, 1, 9, 5],
        [10, 0, 0, 10],
        [3, 7, 7, 3],
        [40, 12, 3, 45],
        [0, 30, 41, 0],
        [200, 140, 170, 90],
    ];
    let request = json!({
        "wilson": proportions,
        "mcnemar": tables,
        "ridge": {"x": [[0.0]], "y": [[0.0]]},
        "logistic": [],
    });
    let answer = reference(&python, &request);
    for ((k, n), expected) in proportions.iter().zip(matrix(&answer["wilson"])) {
        let ours = wilson(*k, *n);
        assert!(
            (ours.low - expected[0]).abs() < 1e-12,
            "{k}/{n}: {ours:?} against {expected:?}"
        );
        assert!(
            (ours.high - expected[1]).abs() < 1e-12,
            "{k}/{n}: {ours:?} against {expected:?}"
        );
    }
    for (table, expected) in tables.iter().zip(answer["mcnemar"].as_array().unwrap()) {
        let ours = mcnemar_exact(table[1], table[2]);
        let expected = expected.as_f64().unwrap();
        assert!(
            (ours - expected).abs() < 1e-12,
            "{table:?}: {ours} against {expected}"
        );
    }
}

#[test]
fn ridge_and_logistic_coefficients_match_scikit_learn_on_invented_rows_and_iris() {
    let Some(python) = reference_python("linear models against scikit-learn") else {
        return;
    };
    // Invented regression rows: two targets linear in three inputs plus noise (seed 14).
    let mut rng = ChaCha8Rng::seed_from_u64(14);
    let mut uniform = || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
    let x = Array2::from_shape_fn((40, 3), |_| 4.0 * uniform());
    let noise = Array2::from_shape_fn((40, 2), |_| uniform());
    let beta = ndarray::array![[1.5, -2.0], [0.0, 0.5], [-3.0, 1.0]];
    let y = x.dot(&beta) + 0.7 + noise;
    // Iris, all three species (multinomial), and versicolor against virginica (binary).
    let (iris_x, labels) = iris();
    let one_hot = Array2::from_shape_fn((labels.len(), 3), |(i, c)| {
        f64::from(u8::from(labels[i] == c))
    });
    let pair: Vec<usize> = (0..labels.len()).filter(|&i| labels[i] > 0).collect();
    let binary_x = iris_x.select(Axis(0), &pair);
    let binary_y = Array2::from_shape_fn((pair.len(), 1), |(i, _)| {
        f64::from(u8::from(labels[pair[i]] == 2))
    });
    let request = json!({
        "wilson": [],
        "mcnemar": [],
        "ridge": {"x": to_json(&x), "y": to_json(&y)},
        "logistic": [
            {"x": to_json(&iris_x), "y": labels},
            {"x": to_json(&binary_x), "y": pair.iter().map(|&i| usize::from(labels[i] == 2)).collect::<Vec<_>>()},
        ],
    });
    let answer = reference(&python, &request);

    let ridge = fit_least_squares(x.view(), y.view());
    let coef = matrix(&answer["ridge"]["coef"]);
    for (output, row) in coef.iter().enumerate() {
        for (input, expected) in row.iter().enumerate() {
            let ours = ridge.weights[[input, output]];
            assert!(
                (ours - expected).abs() < 1e-8,
                "ridge weight {input},{output}: {ours} against {expected}"
            );
        }
        let expected = answer["ridge"]["intercept"][output].as_f64().unwrap();
        assert!(
            (ridge.intercepts[output] - expected).abs() < 1e-8,
            "ridge intercept {output}"
        );
    }

    for (case, (x, y)) in [
        (iris_x.view(), one_hot.view()),
        (binary_x.view(), binary_y.view()),
    ]
    .into_iter()
    .enumerate()
    {
        let model = fit_logistic(x, y);
        let expected = &answer["logistic"][case];
        for (output, row) in matrix(&expected["coef"]).iter().enumerate() {
            for (input, value) in row.iter().enumerate() {
                let ours = model.weights[[input, output]];
                assert!(
                    (ours - value).abs() < 1e-5,
                    "case {case}, weight {input},{output}: {ours} against {value}"
                );
            }
        }
        // A softmax's intercepts are fixed only up to one shared constant: compare them
        // centred (stet keeps their sum at zero).
        let theirs: Vec<f64> = expected["intercept"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let centre = if theirs.len() > 1 {
            theirs.iter().sum::<f64>() / theirs.len() as f64
        } else {
            0.0
        };
        for (output, value) in theirs.iter().enumerate() {
            let ours = model.intercepts[output];
            assert!(
                (ours - (value - centre)).abs() < 1e-5,
                "case {case}, intercept {output}: {ours} against {value}"
            );
        }
    }
}

/// R² of `predicted` against `target` on the sampled rows (1 − SS_res / SS_tot).
fn r2(target: &[f64], predicted: &[f64], sample: &[usize]) -> f64 {
    let n = sample.len() as f64;
    let mean = sample.iter().map(|&i| target[i]).sum::<f64>() / n;
    let total: f64 = sample.iter().map(|&i| (target[i] - mean).powi(2)).sum();
    let residual: f64 = sample
        .iter()
        .map(|&i| (target[i] - predicted[i]).powi(2))
        .sum();
    1.0 - residual / total
}

/// A standard normal draw (Box–Muller).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u = ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let v = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

// Population: y = 2x + ε with x, ε ~ N(0, 1), scored by its own regression function 2x,
// so its R² is var(2x) / var(y) = 4 / 5 = 0.8. A 95 % percentile interval should cover it
// about 95 % of the time (Efron & Tibshirani, 1993); 200 samples of 150 rows each, with
// fixed seeds, must cover it between 88 % and 99 % of the time.
#[test]
fn the_bootstrap_interval_of_r2_covers_the_population_value_about_95_times_in_100() {
    let population_r2 = 0.8;
    let mut covered = 0;
    for sample_seed in 0..200u64 {
        let mut rng = ChaCha8Rng::seed_from_u64(1000 + sample_seed);
        let x: Vec<f64> = (0..150).map(|_| normal(&mut rng)).collect();
        let y: Vec<f64> = x.iter().map(|x| 2.0 * x + normal(&mut rng)).collect();
        let predicted: Vec<f64> = x.iter().map(|x| 2.0 * x).collect();
        let interval = bootstrap(y.len(), sample_seed, |sample| r2(&y, &predicted, sample));
        covered += usize::from(interval.contains(population_r2));
    }
    assert!((176..=198).contains(&covered), "covered {covered} of 200");
}
