//! The integration tests: one binary, one module per area.
mod support;

mod audit;
mod chi2_by_hand;
mod emission;
mod fit;
mod frames;
mod fuzz;
#[cfg(feature = "gui")]
mod gui;
#[cfg(feature = "gui")]
mod gui_audit;
#[cfg(feature = "gui")]
mod gui_cache;
#[cfg(feature = "gui")]
mod gui_review;
#[cfg(feature = "gui")]
mod gui_seams;
#[cfg(feature = "gui")]
mod gui_store;
#[cfg(feature = "gui")]
mod gui_tools;
mod io;
mod lines;
mod noise;
mod pipeline;
mod real_galaxy;
mod real_quasar;
mod records;
mod review;
mod robust;
mod robust_gaps;
mod scale;
mod smoke;
mod stars;
mod templates;
mod tools;
mod train;
mod window_store;
