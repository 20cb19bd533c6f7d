/*!
zvet: vet automatic redshifts.

A library with two thin front ends (the `zvet` command line in [`cli`] and the
desktop GUI in `ui`). The numerical core — [`spectrum`], [`io`], [`catalog`],
[`lines`], [`templates`], [`fit`] — and the records — [`review`], [`campaign`],
[`export`], [`report`] — never import the GUI crates; building with
`--no-default-features` proves it.
*/
#![warn(missing_docs)]

pub mod audit;
pub mod campaign;
pub mod catalog;
pub mod class;
pub mod cli;
pub mod constants;
pub mod demo;
pub mod export;
pub mod fit;
pub mod io;
pub mod lines;
pub mod photometry;
pub mod pipeline;
pub mod queue;
pub mod report;
pub mod review;
pub mod spectrum;
pub mod store;
pub mod templates;
#[cfg(feature = "gui")]
pub mod ui;

pub use class::ObjectClass;
pub use spectrum::Spectrum;
