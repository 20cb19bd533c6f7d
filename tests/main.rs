//! The integration tests: one binary, one module per area.
mod support;

mod smoke;
#[cfg(feature = "gui")]
mod gui;
