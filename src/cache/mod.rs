//! What a build keeps between runs: the content-addressed store of results
//! (`store`), written through atomic renames (`atomic`), each document's build
//! manifest (`manifest`), and what `stet status` and `stet clean` read from them
//! (`freshness`, `pruning`).

pub(crate) mod atomic;
pub(crate) mod freshness;
pub(crate) mod manifest;
pub(crate) mod pruning;
mod store;

pub(crate) use store::{Cache, EntryKind, entry_name, is_entry_name, is_leftover_name};
