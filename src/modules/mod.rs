//! The module runner: which metric modules a program uses, and running them for one participant.
//!
//! A program lists its modules under `modules:` in `program.yaml`, in the order they run. Each
//! entry is either a built-in module (the `cohortpress-metric-*` crates, see
//! [`builtin_modules`]) or an external program that speaks the JSON protocol of
//! [`cohortpress_metric_api::protocol`] (see [`external`] and `plugins/PROTOCOL.md`). Both kinds
//! implement [`cohortpress_metric_api::MetricModule`], so the runner treats them alike.
//!
//! - [`registry`] checks the `modules:` list once per run and builds a [`ModuleSet`]: ids known,
//!   settings resolved against each module's spec, `requires` satisfied by earlier entries,
//!   external modules found and their handshake checked.
//! - [`run`] runs a [`ModuleSet`] for one participant. A module that fails (an error, a panic,
//!   a broken or slow external program) fails for that participant only; the other modules and
//!   participants go on.
//! - [`describe`] writes the plain-text listing of `cohortpress modules`.

pub mod describe;
pub mod external;
pub mod registry;
pub mod run;
pub mod views;

#[cfg(test)]
mod tests;

pub use describe::describe_modules;
pub use external::ExternalModule;
pub use registry::{ModuleSet, build_module_set, builtin_modules};
pub use run::{ModuleFailure, ModuleResults};
pub use views::BuiltinViews;
