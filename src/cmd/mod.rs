//! Commands: the command line and what each command prints.

pub mod cli;
