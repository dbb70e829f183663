//! The one integration-test binary. Each module covers one feature and runs the real
//! `cohortpress` binary on fixture programs (see `harness.rs`).

mod harness;
mod check;
mod external;
