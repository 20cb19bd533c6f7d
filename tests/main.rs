//! The integration tests: one binary, one module per area.
mod support;

mod fit;
mod io;
mod records;
mod review;
mod smoke;
#[cfg(feature = "gui")]
mod gui;
