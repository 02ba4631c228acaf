//! Turning the column names of the settings into column positions.
//!
//! Names are where people make typing mistakes, so an unknown name is answered
//! with the list of real columns and the nearest one.

use super::error::DataError;
use super::settings::DataSettings;
use super::table::Table;

/// Positions, in the table, of the columns an experiment uses.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(super) struct UsedColumns {
    /// Input columns in the order the settings list them (table order when not listed).
    pub(crate) inputs: Vec<usize>,
    /// Target columns in the order the settings list them.
    pub(crate) targets: Vec<usize>,
}

impl UsedColumns {
    /// Inputs then targets: every column whose cells matter.
    pub(super) fn all(&self) -> impl Iterator<Item = usize> + '_ {
        self.inputs.iter().chain(&self.targets).copied()
    }
}

/// Check the settings' column names against the table.
pub(super) fn resolve(table: &Table, settings: &DataSettings) -> Result<UsedColumns, DataError> {
    if settings.target.is_empty() {
        return Err(DataError::NoTarget);
    }
    let targets = find_all(table, &settings.target, "target")?;
    let inputs = match &settings.inputs {
        Some(names) => {
            if let Some(name) = names.iter().find(|n| settings.target.contains(n)) {
                return Err(DataError::TargetInInputs { name: name.clone() });
            }
            find_all(table, names, "input")?
        }
        None => (0..table.headers.len())
            .filter(|c| !targets.contains(c))
            .collect(),
    };
    if inputs.is_empty() {
        return Err(DataError::NoInputs);
    }
    Ok(UsedColumns { inputs, targets })
}

/// Positions of `names`, which must all exist and not repeat.
pub(super) fn find_all(
    table: &Table,
    names: &[String],
    role: &'static str,
) -> Result<Vec<usize>, DataError> {
    let mut found = Vec::with_capacity(names.len());
    for (i, name) in names.iter().enumerate() {
        if names[..i].contains(name) {
            return Err(DataError::RepeatedColumn {
                role,
                name: name.clone(),
            });
        }
        found.push(find(table, name, role)?);
    }
    Ok(found)
}

/// Position of the column `name`, or an error listing the columns and the nearest name.
pub(super) fn find(table: &Table, name: &str, role: &'static str) -> Result<usize, DataError> {
    table.column(name).ok_or_else(|| DataError::UnknownColumn {
        role,
        name: name.to_string(),
        suggestion: nearest(name, &table.headers),
        available: table.headers.clone(),
    })
}

/// The candidate most like `name`, ignoring case, if it is reasonably close.
fn nearest(name: &str, candidates: &[String]) -> Option<String> {
    // Half the characters matching is loose enough for "temp" → "temp_c" and
    // "humidity" → "humidity_pct", strict enough not to offer "a" for "site".
    const MIN_SIMILARITY: f64 = 0.5;
    let wanted = name.to_lowercase();
    candidates
        .iter()
        .map(|c| {
            let score = strsim::normalized_damerau_levenshtein(&wanted, &c.to_lowercase());
            (score, c)
        })
        .filter(|(score, _)| *score >= MIN_SIMILARITY)
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, c)| c.clone())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::settings::{Missing, Scale, Split};
    use crate::data::table::read_table;

    fn table() -> Table {
        read_table(b"hive,site,temp_c,humidity_pct,status\n".as_slice()).unwrap()
    }

    fn settings(inputs: Option<&[&str]>, target: &[&str]) -> DataSettings {
        DataSettings {
            inputs: inputs.map(|i| i.iter().map(|s| s.to_string()).collect()),
            target: target.iter().map(|s| s.to_string()).collect(),
            task: None,
            scale: Scale::Standard,
            missing: Missing::Error,
            split: Split::Holdout(0.2),
            validation: None,
            seed: 1,
            scale_target: None,
        }
    }

    #[test]
    fn inputs_default_to_every_column_but_the_targets() {
        let used = resolve(&table(), &settings(None, &["status"])).unwrap();
        assert_eq!(used.inputs, vec![0, 1, 2, 3]);
        assert_eq!(used.targets, vec![4]);
    }

    #[test]
    fn listed_inputs_keep_their_order() {
        let used = resolve(&table(), &settings(Some(&["temp_c", "site"]), &["status"])).unwrap();
        assert_eq!(used.inputs, vec![2, 1]);
        assert_eq!(used.all().collect::<Vec<_>>(), vec![2, 1, 4]);
    }

    #[test]
    fn unknown_column_lists_columns_and_suggests_the_nearest() {
        let err = resolve(&table(), &settings(Some(&["temp", "site"]), &["status"])).unwrap_err();
        let DataError::UnknownColumn {
            role,
            name,
            suggestion,
            available,
        } = &err
        else {
            panic!("{err:?}")
        };
        assert_eq!((*role, name.as_str()), ("input", "temp"));
        assert_eq!(suggestion.as_deref(), Some("temp_c"));
        assert_eq!(available.len(), 5);
        assert_eq!(
            err.to_string(),
            "input column `temp` is not in the table (did you mean `temp_c`?); \
             the columns are: hive, site, temp_c, humidity_pct, status"
        );
    }

    #[test]
    fn suggestion_ignores_case_and_is_withheld_when_nothing_is_close() {
        let err = resolve(&table(), &settings(None, &["Status"])).unwrap_err();
        assert!(
            matches!(err, DataError::UnknownColumn { suggestion: Some(s), .. } if s == "status")
        );
        let err = resolve(&table(), &settings(None, &["xyz"])).unwrap_err();
        assert!(matches!(
            err,
            DataError::UnknownColumn {
                suggestion: None,
                ..
            }
        ));
        assert!(!err.to_string().contains("did you mean"));
    }

    #[test]
    fn target_among_inputs_is_an_error() {
        let err = resolve(&table(), &settings(Some(&["site", "status"]), &["status"])).unwrap_err();
        assert_eq!(
            err,
            DataError::TargetInInputs {
                name: "status".into()
            }
        );
    }

    #[test]
    fn no_inputs_no_target_and_repeats_are_errors() {
        assert_eq!(
            resolve(&table(), &settings(Some(&[]), &["status"])).unwrap_err(),
            DataError::NoInputs
        );
        assert_eq!(
            resolve(&table(), &settings(None, &[])).unwrap_err(),
            DataError::NoTarget
        );
        let t = table();
        let all: Vec<&str> = t.headers.iter().map(String::as_str).collect();
        let all_targets = settings(None, &all);
        assert_eq!(
            resolve(&table(), &all_targets).unwrap_err(),
            DataError::NoInputs
        );
        assert_eq!(
            resolve(&table(), &settings(Some(&["site", "site"]), &["status"])).unwrap_err(),
            DataError::RepeatedColumn {
                role: "input",
                name: "site".into()
            }
        );
    }
}
