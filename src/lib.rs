//! stet: run a Markdown experiment document and render its report.
pub mod data;
