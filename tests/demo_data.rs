//! The invented demo data in demo-data/ prepare as the demo experiments expect.

use stet::data::{
    ColumnKind, DEFAULT_MAX_CATEGORIES, DataSettings, Missing, Scale, Split, Task, prepare,
    read_table,
};

fn read(name: &str) -> stet::data::Table {
    let path = format!("{}/demo-data/{name}", env!("CARGO_MANIFEST_DIR"));
    read_table(std::fs::File::open(&path).expect("demo file exists")).expect("demo file reads")
}

fn names(list: &[&str]) -> Vec<String> {
    list.iter().map(|s| s.to_string()).collect()
}

#[test]
fn hives_prepare_as_three_class_classification_with_one_hot_sites() {
    let settings = DataSettings {
        inputs: Some(names(&[
            "site",
            "temp_c",
            "humidity_pct",
            "weight_kg",
            "sound_hz",
            "daily_weight_change_kg",
        ])),
        target: names(&["status"]),
        task: None,
        scale: Scale::Standard,
        missing: Missing::Error,
        split: Split::Holdout(0.25),
        validation: None,
        seed: 1,
        scale_target: None,
    };
    let p = prepare(&read("hives.csv"), &settings, DEFAULT_MAX_CATEGORIES).unwrap();
    assert_eq!(p.encoding.task, Task::Classify);
    assert_eq!(
        p.encoding.classes,
        Some(names(&["healthy", "queenless", "swarming"]))
    );
    assert_eq!(
        p.encoding.columns[0].kind,
        ColumnKind::Categorical {
            categories: names(&["meadow", "orchard", "ridge"])
        }
    );
    assert_eq!(p.x.dim(), (400, 8));
    let all: Vec<usize> = (0..400).collect();
    // Counts stated in demo-data/README.md.
    assert_eq!(p.class_counts(&all), vec![240, 92, 68]);
    // Stratified: round(0.25 · count) per class.
    assert_eq!(p.class_counts(&p.partitions[0].test_rows), vec![60, 23, 17]);

    let new = p.encoding.encode_inputs(&read("hives-new.csv")).unwrap();
    assert_eq!(new.dim(), (10, 8));
}

#[test]
fn greenhouse_prepares_as_regression_with_one_hot_crops() {
    let settings = DataSettings {
        inputs: Some(names(&[
            "crop",
            "air_temp_c",
            "light_klux",
            "humidity_pct",
            "plant_age_days",
        ])),
        target: names(&["water_l"]),
        task: None,
        scale: Scale::Minmax,
        missing: Missing::Error,
        split: Split::Folds(5),
        validation: None,
        seed: 1,
        scale_target: None,
    };
    let p = prepare(&read("greenhouse.csv"), &settings, DEFAULT_MAX_CATEGORIES).unwrap();
    assert_eq!(p.encoding.task, Task::Regress);
    assert_eq!(
        p.encoding.feature_names,
        names(&[
            "crop=cucumber",
            "crop=lettuce",
            "crop=tomato",
            "air_temp_c",
            "light_klux",
            "humidity_pct",
            "plant_age_days"
        ])
    );
    assert_eq!(p.y.dim(), (300, 1));
    let sizes: Vec<usize> = p.partitions.iter().map(|q| q.test_rows.len()).collect();
    assert_eq!(sizes, vec![60; 5]);
    let water = p.y.column(0);
    assert!(water.iter().all(|&w| (1.0..=25.0).contains(&w)));

    let new = p
        .encoding
        .encode_inputs(&read("greenhouse-new.csv"))
        .unwrap();
    assert_eq!(new.dim(), (10, 7));
}
