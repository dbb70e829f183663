//! cohortpress: monthly reports for group weight-management programs.
//!
//! The pipeline, one phase per module; only [`run`] touches the output folder:
//!
//! 1. [`program`] parses and checks `program.yaml` → [`program::Program`].
//! 2. [`participant`] discovers participant folders and loads and checks each one's
//!    `profile.yaml` and CSV files → `ParticipantData` plus [`diag::Diagnostic`]s.
//! 3. [`modules`] runs the metric modules (built-in crates under `plugins/`, or external
//!    programs over the JSON protocol) for each participant.
//! 4. [`group`] aggregates participant summaries into de-identified group statistics with
//!    small-cell suppression.
//! 5. [`report`] builds the report model and renders it to HTML (handlebars templates) and PDF
//!    (through [`render`]), returning bytes.
//! 6. [`run`] orchestrates a run; [`output`] writes every output atomically, [`tidy`] the
//!    metrics for analysis.

#![forbid(unsafe_code)]

pub mod activities;
pub mod check;
pub mod cmd;
pub mod csv_out;
pub mod demo;
pub mod diag;
pub mod exit_code;
pub mod group;
pub mod import;
pub mod limits;
pub mod modules;
pub mod output;
pub mod participant;
pub mod program;
pub mod progress;
pub mod render;
pub mod report;
pub mod run;
pub mod tidy;
pub mod yaml;
