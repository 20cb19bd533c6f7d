//! The integration tests: one binary, one module per area.
mod support;

mod emission;
mod fit;
mod frames;
mod fuzz;
#[cfg(feature = "gui")]
mod gui;
#[cfg(feature = "gui")]
mod gui_review;
mod gui_tools;
mod io;
mod lines;
mod pipeline;
mod records;
mod review;
mod robust;
mod scale;
mod smoke;
mod stars;
mod templates;
mod tools;
mod train;
