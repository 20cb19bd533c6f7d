//! The reference fetch works and the binary's help lists its subcommands.
use crate::support;

#[test]
fn reference_wheels_can_be_fetched() {
    let p = support::passive_galaxy();
    assert!(std::fs::metadata(&p).unwrap().len() > 100_000);
}
