//! Data preparation on a real table: Fisher's Iris data (see tests/data/README.md
//! for source and licence), 150 rows, 50 per species.

use stet::data::{
    DEFAULT_MAX_CATEGORIES, DataSettings, Missing, Prepared, Scale, Split, Table, Task, prepare,
    read_table,
};

fn iris() -> Table {
    read_table(include_bytes!("data/iris.csv").as_slice()).expect("iris.csv reads")
}

fn settings(split: Split, seed: u64) -> DataSettings {
    DataSettings {
        inputs: None,
        target: vec!["species".into()],
        task: None,
        scale: Scale::Standard,
        missing: Missing::Error,
        split,
        validation: None,
        seed,
        scale_target: None,
    }
}

fn prepared(split: Split, seed: u64) -> Prepared {
    prepare(&iris(), &settings(split, seed), DEFAULT_MAX_CATEGORIES).expect("iris prepares")
}

#[test]
fn iris_is_read_as_three_sorted_classes_and_four_numeric_features() {
    let p = prepared(Split::Holdout(0.2), 1);
    assert_eq!((p.rows_read, p.rows_dropped), (150, 0));
    assert_eq!(p.encoding.task, Task::Classify);
    assert_eq!(
        p.encoding.classes.as_deref(),
        Some(
            &[
                "setosa".to_string(),
                "versicolor".into(),
                "virginica".into()
            ][..]
        )
    );
    assert_eq!(
        p.encoding.feature_names,
        [
            "sepal_length_cm",
            "sepal_width_cm",
            "petal_length_cm",
            "petal_width_cm"
        ]
    );
    assert_eq!(p.x.dim(), (150, 4));
    assert_eq!(p.y.dim(), (150, 3));
    let all: Vec<usize> = (0..150).collect();
    assert_eq!(p.class_counts(&all), vec![50, 50, 50]);
    // The file lists the species in blocks of 50; line 2 is the first data row.
    assert_eq!(p.lines[0], 2);
    assert_eq!(p.labels.as_ref().unwrap()[50], 1);
}

#[test]
fn holdout_of_a_fifth_takes_ten_test_rows_per_species() {
    let p = prepared(Split::Holdout(0.2), 7);
    assert_eq!(p.partitions.len(), 1);
    let part = &p.partitions[0];
    assert_eq!(p.class_counts(&part.test_rows), vec![10, 10, 10]);
    assert_eq!(p.class_counts(&part.train_rows), vec![40, 40, 40]);
    assert!(part.train_rows.is_sorted() && part.test_rows.is_sorted());
    assert!(part.test_rows.iter().all(|r| !part.train_rows.contains(r)));
}

#[test]
fn five_folds_hold_each_row_out_once_with_ten_per_species() {
    let p = prepared(Split::Folds(5), 3);
    assert_eq!(p.partitions.len(), 5);
    let mut times_held_out = vec![0; 150];
    for part in &p.partitions {
        assert_eq!(p.class_counts(&part.test_rows), vec![10, 10, 10]);
        assert_eq!(part.train_rows.len(), 120);
        assert!(part.train_rows.is_sorted() && part.test_rows.is_sorted());
        for &r in &part.test_rows {
            times_held_out[r] += 1;
        }
    }
    assert!(times_held_out.iter().all(|&n| n == 1), "{times_held_out:?}");
}

#[test]
fn same_seed_gives_the_same_split_and_another_seed_another() {
    for split in [Split::Holdout(0.2), Split::Folds(5)] {
        let a = prepared(split, 11);
        let b = prepared(split, 11);
        let c = prepared(split, 12);
        assert_eq!(a.partitions, b.partitions, "{split:?}");
        assert_ne!(
            a.partitions[0].test_rows, c.partitions[0].test_rows,
            "{split:?}"
        );
    }
}

#[test]
fn standard_scaler_on_all_rows_matches_python_statistics() {
    // Reference values computed with Python 3.11's statistics.mean and
    // statistics.pstdev (population sd, like np.std(ddof=0)) on tests/data/iris.csv.
    let expected_mean = [
        5.843333333333334,
        3.0573333333333332,
        3.758,
        1.1993333333333334,
    ];
    let expected_sd = [
        0.8253012917851409,
        0.43441096773549454,
        1.759404065775303,
        0.7596926279021594,
    ];
    let p = prepared(Split::Holdout(0.0), 1);
    let scaler = &p.partitions[0].scaler;
    for j in 0..4 {
        assert!(
            (scaler.offset[j] - expected_mean[j]).abs() < 1e-12,
            "mean {j}"
        );
        assert!((scaler.divisor[j] - expected_sd[j]).abs() < 1e-12, "sd {j}");
    }
    assert!(p.partitions[0].test_rows.is_empty());
}

#[test]
fn minmax_scaler_uses_training_rows_and_maps_them_to_the_unit_interval() {
    let s = DataSettings {
        scale: Scale::Minmax,
        ..settings(Split::Folds(5), 5)
    };
    let p = prepare(&iris(), &s, DEFAULT_MAX_CATEGORIES).unwrap();
    for (i, part) in p.partitions.iter().enumerate() {
        let data = p.split(i);
        for j in 0..4 {
            let col = data.x_train.column(j);
            let min = col.iter().copied().fold(f64::INFINITY, f64::min);
            let max = col.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            assert!(
                min.abs() < 1e-12 && (max - 1.0).abs() < 1e-12,
                "fold {i} feature {j}"
            );
        }
        assert_eq!(data.x_test.nrows(), part.test_rows.len());
        assert_eq!(data.y_test.ncols(), 3);
    }
}

#[test]
fn new_rows_without_the_species_encode_like_the_training_rows() {
    let p = prepared(Split::Holdout(0.2), 1);
    let new = read_table(
        b"petal_width_cm,petal_length_cm,sepal_width_cm,sepal_length_cm\n0.2,1.4,3.5,5.1\n"
            .as_slice(),
    )
    .unwrap();
    let x = p.encoding.encode_inputs(&new).unwrap();
    // Same values as the first Iris row, given in another column order.
    assert_eq!(x.row(0), p.x.row(0));
}

#[test]
fn six_folds_on_iris_balance_fold_sizes() {
    // 50 rows per class do not divide by 6: the deal carries on across
    // classes, so folds hold 25 rows each and no species differs by more than one.
    let p = prepared(Split::Folds(6), 2);
    for part in &p.partitions {
        assert_eq!(part.test_rows.len(), 25);
        let counts = p.class_counts(&part.test_rows);
        assert!(counts.iter().all(|&c| c == 8 || c == 9), "{counts:?}");
    }
}

#[test]
fn fifty_one_folds_exceed_the_smallest_species() {
    let err = prepare(
        &iris(),
        &settings(Split::Folds(51), 1),
        DEFAULT_MAX_CATEGORIES,
    )
    .unwrap_err();
    assert_eq!(
        err.to_string(),
        "51 folds asked for, but class `setosa` has only 50 rows: each fold must hold out \
         at least one row of every class, so use at most 50 folds"
    );
}
