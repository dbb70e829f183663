//! cohortpress: monthly reports for group weight-management programs.
//!
//! The pipeline runs one way, each layer using only the layers below it (the test
//! `tests/testsuite/layering.rs` keeps it so; DEVELOPERS.md has the map):
//!
//! 1. [`cmd`]: the commands, the only code that prints to the terminal or picks an exit code;
//!    clap's types stay there and become plain options.
//! 2. [`run`]: the run plan, its execution (participants in parallel, group step, outputs),
//!    shards and merge, partial results and the manifest; a run ends in one [`run::Outcome`].
//! 3. Products: [`report`] builds the report models and renders them to HTML and PDF bytes
//!    (through `render`), `tidy` the tidy metrics, [`check`] loads everything for `check`,
//!    [`import`] and [`demo`] write program folders.
//! 4. Computation: [`modules`] runs the metric modules (built-in crates under `plugins/`, or
//!    external programs over the JSON protocol); [`group`] the de-identified group statistics
//!    with small-cell suppression; `render` draws charts and lays out PDFs.
//! 5. Inputs: [`program`] parses and checks `program.yaml`; [`participant`] discovers and
//!    loads participant folders → `ParticipantData` plus [`diag::Diagnostic`]s.
//! 6. `output`: the staging folder, lock and atomic swap; it writes files and nothing else.
//! 7. Foundation: [`diag`], [`yaml`], [`limits`], `activities`, `csv_out`, `progress`,
//!    [`exit_code`] (used by the commands alone).

#![forbid(unsafe_code)]

// Modules nothing outside the crate uses are crate-private, so rustc reports their dead code;
// the others are public for the binary, the test suite and the benchmark.

pub(crate) mod activities;
pub mod check;
pub mod cmd;
pub(crate) mod csv_out;
pub mod demo;
pub mod diag;
pub(crate) mod encoding;
pub mod exit_code;
pub mod group;
pub mod import;
pub mod limits;
pub mod modules;
pub(crate) mod output;
pub mod participant;
pub mod program;
pub(crate) mod progress;
pub(crate) mod render;
pub mod report;
pub mod run;
pub(crate) mod text;
pub(crate) mod tidy;
pub mod yaml;
