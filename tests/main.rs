//! The integration tests: one binary, one module per area.
mod support;

mod fit;
mod io;
mod records;
mod review;
mod lines;
mod smoke;
mod templates;
#[cfg(feature = "gui")]
mod gui;
