//! What a predict step writes, for each task: the input file's columns followed by the
//! prediction columns, one row per input row. Predicting the very rows a model was fitted
//! and tested on ties the written numbers to the model's metrics in the `--json` summary:
//! accuracy, mean squared and mean absolute error over all rows are weighted means of
//! the train and test sets' values, so they lie between them; R² over all rows is at
//! least the smaller of the two (the pooled squared error is a sum, while the pooled
//! spread about the overall mean is at least the sum of each set's spread about its own
//! mean).

mod common;

use common::{Workspace, step};
use serde_json::Value;

/// A CSV file read as its header and rows.
struct Table {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl Table {
    fn read(path: &std::path::Path) -> Table {
        let mut reader = csv::Reader::from_path(path).expect("a readable CSV");
        let header = reader.headers().unwrap().iter().map(String::from).collect();
        let rows = reader
            .records()
            .map(|row| row.unwrap().iter().map(String::from).collect())
            .collect();
        Table { header, rows }
    }

    fn column(&self, name: &str) -> usize {
        self.header
            .iter()
            .position(|column| column == name)
            .unwrap_or_else(|| panic!("no column {name} in {:?}", self.header))
    }

    fn numbers(&self, name: &str) -> Vec<f64> {
        let at = self.column(name);
        self.rows
            .iter()
            .map(|row| row[at].parse().unwrap())
            .collect()
    }

    fn texts(&self, name: &str) -> Vec<&str> {
        let at = self.column(name);
        self.rows.iter().map(|row| row[at].as_str()).collect()
    }
}

/// A document fitting `data_settings` and predicting its own file into `predictions.csv`.
fn fit_and_predict(data_settings: &str, file: &str) -> String {
    format!(
        "```yaml data rows\n{data_settings}holdout: 0.25\nseed: 3\n```\n\n\
         ```yaml net small\nhidden: [6]\n```\n\n\
         ```yaml train fit\ndata: rows\nnet: small\nlearning_rate: 0.05\nbatch: 16\nepochs: 200\nseed: 4\n```\n\n\
         ```yaml predict guesses\nmodel: fit\nfile: {file}\nwrite: predictions.csv\n```\n"
    )
}

/// A metric's train and test values in the summary, lower first.
fn train_and_test(summary: &Value, metric: &str) -> (f64, f64) {
    let metrics = &step(summary, "fit")["metrics"];
    let value = |set: &str| metrics[set][metric].as_f64().unwrap();
    let (train, test) = (value("train"), value("test"));
    (train.min(test), train.max(test))
}

/// Checks a classifier's prediction columns: one probability per class summing to 1, the
/// predicted class their argmax, and an accuracy over all rows no worse than the summary's.
fn assert_class_predictions(table: &Table, input: &Table, classes: &[&str], summary: &Value) {
    let mut expected_header = input.header.clone();
    expected_header.push("predicted_species".into());
    expected_header.extend(classes.iter().map(|class| format!("p_{class}")));
    assert_eq!(table.header, expected_header);
    assert_eq!(table.rows.len(), input.rows.len());
    let probabilities: Vec<Vec<f64>> = classes
        .iter()
        .map(|class| table.numbers(&format!("p_{class}")))
        .collect();
    let predicted = table.texts("predicted_species");
    let actual = table.texts("species");
    let mut correct = 0;
    for row in 0..table.rows.len() {
        let p: Vec<f64> = probabilities.iter().map(|column| column[row]).collect();
        assert!(
            p.iter().all(|&v| (0.0..=1.0).contains(&v)),
            "row {row}: {p:?}"
        );
        let total: f64 = p.iter().sum();
        assert!((total - 1.0).abs() <= 1e-9, "row {row} sums to {total}");
        let best = (0..p.len()).fold(0, |best, i| if p[i] > p[best] { i } else { best });
        assert_eq!(predicted[row], classes[best], "row {row}: {p:?}");
        correct += usize::from(predicted[row] == actual[row]);
    }
    let accuracy = correct as f64 / table.rows.len() as f64;
    let (lower, upper) = train_and_test(summary, "accuracy");
    assert!(
        (lower - 1e-12..=upper + 1e-12).contains(&accuracy),
        "accuracy {accuracy} outside the train and test accuracies {lower}..{upper}"
    );
}

#[test]
fn a_regression_prediction_adds_one_finite_column_as_good_as_the_model() {
    let ws = Workspace::new();
    let settings = "file: ../demo-data/greenhouse.csv\ntarget: water_l\n\
                    inputs: [crop, air_temp_c, light_klux, humidity_pct, plant_age_days]\n";
    let doc = ws.write(
        "experiments/water.md",
        &fit_and_predict(settings, "../demo-data/greenhouse.csv"),
    );
    let summary = ws.build_ok(&doc, &[]);
    let input = Table::read(&ws.path("demo-data/greenhouse.csv"));
    let table = Table::read(&ws.path("experiments/predictions.csv"));
    let mut expected_header = input.header.clone();
    expected_header.push("predicted_water_l".into());
    assert_eq!(table.header, expected_header);
    assert_eq!(table.rows.len(), input.rows.len());
    assert_eq!(step(&summary, "guesses")["rows"], input.rows.len());

    let predicted = table.numbers("predicted_water_l");
    let actual = table.numbers("water_l");
    assert!(predicted.iter().all(|v| v.is_finite()));
    let rows = actual.len() as f64;
    let mean = actual.iter().sum::<f64>() / rows;
    let errors: Vec<f64> = predicted.iter().zip(&actual).map(|(p, y)| p - y).collect();
    let squared_error: f64 = errors.iter().map(|e| e * e).sum();
    let absolute_error: f64 = errors.iter().map(|e| e.abs()).sum();
    let spread: f64 = actual.iter().map(|y| (y - mean).powi(2)).sum();
    for (metric, value) in [
        ("mse", squared_error / rows),
        ("mae", absolute_error / rows),
    ] {
        let (lower, upper) = train_and_test(&summary, metric);
        assert!(
            (lower - 1e-9..=upper + 1e-9).contains(&value),
            "{metric} {value} outside the train and test values {lower}..{upper}"
        );
    }
    let r2 = 1.0 - squared_error / spread;
    let (floor, _) = train_and_test(&summary, "r2");
    assert!(r2 >= floor - 1e-9 && r2 <= 1.0, "R² {r2} below {floor}");
}

#[test]
fn a_binary_prediction_gives_two_probabilities_summing_to_one_and_their_argmax() {
    let ws = Workspace::new();
    // Fisher's Iris (tests/data/README.md) without setosa: versicolor against virginica,
    // the two species that overlap, so the probabilities are not all 0 or 1.
    let iris = std::fs::read_to_string(ws.path("iris.csv")).unwrap();
    let two_species: Vec<&str> = iris
        .lines()
        .filter(|line| !line.ends_with(",setosa"))
        .collect();
    ws.write("two.csv", &(two_species.join("\n") + "\n"));
    let doc = ws.write(
        "two.md",
        &fit_and_predict("file: two.csv\ntarget: species\n", "two.csv"),
    );
    let summary = ws.build_ok(&doc, &[]);
    assert_class_predictions(
        &Table::read(&ws.path("predictions.csv")),
        &Table::read(&ws.path("two.csv")),
        &["versicolor", "virginica"],
        &summary,
    );
}

#[test]
fn a_multi_class_prediction_gives_one_probability_per_class_summing_to_one() {
    let ws = Workspace::new();
    // Fisher's Iris (tests/data/README.md), all three species.
    let doc = ws.write(
        "three.md",
        &fit_and_predict("file: iris.csv\ntarget: species\n", "iris.csv"),
    );
    let summary = ws.build_ok(&doc, &[]);
    assert_class_predictions(
        &Table::read(&ws.path("predictions.csv")),
        &Table::read(&ws.path("iris.csv")),
        &["setosa", "versicolor", "virginica"],
        &summary,
    );
}
