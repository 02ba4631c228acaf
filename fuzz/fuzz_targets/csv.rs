//! Fuzz target `csv`: any bytes as a CSV file, prepared with settings taken from the
//! first bytes.
//!
//! Input layout: 5 control bytes, then the CSV file.
//! - byte 0: which header column is the target (modulo the column count); bit 7 of
//!   byte 1 asks for that name upper-cased instead, to reach the unknown-column path.
//! - byte 1: bits 0–1 task (none, classify, regress), bit 2 missing (error, drop),
//!   bit 3 split (holdout, folds), bits 4–5 scale (standard, minmax, none), bit 6
//!   list the inputs (from byte 4) instead of taking every other column.
//! - byte 2: holdout fraction byte/250 (so 250 and up are out of range), or folds
//!   byte % 12 (so 0 and 1 are refused).
//! - byte 3: the split seed.
//! - byte 4: bit i lists column i as an input (first 8 columns).
//!
//! Errors are expected; panics are not. On success every partition is split and the
//! table's own rows are encoded again with the learned encoding.

#![no_main]

use libfuzzer_sys::fuzz_target;
use stet::data::{DEFAULT_MAX_CATEGORIES, DataSettings, Missing, Scale, Split, Task, prepare, read_table};

fuzz_target!(|bytes: &[u8]| {
    let Some((control, csv)) = bytes.split_first_chunk::<5>() else {
        return;
    };
    let table = match read_table(csv) {
        Ok(table) => table,
        Err(error) => {
            let _ = error.to_string();
            return;
        }
    };
    let Some(settings) = settings(control, &table.headers) else {
        return;
    };
    let prepared = match prepare(&table, &settings, DEFAULT_MAX_CATEGORIES) {
        Ok(prepared) => prepared,
        Err(error) => {
            let _ = error.to_string();
            return;
        }
    };
    assert_eq!(prepared.x.nrows(), prepared.y.nrows());
    assert_eq!(prepared.rows_read, table.row_count());
    assert_eq!(prepared.lines.len(), prepared.x.nrows());
    for (i, partition) in prepared.partitions.iter().enumerate() {
        let data = prepared.split(i);
        assert_eq!(data.x_train.nrows(), partition.train_rows.len());
        assert_eq!(data.x_test.nrows(), partition.test_rows.len());
        let _ = prepared.class_counts(&partition.train_rows);
        let _ = prepared.class_counts(&partition.test_rows);
    }
    let _ = prepared.encoding.output_names();
    if let Ok(x) = prepared.encoding.encode_inputs(&table) {
        assert_eq!(x.ncols(), prepared.x.ncols());
    }
});

/// The settings the control bytes ask for; `None` for a table with no columns.
fn settings(control: &[u8; 5], headers: &[String]) -> Option<DataSettings> {
    let [target, flags, split, seed, inputs] = *control;
    let target = headers.get(usize::from(target) % headers.len().max(1))?;
    let target = if flags & 0x80 != 0 {
        target.to_uppercase()
    } else {
        target.clone()
    };
    let task = match flags & 0b11 {
        1 => Some(Task::Classify),
        2 => Some(Task::Regress),
        _ => None,
    };
    let missing = if flags & 0b100 != 0 {
        Missing::Drop
    } else {
        Missing::Error
    };
    let split = if flags & 0b1000 != 0 {
        Split::Folds(usize::from(split % 12))
    } else {
        Split::Holdout(f64::from(split) / 250.0)
    };
    let scale = match (flags >> 4) & 0b11 {
        1 => Scale::Minmax,
        2 => Scale::None,
        _ => Scale::Standard,
    };
    let inputs = (flags & 0x40 != 0).then(|| {
        headers
            .iter()
            .take(8)
            .enumerate()
            .filter(|(i, _)| inputs & (1 << i) != 0)
            .map(|(_, name)| name.clone())
            .collect()
    });
    Some(DataSettings {
        inputs,
        target: vec![target],
        task,
        scale,
        missing,
        split,
        validation: None,
        seed: u64::from(seed),
        scale_target: None,
    })
}
