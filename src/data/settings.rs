//! The data settings an experiment document gives: which columns to use, what
//! to predict, how to scale, what to do with missing values and how to split.
//!
//! They live apart from the code that acts on them so the document parser can
//! deserialize them without pulling in the rest of the pipeline.

use serde::{Deserialize, Serialize};

/// What kind of prediction the network makes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Task {
    /// Predict one class label from a fixed set.
    Classify,
    /// Predict one or more numbers.
    Regress,
}

/// How numeric input features are rescaled before training.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Scale {
    /// Subtract the mean and divide by the population standard deviation.
    Standard,
    /// Map the training minimum to 0 and the training maximum to 1.
    Minmax,
    /// Leave the values as they are.
    None,
}

/// What to do with a row that has a missing value in a used column.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Missing {
    /// Stop with an error naming the first such row.
    Error,
    /// Leave such rows out, counting them.
    Drop,
}

/// How rows are divided into training and test rows.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Split {
    /// Hold out this fraction of the rows, in [0, 1), as the test set.
    Holdout(f64),
    /// K-fold cross-validation with this many folds (at least 2).
    Folds(usize),
}

/// All data settings of one experiment.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DataSettings {
    /// Input columns by name; `None` means every column except the targets.
    pub inputs: Option<Vec<String>>,
    /// Target columns by name (exactly one for classification).
    pub target: Vec<String>,
    /// `None`: classify when a target column holds text, else regress.
    pub task: Option<Task>,
    /// Scaling of numeric inputs, fitted on training rows only.
    pub scale: Scale,
    /// Handling of missing values in used columns.
    pub missing: Missing,
    /// Train/test division.
    pub split: Split,
    /// Fraction of each partition's training rows set aside, stratified like the
    /// holdout, for patience and sweep ranking. Left out of the serialisation when
    /// unset, so documents without it keep their keys.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub validation: Option<f64>,
    /// Seed of the random shuffles that make the split.
    pub seed: u64,
    /// Scaling of regression targets, fitted on training rows only; `None` means the
    /// task's default ([`DataSettings::target_scale`]). Left out of the serialisation
    /// when unset, like `validation`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub scale_target: Option<Scale>,
}

impl DataSettings {
    /// How targets are scaled for `task`: as written, else standard when regressing.
    /// Class indicators are never scaled (the plan refuses `scale_target` there).
    pub(crate) fn target_scale(&self, task: Task) -> Scale {
        match task {
            Task::Classify => Scale::None,
            Task::Regress => self.scale_target.unwrap_or(Scale::Standard),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn settings_deserialize_from_snake_case() {
        let json = r#"{"inputs": null, "target": ["c"], "task": "classify", "scale": "minmax",
            "missing": "drop", "split": {"folds": 5}, "seed": 3}"#;
        let s: DataSettings = serde_json::from_str(json).unwrap();
        assert_eq!(s.split, Split::Folds(5));
        assert_eq!(
            (s.task, s.scale, s.missing),
            (Some(Task::Classify), Scale::Minmax, Missing::Drop)
        );
    }
}
