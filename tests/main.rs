//! The integration tests: one binary, one module per area.
mod support;

mod fit;
#[cfg(feature = "gui")]
mod gui;
#[cfg(feature = "gui")]
mod gui_tools;
mod io;
mod lines;
mod records;
mod review;
mod smoke;
mod templates;
mod tools;
