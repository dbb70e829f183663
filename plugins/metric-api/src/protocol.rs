//! The external-module protocol, version [`crate::PROTOCOL_VERSION`].
//!
//! An external module is a program named in `program.yaml` (a path and arguments; no shell). The
//! runner starts it once per participant (and once with `describe` to learn its spec), writes
//! JSON messages to its standard input, one per line, closes standard input, and reads JSON
//! messages from its standard output, one per line. Standard error is logged.
//!
//! 1. Host → module: [`HostMessage::Hello`] with the host's protocol version.
//! 2. Module → host: [`ModuleMessage::Hello`] with the module's protocol version and its
//!    [`crate::ModuleSpec`]. A different major version is an error; a different minor only warns.
//! 3. Host → module: [`HostMessage::Compute`] with a context and one participant's data
//!    (omitted when the host only wants the spec).
//! 4. Module → host: [`ModuleMessage::Result`] with a [`crate::ModuleOutput`], or
//!    [`ModuleMessage::Error`] with a message. Then the module exits with status 0.
//!
//! Each message is an object with a `type` field. CAUTION: within a major version only new
//! optional fields may be added; the golden test `tests/testsuite/external.rs` pins the format.

use crate::{ModuleContext, ModuleOutput, ModuleSpec, ParticipantData};
use serde::{Deserialize, Serialize};

/// A message from the host (cohortpress) to an external module.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum HostMessage {
    /// First message: who is calling, with which protocol version.
    Hello {
        /// Protocol version `major.minor`.
        protocol: String,
        /// Host name and version, e.g. `cohortpress 0.1.0`.
        host: String,
    },
    /// Compute for one participant.
    Compute {
        /// Context (program, period, settings, earlier outputs).
        context: Box<ModuleContext>,
        /// The participant's checked data.
        participant: Box<ParticipantData>,
    },
}

/// A message from an external module to the host.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum ModuleMessage {
    /// Answer to [`HostMessage::Hello`].
    Hello {
        /// Protocol version the module speaks.
        protocol: String,
        /// What the module is.
        spec: ModuleSpec,
    },
    /// Answer to [`HostMessage::Compute`].
    Result {
        /// The outputs.
        output: ModuleOutput,
    },
    /// The module could not compute for this participant.
    Error {
        /// Why.
        message: String,
    },
}

/// Splits `major.minor` into numbers; `None` when malformed.
pub fn parse_version(v: &str) -> Option<(u32, u32)> {
    let (a, b) = v.split_once('.')?;
    Some((a.parse().ok()?, b.parse().ok()?))
}
