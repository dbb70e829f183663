//! External metric modules: separate programs that speak the JSON protocol of
//! [`cohortpress_metric_api::protocol`] over standard input and output (`plugins/PROTOCOL.md`).
//!
//! One process per call. The host starts the program (no shell), writes a `hello` line and, for a
//! computation, a `compute` line, then closes standard input; the module answers with a `hello`
//! line and a `result` or `error` line and exits with status 0. Everything that can go wrong with
//! a foreign program — not found, not executable, a non-zero exit, output that is not protocol
//! JSON, the wrong protocol version or message type, running past its timeout, writing far too
//! much — becomes a [`CallError`] with a message an administrator can act on. It never panics
//! and never blocks the run for longer than the module's timeout.
//!
//! What the module gets is kept to what it needs: a minimal environment (`PATH`, `HOME`, `LANG`),
//! the participant's data without the display name, and only the earlier outputs of the modules
//! its spec `requires`.

use cohortpress_metric_api::protocol::{HostMessage, ModuleMessage, parse_version};
use cohortpress_metric_api::{
    MetricModule, ModuleContext, ModuleError, ModuleOutput, ModuleSpec, PROTOCOL_VERSION,
    ParticipantData,
};
use std::fmt;
use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// Seconds one call may take when `timeout_seconds` is not given.
pub const DEFAULT_TIMEOUT_SECONDS: f64 = 30.0;

/// Largest standard output accepted from one call. A participant's result is a few kilobytes;
/// anything near this size is a runaway module, and reading it all would only cost memory.
pub const MAX_OUTPUT_BYTES: usize = 16 * 1024 * 1024;

/// Environment variables passed on to a module; everything else is withheld.
pub const PASSED_ENVIRONMENT: [&str; 3] = ["PATH", "HOME", "LANG"];

/// Longest stderr line logged (longer lines are cut).
const MAX_STDERR_LINE_BYTES: usize = 2000;
/// Stderr lines logged per call; the rest are read and dropped so the module cannot block on a
/// full pipe, and one line says how many were dropped.
const MAX_STDERR_LINES_LOGGED: usize = 100;
/// How long to wait for the stderr reader after the process ended. A module that left a child
/// process behind holding the pipe open must not hold up the run.
const READER_GRACE: Duration = Duration::from_millis(500);

/// The host's name and version as sent in `hello`.
pub fn host_string() -> String {
    format!("cohortpress {}", env!("CARGO_PKG_VERSION"))
}

/// Why a call to an external module failed.
#[derive(Debug, Clone, PartialEq)]
pub enum CallError {
    /// The program could not be found (a missing file, or a bare name not on `PATH`).
    NotFound {
        /// The program as it was looked for (resolved path or bare name).
        program: String,
    },
    /// Anything else, in words.
    Failed(String),
}

impl fmt::Display for CallError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CallError::NotFound { program } => write!(f, "program `{program}` was not found"),
            CallError::Failed(m) => f.write_str(m),
        }
    }
}

/// How to start a module: resolved program, arguments, working directory and timeout.
#[derive(Debug, Clone)]
pub struct Launch {
    /// Module id (for log lines and messages).
    pub id: String,
    /// The program: a path resolved against the program folder, or a bare name looked up on
    /// `PATH`.
    pub program: PathBuf,
    /// Arguments after the program.
    pub args: Vec<String>,
    /// Working directory: the program folder.
    pub dir: PathBuf,
    /// Longest time one call may take.
    pub timeout: Duration,
}

impl Launch {
    /// Builds a launch from a `command:` list. A first element containing `/` is a path and is
    /// resolved against `root` (the program folder), so a program works from any working
    /// directory; a bare name is looked up on `PATH` as a shell would.
    pub fn new(
        id: &str,
        command: &[String],
        root: &Path,
        timeout: Duration,
    ) -> Result<Self, String> {
        let Some((first, rest)) = command.split_first() else {
            return Err("`command` is empty; expected the program and its arguments".into());
        };
        if first.trim().is_empty() {
            return Err("the first element of `command` is empty; expected a program".into());
        }
        let program = if first.contains('/') {
            root.join(first)
        } else {
            PathBuf::from(first)
        };
        Ok(Launch {
            id: id.to_string(),
            program,
            args: rest.to_vec(),
            dir: root.to_path_buf(),
            timeout,
        })
    }

    /// Starts the program, writes `input` to its standard input, and collects its standard
    /// output. Standard error is logged line by line as warnings prefixed by the module id.
    /// Succeeds only when the program exits with status 0 within the timeout.
    pub fn exchange(&self, input: Vec<u8>) -> Result<Vec<u8>, CallError> {
        let mut cmd = Command::new(&self.program);
        cmd.args(&self.args).current_dir(&self.dir).env_clear();
        for key in PASSED_ENVIRONMENT {
            if let Some(v) = std::env::var_os(key) {
                cmd.env(key, v);
            }
        }
        cmd.stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped());
        let shown = self.program.display().to_string();
        let mut child = match cmd.spawn() {
            Ok(c) => c,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                // A script whose `#!` interpreter is missing also fails with "not found"; say
                // which of the two it is, because the fixes differ.
                if self.program.components().count() > 1 && self.program.is_file() {
                    return Err(CallError::Failed(format!(
                        "cannot start `{shown}`: the interpreter named in its first line (`#!`) \
                         was not found"
                    )));
                }
                return Err(CallError::NotFound { program: shown });
            }
            Err(e) if e.kind() == std::io::ErrorKind::PermissionDenied => {
                return Err(CallError::Failed(format!(
                    "cannot start `{shown}`: permission denied; make it executable \
                     (chmod +x) or name its interpreter first in `command`"
                )));
            }
            Err(e) => return Err(CallError::Failed(format!("cannot start `{shown}`: {e}"))),
        };

        // Standard input is written from its own thread: a module that never reads must not be
        // able to block us on a full pipe. The pipe closes when the thread drops it.
        let stdin = child.stdin.take().expect("stdin is piped");
        let id = self.id.clone();
        std::thread::spawn(move || {
            let mut stdin = stdin;
            if let Err(e) = stdin.write_all(&input) {
                // The module hung up early (it may not need its input); its answer decides.
                tracing::debug!("{id}: could not write its whole input: {e}");
            }
        });

        let stdout = child.stdout.take().expect("stdout is piped");
        let (out_tx, out_rx) = mpsc::channel();
        std::thread::spawn(move || {
            let _ = out_tx.send(read_capped(stdout, MAX_OUTPUT_BYTES));
        });

        let stderr = child.stderr.take().expect("stderr is piped");
        let (err_tx, err_rx) = mpsc::channel();
        let id = self.id.clone();
        std::thread::spawn(move || {
            let _ = err_tx.send(log_stderr(&id, stderr));
        });

        let deadline = Instant::now() + self.timeout;
        // Standard output closes when the module is done writing; waiting on the reader is
        // event-driven, so quick modules cost no polling delay.
        let remaining = deadline.saturating_duration_since(Instant::now());
        let out = match out_rx.recv_timeout(remaining) {
            Ok(out) => out,
            Err(_) => {
                stop(&mut child);
                return Err(self.timed_out());
            }
        };
        let stdout = match out {
            Captured::Complete(bytes) => bytes,
            Captured::TooLarge => {
                stop(&mut child);
                return Err(CallError::Failed(format!(
                    "its output exceeded the limit of {} MiB and it was stopped",
                    MAX_OUTPUT_BYTES / (1024 * 1024)
                )));
            }
            Captured::Io(e) => {
                stop(&mut child);
                return Err(CallError::Failed(format!("reading its output failed: {e}")));
            }
        };
        let status = match wait_until(&mut child, deadline) {
            Ok(Some(s)) => s,
            Ok(None) => {
                stop(&mut child);
                return Err(self.timed_out());
            }
            Err(e) => {
                stop(&mut child);
                return Err(CallError::Failed(format!("waiting for it failed: {e}")));
            }
        };
        let last_stderr = err_rx.recv_timeout(READER_GRACE).ok().flatten();
        if !status.success() {
            let mut msg = describe_status(status);
            if let Some(line) = last_stderr {
                msg.push_str(&format!("; its last error line: `{line}`"));
            }
            return Err(CallError::Failed(msg));
        }
        Ok(stdout)
    }

    fn timed_out(&self) -> CallError {
        CallError::Failed(format!(
            "did not finish within {} s and was stopped; if it needs longer, raise \
             `timeout_seconds` for module `{}` in program.yaml",
            self.timeout.as_secs_f64(),
            self.id
        ))
    }
}

/// Kills a child that overran or misbehaved, and reaps it.
fn stop(child: &mut Child) {
    let _ = child.kill();
    let _ = child.wait();
}

/// Waits for the child to exit until `deadline`; `None` when it is still running then.
fn wait_until(child: &mut Child, deadline: Instant) -> std::io::Result<Option<ExitStatus>> {
    // Standard output is already closed here, so the exit is normally a moment away; back off
    // from 1 ms so that case is cheap and a module that lingers costs little CPU.
    let mut pause = Duration::from_millis(1);
    loop {
        if let Some(s) = child.try_wait()? {
            return Ok(Some(s));
        }
        let now = Instant::now();
        if now >= deadline {
            return Ok(None);
        }
        std::thread::sleep(pause.min(deadline - now));
        pause = (pause * 2).min(Duration::from_millis(50));
    }
}

fn describe_status(status: ExitStatus) -> String {
    if let Some(code) = status.code() {
        return format!("exited with status {code}");
    }
    #[cfg(unix)]
    {
        use std::os::unix::process::ExitStatusExt;
        if let Some(sig) = status.signal() {
            return format!("was ended by signal {sig}");
        }
    }
    "ended abnormally".into()
}

enum Captured {
    Complete(Vec<u8>),
    TooLarge,
    Io(String),
}

fn read_capped(r: impl Read, cap: usize) -> Captured {
    let mut buf = Vec::new();
    match r.take(cap as u64 + 1).read_to_end(&mut buf) {
        Ok(n) if n > cap => Captured::TooLarge,
        Ok(_) => Captured::Complete(buf),
        Err(e) => Captured::Io(e.to_string()),
    }
}

/// Logs each stderr line as a warning prefixed by the module id; returns the last non-empty line
/// (shown in the failure message when the module exits with an error).
fn log_stderr(id: &str, r: impl Read) -> Option<String> {
    let mut reader = BufReader::new(r);
    let mut last = None;
    let mut logged = 0usize;
    let mut dropped = 0usize;
    let mut line = Vec::new();
    loop {
        line.clear();
        match (&mut reader)
            .take(MAX_STDERR_LINE_BYTES as u64)
            .read_until(b'\n', &mut line)
        {
            Ok(0) | Err(_) => break,
            Ok(_) => {}
        }
        let text = String::from_utf8_lossy(&line);
        let text = text.trim_end();
        if text.is_empty() {
            continue;
        }
        if logged < MAX_STDERR_LINES_LOGGED {
            tracing::warn!("{id}: {text}");
            logged += 1;
        } else {
            dropped += 1;
        }
        last = Some(text.to_string());
    }
    if dropped > 0 {
        tracing::warn!("{id}: {dropped} further lines on standard error were not logged");
    }
    last
}

/// The `type` of a module message, as written on the wire.
fn kind(m: &ModuleMessage) -> &'static str {
    match m {
        ModuleMessage::Hello { .. } => "hello",
        ModuleMessage::Result { .. } => "result",
        ModuleMessage::Error { .. } => "error",
    }
}

/// Parses standard output into protocol messages, one JSON object per non-empty line.
fn parse_messages(stdout: &[u8]) -> Result<Vec<ModuleMessage>, String> {
    let text =
        std::str::from_utf8(stdout).map_err(|e| format!("its output is not UTF-8 text ({e})"))?;
    let mut msgs = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let line = line.trim();
        if line.is_empty() {
            continue;
        }
        match serde_json::from_str::<ModuleMessage>(line) {
            Ok(m) => msgs.push(m),
            Err(e) => {
                return Err(format!(
                    "line {} of its output is not a protocol message ({e}); found: `{}`",
                    i + 1,
                    snippet(line)
                ));
            }
        }
    }
    Ok(msgs)
}

fn snippet(s: &str) -> String {
    const MAX: usize = 80;
    if s.chars().count() <= MAX {
        s.to_string()
    } else {
        format!("{}…", s.chars().take(MAX).collect::<String>())
    }
}

/// What checking a module's protocol version found.
#[derive(Debug, Clone, PartialEq)]
pub enum VersionCheck {
    /// Same version.
    Same,
    /// Same major, different minor: usable, with this warning.
    MinorDiffers(String),
}

/// Checks a module's protocol version against ours: a different major version is refused, a
/// different minor version only warns (within a major version only optional fields are added,
/// so either side can ignore what it does not know).
pub fn check_protocol(theirs: &str) -> Result<VersionCheck, String> {
    let ours = parse_version(PROTOCOL_VERSION).expect("PROTOCOL_VERSION is major.minor");
    let Some(v) = parse_version(theirs) else {
        return Err(format!(
            "speaks protocol `{theirs}`, which is not a `major.minor` version; expected \
             {PROTOCOL_VERSION}"
        ));
    };
    if v.0 != ours.0 {
        return Err(format!(
            "speaks protocol {theirs} but this cohortpress speaks {PROTOCOL_VERSION}; a \
             different major version cannot be used: use a version of the module written for \
             protocol {}.x",
            ours.0
        ));
    }
    if v.1 != ours.1 {
        return Ok(VersionCheck::MinorDiffers(format!(
            "speaks protocol {theirs}, this cohortpress {PROTOCOL_VERSION}; fields that only \
             one side knows are ignored"
        )));
    }
    Ok(VersionCheck::Same)
}

/// Reads the leading `hello` of a reply and checks its protocol version.
fn take_hello(
    msgs: &mut std::vec::IntoIter<ModuleMessage>,
) -> Result<(ModuleSpec, VersionCheck), String> {
    match msgs.next() {
        None => Err("wrote nothing on standard output; expected a `hello` message".into()),
        Some(ModuleMessage::Hello { protocol, spec }) => Ok((spec, check_protocol(&protocol)?)),
        Some(other) => Err(format!(
            "wrong message type: expected `hello` first, found `{}`",
            kind(&other)
        )),
    }
}

fn line_of(msg: &HostMessage) -> Result<Vec<u8>, CallError> {
    let mut v = serde_json::to_vec(msg)
        .map_err(|e| CallError::Failed(format!("could not write the request: {e}")))?;
    v.push(b'\n');
    Ok(v)
}

fn hello_message() -> HostMessage {
    HostMessage::Hello {
        protocol: PROTOCOL_VERSION.to_string(),
        host: host_string(),
    }
}

/// An external module whose handshake succeeded: how to start it and the spec it announced.
#[derive(Debug, Clone)]
pub struct ExternalModule {
    launch: Launch,
    spec: ModuleSpec,
}

impl ExternalModule {
    /// Runs the handshake (`hello` only) and returns the module with the spec it announced, and
    /// the protocol check (a minor-version difference is a warning for the caller to report).
    pub fn describe(launch: Launch) -> Result<(ExternalModule, VersionCheck), CallError> {
        let stdout = launch.exchange(line_of(&hello_message())?)?;
        let mut msgs = parse_messages(&stdout)
            .map_err(CallError::Failed)?
            .into_iter();
        let (spec, version) = take_hello(&mut msgs).map_err(CallError::Failed)?;
        if let Some(extra) = msgs.next() {
            return Err(CallError::Failed(format!(
                "wrong message type: after `hello` it sent `{}`, but nothing was asked",
                kind(&extra)
            )));
        }
        Ok((ExternalModule { launch, spec }, version))
    }

    /// How the module is started.
    pub fn launch(&self) -> &Launch {
        &self.launch
    }

    /// The exact bytes sent to the module for one computation: a `hello` line and a `compute`
    /// line. The display name is removed and `earlier` keeps only the modules this one
    /// `requires`: a module receives only the data it needs.
    pub fn request(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<Vec<u8>, CallError> {
        let mut context = ctx.clone();
        context
            .earlier
            .retain(|id, _| self.spec.requires.contains(id));
        let mut participant = data.clone();
        participant.profile.name = None;
        let mut input = line_of(&hello_message())?;
        input.extend(line_of(&HostMessage::Compute {
            context: Box::new(context),
            participant: Box::new(participant),
        })?);
        Ok(input)
    }

    /// One computation: starts the module, sends the request, reads its `hello` and its
    /// `result` or `error`.
    pub fn call(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, CallError> {
        let stdout = self.launch.exchange(self.request(ctx, data)?)?;
        let mut msgs = parse_messages(&stdout)
            .map_err(CallError::Failed)?
            .into_iter();
        // A minor difference was reported once, at the handshake; here only a refusal matters.
        take_hello(&mut msgs).map_err(CallError::Failed)?;
        let answer = match msgs.next() {
            None => {
                return Err(CallError::Failed(
                    "answered `hello` but sent no `result` or `error`".into(),
                ));
            }
            Some(ModuleMessage::Result { output }) => Ok(output),
            Some(ModuleMessage::Error { message }) => {
                Err(CallError::Failed(format!("reported an error: {message}")))
            }
            Some(other @ ModuleMessage::Hello { .. }) => {
                return Err(CallError::Failed(format!(
                    "wrong message type: expected `result` or `error`, found `{}`",
                    kind(&other)
                )));
            }
        };
        if let Some(extra) = msgs.next() {
            return Err(CallError::Failed(format!(
                "wrong message type: after its answer it sent another message (`{}`); expected \
                 nothing more",
                kind(&extra)
            )));
        }
        answer
    }
}

impl MetricModule for ExternalModule {
    fn spec(&self) -> ModuleSpec {
        self.spec.clone()
    }

    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        self.call(ctx, data)
            .map_err(|e| ModuleError::new(format!("external module: {e}")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn protocol_versions() {
        assert_eq!(check_protocol("1.0"), Ok(VersionCheck::Same));
        assert!(matches!(
            check_protocol("1.9"),
            Ok(VersionCheck::MinorDiffers(_))
        ));
        let e = check_protocol("2.0").unwrap_err();
        assert!(e.contains("different major version"), "{e}");
        let e = check_protocol("one").unwrap_err();
        assert!(e.contains("not a `major.minor` version"), "{e}");
    }

    #[test]
    fn paths_resolve_against_the_program_folder_and_bare_names_do_not() {
        let root = Path::new("/srv/program");
        let t = Duration::from_secs(1);
        let l = Launch::new("x", &["plugins/x.py".into(), "-v".into()], root, t).unwrap();
        assert_eq!(l.program, PathBuf::from("/srv/program/plugins/x.py"));
        assert_eq!(l.args, vec!["-v".to_string()]);
        assert_eq!(l.dir, root);
        let l = Launch::new("x", &["python3".into()], root, t).unwrap();
        assert_eq!(l.program, PathBuf::from("python3"));
        assert!(
            Launch::new("x", &[], root, t)
                .unwrap_err()
                .contains("empty")
        );
    }

    #[test]
    fn garbage_lines_are_named() {
        let e = parse_messages(b"{\"type\":\"hello\"}\nnot json\n").unwrap_err();
        assert!(e.starts_with("line 1 of its output"), "{e}");
        let e = parse_messages(b"not json\n").unwrap_err();
        assert!(e.contains("found: `not json`"), "{e}");
        let e = parse_messages(b"{\"type\":\"shout\"}\n").unwrap_err();
        assert!(e.contains("unknown variant `shout`"), "{e}");
    }

    #[test]
    fn output_is_capped() {
        assert!(matches!(read_capped(&b"abcd"[..], 4), Captured::Complete(v) if v == b"abcd"));
        assert!(matches!(read_capped(&b"abcde"[..], 4), Captured::TooLarge));
    }
}
