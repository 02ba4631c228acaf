//! The data card: what a data step's file holds, column by column, and the problems
//! worth knowing before anything trains on it.
//!
//! Statistics describe the file: every row read, including rows later dropped for a
//! missing value ([`profile`]). Warnings that concern what the model sees (duplicate
//! rows, leakage, outliers against the training mean) read the prepared rows
//! ([`warnings`]). The card is computed once, with the data step, and cached with it.

mod profile;
mod warnings;

use serde::{Deserialize, Serialize};

pub(crate) use profile::{ColumnProfile, NumericStats, Role, Values};
#[cfg(test)]
pub(crate) use warnings::SameRows;
pub(crate) use warnings::{DataWarning, FAR_FROM_MEAN_SDS, RARE_CLASS_SHARE};

use super::encode::ColumnKind;
use super::prepare::Prepared;
use super::settings::Task;
use super::table::Table;

/// Per used column its statistics, and the warnings.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub(crate) struct DataCard {
    /// Inputs in feature order, then targets.
    pub columns: Vec<ColumnProfile>,
    pub warnings: Vec<DataWarning>,
}

/// The card of `table` as `prepared` (made from it) uses it.
pub(crate) fn describe(table: &Table, prepared: &Prepared) -> DataCard {
    let encoding = &prepared.encoding;
    let coded = |name: &str| {
        let col = table
            .column(name)
            .expect("the prepared columns were found in this table");
        table.coded(col)
    };
    let inputs = encoding.columns.iter().map(|column| match column.kind {
        ColumnKind::Numeric => profile::numeric(coded(&column.name), &column.name, Role::Input),
        ColumnKind::Categorical { .. } => {
            profile::text(coded(&column.name), &column.name, Role::Input)
        }
    });
    let targets = encoding
        .target_names
        .iter()
        .map(|name| match encoding.task {
            Task::Regress => profile::numeric(coded(name), name, Role::Target),
            Task::Classify => profile::text(coded(name), name, Role::Target),
        });
    let columns: Vec<ColumnProfile> = inputs.chain(targets).collect();
    let warnings = warnings::find(&columns, prepared);
    DataCard { columns, warnings }
}
