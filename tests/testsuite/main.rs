//! The one integration-test binary. Each module covers one feature and runs the real
//! `cohortpress` binary on fixture programs (see `harness.rs`).

mod accessibility;
mod careless;
mod check;
mod datapackage;
mod docs;
mod export_shapes;
mod exports;
mod external;
mod fhir;
mod guidance;
mod harness;
mod hostile;
mod layering;
mod ledger;
mod numbers;
mod operation;
mod reports;
mod sample_program;
mod unattended;
