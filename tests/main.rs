//! The integration tests: one binary, one module per area.
mod support;

mod fit;
#[cfg(feature = "gui")]
mod gui;
mod io;
mod lines;
mod records;
mod review;
mod smoke;
mod templates;
mod train;
