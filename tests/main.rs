//! The integration tests: one binary, one module per area.
mod support;

mod lines;
mod smoke;
mod templates;
