//! Data preparation: from a CSV file to scaled training and test
//! matrices, as the data settings of an experiment document describe.
//!
//! The steps, each in its own module: [`read_table`] reads text cells;
//! [`prepare`] resolves column names, handles missing values, encodes
//! columns as numbers ([`Encoding`](encode::Encoding)), splits rows into partitions
//! and fits a [`Scaler`](scale::Scaler) on each partition's training rows.
//! [`Prepared::split`] then hands out the matrices of one partition, and
//! [`Encoding::encode_inputs`](encode::Encoding::encode_inputs) encodes new rows for
//! prediction.

pub(crate) mod card;
mod coded_column;
mod columns;
mod encode;
mod error;
mod prepare;
mod scale;
mod settings;
mod split;
mod table;

pub use encode::{ColumnKind, DEFAULT_MAX_CATEGORIES};
pub(crate) use encode::{InputColumn, KnownTargets, feature_ranges};
pub(crate) use error::DataError;
pub use prepare::{Prepared, prepare};
pub(crate) use scale::Scaler;
pub use settings::{DataSettings, Missing, Scale, Split, Task};
pub(crate) use table::read_header;
pub use table::{Table, read_table};
