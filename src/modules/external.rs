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
//! What the module gets is kept to what it needs: a minimal environment (`PATH`, `HOME`, `LANG`,
//! and `TMPDIR` pointing at its own fresh empty working folder), the participant's data without
//! the display name, and only the earlier outputs of the modules its spec `requires`. It is
//! trusted code all the same: it runs as the user and can read what the user can.
//!
//! Each call is a process group of its own. The group is killed when the module exits (its
//! answer is then already in the pipe, so leftover processes holding the pipe cannot delay or
//! void it), at the timeout, on every other way out of a call, and when the run is interrupted
//! by SIGINT or SIGTERM; nothing a module starts in its group outlives the call.

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

/// Environment variables passed on to a module; everything else is withheld. `TMPDIR` is set
/// besides to the module's own empty working folder.
pub const PASSED_ENVIRONMENT: [&str; 3] = ["PATH", "HOME", "LANG"];

/// Longest stderr line logged (longer lines are cut).
const MAX_STDERR_LINE_BYTES: usize = 2000;
/// Stderr lines logged per call; the rest are read and dropped so the module cannot block on a
/// full pipe, and one line says how many were dropped.
const MAX_STDERR_LINES_LOGGED: usize = 100;
/// How long to wait for the rest of a pipe after the module itself has exited and its process
/// group was killed. Normally the pipe closes at once; it stays open only when a process the
/// module started left the module's process group on purpose, and that must not hold up the run.
const READER_GRACE: Duration = Duration::from_millis(500);
/// Where the platform cannot wait for the module's exit without reaping it, how often the exit
/// is polled instead.
#[cfg(not(unix))]
const EXIT_POLL: Duration = Duration::from_millis(20);

/// A fresh empty working folder for one call, owner only (a module may write a participant's
/// data there), in the system's temporary folder (`TMPDIR`, else `/tmp`).
fn new_work_folder() -> std::io::Result<tempfile::TempDir> {
    let mut folder = tempfile::Builder::new();
    folder.prefix("cohortpress-module-");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        folder.permissions(std::fs::Permissions::from_mode(0o700));
    }
    folder.tempdir()
}

/// What is wrong with the temporary folder every call of an external module is given a working
/// folder in (`TMPDIR`, else `/tmp`), found by making one and removing it, or `None` when it
/// works. A `TMPDIR` naming a folder that does not exist (a cron or container environment
/// carried over from another machine), a file or a folder this user cannot write made every
/// external module fail its handshake, and the run blamed `program.yaml` (exit 3) for it.
pub fn work_folder_problem() -> Option<crate::diag::Diagnostic> {
    let e = new_work_folder().err()?;
    // The OS's words without the random name tried (`at path "/x/cohortpress-module-UBWJx4"`).
    let e = e
        .raw_os_error()
        .map_or(e, std::io::Error::from_raw_os_error);
    let dir = std::env::temp_dir();
    let named = match std::env::var_os("TMPDIR") {
        Some(_) => "the temporary folder named by TMPDIR",
        None => "the system's temporary folder",
    };
    let why = match e.kind() {
        std::io::ErrorKind::NotFound => "it does not exist".to_string(),
        std::io::ErrorKind::PermissionDenied => "this user cannot write in it".to_string(),
        _ if dir.exists() && !dir.is_dir() => "it is not a folder".to_string(),
        _ => e.to_string(),
    };
    Some(
        crate::diag::Diagnostic::error(
            dir.display().to_string(),
            format!(
                "{named} cannot be used ({why}): each call of an external module runs in a \
                 fresh working folder made there, so no external module can be started"
            ),
        )
        .expected("a folder this user can create folders in")
        .found(match std::env::var_os("TMPDIR") {
            Some(v) => format!("TMPDIR={}: {e}", std::path::Path::new(&v).display()),
            None => format!("{}: {e}", dir.display()),
        })
        .hint(
            "set TMPDIR to such a folder (or leave it unset for /tmp) in the environment the \
             command runs in (a crontab line, a service unit, a container), then run again",
        ),
    )
}

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

/// How to start a module: resolved program, arguments and timeout.
#[derive(Debug, Clone)]
pub struct Launch {
    /// Module id (for log lines and messages).
    pub id: String,
    /// The program: a path resolved against the program folder, or a bare name looked up on
    /// `PATH`.
    pub program: PathBuf,
    /// Arguments after the program; relative paths to existing files of the program folder are
    /// resolved against it (see [`Launch::new`]).
    pub args: Vec<String>,
    /// The program folder (against which paths in `command` were resolved). The module does not
    /// run there: each call gets a fresh empty working folder.
    pub dir: PathBuf,
    /// Longest time one call may take.
    pub timeout: Duration,
}

impl Launch {
    /// Builds a launch from a `command:` list. A first element containing `/` is a path and is
    /// resolved against `root` (the program folder), so a program works from any working
    /// directory; a bare name is looked up on `PATH` as a shell would. An argument that is a
    /// relative path (it contains `/` and does not start with `-`) naming an existing file or
    /// folder in the program folder is passed as that absolute path, so `[python3,
    /// plugins/steps.py]` works although the module runs in a fresh empty working folder.
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
        // The module runs in a folder of its own, so paths into the program folder must not
        // depend on the current directory.
        let root = &std::path::absolute(root).unwrap_or_else(|_| root.to_path_buf());
        let program = if first.contains('/') {
            root.join(first)
        } else {
            PathBuf::from(first)
        };
        let args = rest
            .iter()
            .map(|a| {
                let looks_like_path =
                    a.contains('/') && !a.starts_with('-') && Path::new(a).is_relative();
                let in_program = root.join(a);
                if looks_like_path && in_program.exists() {
                    in_program.to_string_lossy().into_owned()
                } else {
                    a.clone()
                }
            })
            .collect();
        Ok(Launch {
            id: id.to_string(),
            program,
            args,
            dir: root.to_path_buf(),
            timeout,
        })
    }

    /// Starts the program, writes `input` to its standard input, and collects its standard
    /// output. Standard error is logged line by line as warnings prefixed by the module id.
    /// Succeeds only when the program exits with status 0 within the timeout.
    ///
    /// The module leads a process group of its own and runs in a fresh empty working folder
    /// (also its `TMPDIR`). When it exits, when it overruns its timeout and on every other way
    /// out of this function, its whole process group is killed, so nothing it started outlives
    /// the call, and the folder is removed. Its answer is complete when the module itself has
    /// exited and either its standard output has closed or `answer_lines` protocol lines have
    /// arrived: a process it left behind holding the pipe open cannot turn an answer into a
    /// timeout.
    pub fn exchange(&self, input: Vec<u8>, answer_lines: usize) -> Result<Vec<u8>, CallError> {
        // The working folder is created, the module started and both registered under the lock
        // of the live groups: an interrupt then finds every folder it has to remove, and a sweep
        // for strays (see `Containment`) never takes a module that has just started for one.
        #[cfg(unix)]
        let mut live = live_groups();
        // Declared before the process so that it is removed after the process group is killed.
        // Owner only: a module may write a participant's data there.
        let workdir = new_work_folder().map_err(|e| {
            CallError::Failed(format!(
                "cannot create an empty working folder for it in {}: {e}",
                std::env::temp_dir().display()
            ))
        })?;
        let mut cmd = Command::new(&self.program);
        cmd.args(&self.args).current_dir(workdir.path()).env_clear();
        for key in PASSED_ENVIRONMENT {
            if let Some(v) = std::env::var_os(key) {
                cmd.env(key, v);
            }
        }
        cmd.env("TMPDIR", workdir.path());
        cmd.stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped());
        #[cfg(unix)]
        {
            // A process group of its own (pgid = the module's pid): everything the module starts
            // joins it, and one kill(-pgid) ends them all.
            use std::os::unix::process::CommandExt;
            cmd.process_group(0);
        }
        let shown = self.program.display().to_string();
        let child = match cmd.spawn() {
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
        #[cfg(unix)]
        {
            watch_interrupts(Operation::Run);
            live.insert(child.id(), workdir.path().to_path_buf());
            drop(live);
        }
        let mut running = Running::new(child);
        let (tx, rx) = mpsc::channel();

        // Standard input is written from its own thread: a module that never reads must not be
        // able to block us on a full pipe. The pipe closes when the thread drops it.
        let stdin = running.child.stdin.take().expect("stdin is piped");
        let id = self.id.clone();
        std::thread::spawn(move || {
            let mut stdin = stdin;
            if let Err(e) = stdin.write_all(&input) {
                // The module hung up early (it may not need its input); its answer decides.
                tracing::debug!("{id}: could not write its whole input: {e}");
            }
        });

        let stdout = running.child.stdout.take().expect("stdout is piped");
        let out_tx = tx.clone();
        std::thread::spawn(move || read_chunks(stdout, &out_tx));

        let stderr = running.child.stderr.take().expect("stderr is piped");
        let (err_tx, err_rx) = mpsc::channel();
        let id = self.id.clone();
        std::thread::spawn(move || {
            let _ = err_tx.send(log_stderr(&id, stderr));
        });

        running.watch_exit(tx);

        let deadline = Instant::now() + self.timeout;
        let mut out = Vec::new();
        let mut closed = false;
        // When the module itself exited: from then on only the pipe's remainder is awaited.
        let mut exited_at: Option<Instant> = None;
        loop {
            if exited_at.is_some() && (closed || complete_lines(&out) >= answer_lines) {
                break;
            }
            let now = Instant::now();
            let until = match exited_at {
                // The module exited in time; the remainder of the pipe gets a short grace even
                // when that ends past the deadline.
                Some(t) => t + READER_GRACE,
                None => deadline,
            };
            #[cfg(not(unix))]
            let until = until.min(now + EXIT_POLL);
            let event = rx.recv_timeout(until.saturating_duration_since(now));
            match event {
                Ok(Event::Chunk(bytes)) => {
                    out.extend_from_slice(&bytes);
                    if out.len() > MAX_OUTPUT_BYTES {
                        let _ = running.finish();
                        return Err(CallError::Failed(format!(
                            "its output exceeded the limit of {} MiB and it was stopped",
                            MAX_OUTPUT_BYTES / (1024 * 1024)
                        )));
                    }
                }
                Ok(Event::Closed) => closed = true,
                Ok(Event::ReadFailed(e)) => {
                    let _ = running.finish();
                    return Err(CallError::Failed(format!("reading its output failed: {e}")));
                }
                Ok(Event::Exited) => {
                    // Whatever it started goes with it; its answer is already in the pipe.
                    running.kill_group();
                    exited_at = Some(Instant::now());
                }
                Err(mpsc::RecvTimeoutError::Timeout) => {
                    if exited_at.is_some() {
                        // The pipe is held open by a process that left the module's group; the
                        // module is gone and what it wrote has been read.
                        break;
                    }
                    #[cfg(not(unix))]
                    if running.has_exited() {
                        running.kill_group();
                        exited_at = Some(Instant::now());
                        continue;
                    }
                    if Instant::now() < deadline {
                        continue;
                    }
                    let _ = running.finish();
                    return Err(self.timed_out(complete_lines(&out) >= answer_lines));
                }
                // Every sender is gone: the output is closed and the exit was seen.
                Err(mpsc::RecvTimeoutError::Disconnected) => break,
            }
        }
        let status = match running.finish() {
            Ok(s) => s,
            Err(e) => return Err(CallError::Failed(format!("waiting for it failed: {e}"))),
        };
        let last_stderr = err_rx.recv_timeout(READER_GRACE).ok().flatten();
        drop(workdir);
        if !status.success() {
            let mut msg = describe_status(status);
            if let Some(line) = last_stderr {
                msg.push_str(&format!("; its last error line: `{line}`"));
            }
            return Err(CallError::Failed(msg));
        }
        Ok(out)
    }

    fn timed_out(&self, had_answered: bool) -> CallError {
        let what = if had_answered {
            "answered but did not exit"
        } else {
            "did not finish"
        };
        CallError::Failed(format!(
            "{what} within {} s and was stopped; if it needs longer, raise \
             `timeout_seconds` for module `{}` in program.yaml",
            self.timeout.as_secs_f64(),
            self.id
        ))
    }
}

/// What the threads around a running module report.
enum Event {
    /// Bytes from standard output.
    Chunk(Vec<u8>),
    /// Standard output was closed by every process holding it.
    Closed,
    /// Reading standard output failed.
    ReadFailed(String),
    /// The module itself exited (it is not yet reaped, so its process group id stays its own).
    Exited,
}

/// Forwards standard output in chunks until it closes.
fn read_chunks(mut r: impl Read, tx: &mpsc::Sender<Event>) {
    let mut buf = vec![0u8; 64 * 1024];
    loop {
        match r.read(&mut buf) {
            Ok(0) => {
                let _ = tx.send(Event::Closed);
                return;
            }
            Ok(n) => {
                if tx.send(Event::Chunk(buf[..n].to_vec())).is_err() {
                    return;
                }
            }
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => {
                let _ = tx.send(Event::ReadFailed(e.to_string()));
                return;
            }
        }
    }
}

/// Non-blank lines that are complete (end with a newline) in `out`.
fn complete_lines(out: &[u8]) -> usize {
    let end = out.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1);
    out[..end]
        .split(|&b| b == b'\n')
        .filter(|l| !l.iter().all(u8::is_ascii_whitespace))
        .count()
}

/// A started module and its process group. The module leads the group (pgid = its pid); it is
/// reaped only after the group was killed, so the group id cannot have been reused by then.
/// Dropping it kills the group and reaps the module, so no way out of [`Launch::exchange`] can
/// leave a process of the module behind.
struct Running {
    child: Child,
    status: Option<ExitStatus>,
}

/// Process groups of the modules running right now, with their working folders, so that an
/// interrupted run can stop them and clean up. A module is added when it starts (under the lock,
/// so that a sweep never takes it for a stray) and removed just after it is reaped.
#[cfg(unix)]
static LIVE_GROUPS: std::sync::Mutex<std::collections::BTreeMap<u32, PathBuf>> =
    std::sync::Mutex::new(std::collections::BTreeMap::new());

#[cfg(unix)]
fn live_groups() -> std::sync::MutexGuard<'static, std::collections::BTreeMap<u32, PathBuf>> {
    // A panic while holding the lock leaves the set itself consistent.
    LIVE_GROUPS.lock().unwrap_or_else(|e| e.into_inner())
}

/// On the first call, starts a thread that waits for SIGINT or SIGTERM; when one arrives it
/// kills the process groups of the modules running then, removes their working folders and the
/// run's unfinished output (its staging folder, [`crate::output::abandon_staging`]), says so in
/// the log, and ends the process as the signal would have (a shell reports 130 or 143): a
/// code of our own would hide from the shell or scheduler that it was stopped, and a shell
/// script goes on after a child that exits, where it stops after one killed by SIGINT.
/// Modules lead groups of their own, so a Ctrl-C at the terminal or a scheduler stopping the job
/// reaches only cohortpress; without this their processes would outlive the run. `run` and
/// `merge` call it at their start, so an interrupted run always leaves a last line in the log (a scheduler's stop
/// had left none).
///
/// `what` is the command, named in the log line; the first call names it (external modules
/// call it as a run's).
#[cfg(unix)]
pub fn watch_interrupts(what: Operation) {
    static INSTALL: std::sync::Once = std::sync::Once::new();
    INSTALL.call_once(|| {
        use signal_hook::consts::{SIGINT, SIGTERM};
        let mut signals = match signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) {
            Ok(s) => s,
            Err(e) => {
                tracing::warn!(
                    "cannot watch for interrupts ({e}); an interrupted run may leave external \
                     modules running"
                );
                return;
            }
        };
        std::thread::spawn(move || {
            if let Some(signal) = signals.forever().next() {
                let name = if signal == SIGINT {
                    "SIGINT"
                } else {
                    "SIGTERM"
                };
                let groups = live_groups();
                for (&pgid, dir) in groups.iter() {
                    if let Some(pid) = rustix::process::Pid::from_raw(pgid as i32) {
                        let _ =
                            rustix::process::kill_process_group(pid, rustix::process::Signal::KILL);
                    }
                    let _ = std::fs::remove_dir_all(dir);
                }
                #[cfg(target_os = "linux")]
                stop_adopted();
                // The run's unfinished output goes too (the modules that were writing for it
                // are stopped): the output folder itself was never touched before the swap.
                let interrupted = crate::output::abandon_staging();
                tracing::error!(
                    "interrupted by {name}: {}",
                    interrupted_words(what, &interrupted)
                );
                // Keep the lock: no new group is registered while the process ends.
                let _ = signal_hook::low_level::emulate_default_handler(signal);
                std::process::exit(128 + signal);
            }
        });
    });
}

/// The command an interrupt stops ([`watch_interrupts`]): what its log line names.
#[cfg(unix)]
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Operation {
    /// `run` (also a shard's).
    Run,
    /// `merge`.
    Merge,
    /// `import fhir`, which writes participant folders into a program folder.
    Import,
}

/// What an interrupted command says it did with the output it was writing (see
/// [`crate::output::abandon_staging`]). It said "the run stops here" for `import fhir` too, and
/// "an output not yet put in place leaves the previous one as it was" also when the interrupt
/// came after the output had been put in place (an interrupt during the swap, or while the
/// import's folders are moved, waits for it to end, and comes after it).
#[cfg(unix)]
fn interrupted_words(what: Operation, interrupted: &crate::output::Interrupted) -> String {
    let who = match what {
        Operation::Run => "the run",
        Operation::Merge => "the merge",
        Operation::Import => "the import",
    };
    if interrupted.abandoned.is_empty() {
        let shown = |p: &[std::path::PathBuf]| {
            p.iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        };
        return match (what, interrupted.placed.is_empty()) {
            (Operation::Import, true) => {
                "the import stops here, before any participant folder was written; the program folder was left as it was".into()
            }
            (Operation::Import, false) => format!(
                "the import stops here, after its participant folders were moved into {}, whole; only the summary of what was imported is not printed",
                shown(&interrupted.placed)
            ),
            (_, true) => format!(
                "{who} stops here, before any output was put in place; the output folder was left as it was"
            ),
            (_, false) => format!(
                "{who} stops here, after its output was put in place: {} holds it, complete; only the summary line and the exit code are not given",
                shown(&interrupted.placed)
            ),
        };
    }
    let words = interrupted
        .abandoned
        .iter()
        .map(|a| {
            let kept = if a.output.exists() {
                format!("{} was left as it was", a.output.display())
            } else {
                format!("nothing was written to {}", a.output.display())
            };
            match &a.removed {
                Ok(()) => format!(
                    "the unfinished output it was writing ({}) was removed, and {kept}",
                    a.staging.display()
                ),
                Err(e) if what == Operation::Import => format!(
                    "the unfinished output it was writing ({}) could not be removed ({e}); the \
                     next import into the same program folder removes it, and {kept}",
                    a.staging.display()
                ),
                Err(e) => format!(
                    "the unfinished output it was writing ({}) could not be removed ({e}); the \
                     next run into {} or beside it removes it, and {kept}",
                    a.staging.display(),
                    a.output.display()
                ),
            }
        })
        .collect::<Vec<_>>()
        .join("; ");
    format!("{who} stops here; {words}")
}

/// Whether this process adopts orphaned descendants (see [`Containment`]).
#[cfg(target_os = "linux")]
static SUBREAPER: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Extends the containment of external modules to processes that leave their module's process
/// group (`setsid`, daemons): the program becomes a *child subreaper* (Linux), so such a process
/// is adopted by it instead of by init when its parent ends, and every adopted process is killed
/// (with its own group) and reaped after each module call and when the guard is dropped.
///
/// For the `cohortpress` binary only, held for its whole life: a process that starts other
/// programs itself (a test harness running the binary) must not use it, since a sweep kills
/// every child that is not a running module.
#[must_use = "the guard sweeps up strays when it is dropped"]
pub struct Containment(());

impl Containment {
    /// Becomes a child subreaper where the system supports it (Linux); elsewhere modules are
    /// contained by their process groups alone.
    pub fn install() -> Containment {
        #[cfg(target_os = "linux")]
        {
            use std::sync::atomic::Ordering;
            let me = rustix::process::getpid();
            match rustix::process::set_child_subreaper(Some(me)) {
                Ok(()) => SUBREAPER.store(true, Ordering::SeqCst),
                Err(e) => tracing::debug!("cannot become a child subreaper: {e}"),
            }
        }
        Containment(())
    }
}

impl Drop for Containment {
    fn drop(&mut self) {
        #[cfg(unix)]
        sweep_strays(&live_groups());
    }
}

/// Kills and reaps every child of this process that is not a running module: processes that
/// left a module's group and were adopted after their parent ended. Does nothing unless
/// [`Containment::install`] made this process a subreaper. `live` is the locked set of running
/// modules, so no module starts or ends meanwhile.
#[cfg(unix)]
fn sweep_strays(live: &std::collections::BTreeMap<u32, PathBuf>) {
    #[cfg(target_os = "linux")]
    {
        use rustix::process::{
            Pid, Signal, WaitOptions, kill_process, kill_process_group, waitpid,
        };
        use std::sync::atomic::Ordering;
        if !SUBREAPER.load(Ordering::SeqCst) {
            return;
        }
        let me = std::process::id();
        // Killing an adopted process can orphan its own children, who are adopted in turn:
        // repeat until a pass finds none (bounded, in case something keeps forking).
        for _ in 0..16 {
            let strays: Vec<(u32, u32)> = children_of(me)
                .into_iter()
                .filter(|(pid, _)| !live.contains_key(pid))
                .collect();
            if strays.is_empty() {
                return;
            }
            for &(pid, pgid) in &strays {
                let Some(p) = Pid::from_raw(pid as i32) else {
                    continue;
                };
                tracing::debug!("stopping process {pid}, left behind by an external module");
                if pgid == pid {
                    let _ = kill_process_group(p, Signal::KILL);
                }
                let _ = kill_process(p, Signal::KILL);
                let _ = waitpid(Some(p), WaitOptions::empty());
            }
        }
    }
    #[cfg(not(target_os = "linux"))]
    let _ = live;
}

/// When the process is about to end on a signal: kills every process it has adopted (see
/// [`Containment`]) with its group. The modules were just killed, and processes they detached
/// are adopted a moment after, so this looks a few times.
#[cfg(target_os = "linux")]
fn stop_adopted() {
    use rustix::process::{Pid, Signal, kill_process, kill_process_group};
    use std::sync::atomic::Ordering;
    if !SUBREAPER.load(Ordering::SeqCst) {
        return;
    }
    let me = std::process::id();
    for _ in 0..20 {
        for (pid, pgid) in children_of(me) {
            if let Some(p) = Pid::from_raw(pid as i32) {
                if pgid == pid {
                    let _ = kill_process_group(p, Signal::KILL);
                }
                let _ = kill_process(p, Signal::KILL);
            }
        }
        std::thread::sleep(Duration::from_millis(10));
    }
}

/// The children of this process (`me`), with their process group ids, from `/proc`: the
/// `children` lists of its threads where the kernel provides them (cheap), else a scan of every
/// process.
#[cfg(target_os = "linux")]
fn children_of(me: u32) -> Vec<(u32, u32)> {
    let stat_of = |pid: u32| -> Option<(u32, u32)> {
        let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
        // After the command name in parentheses: state, ppid, pgrp.
        let mut rest = stat.rsplit_once(')')?.1.split_whitespace();
        let ppid: u32 = rest.nth(1)?.parse().ok()?;
        let pgid: u32 = rest.next()?.parse().ok()?;
        Some((ppid, pgid))
    };
    let children_files = Path::new(&format!("/proc/{me}/task/{me}/children")).exists();
    let candidates: Vec<u32> = if children_files {
        std::fs::read_dir(format!("/proc/{me}/task"))
            .map(|tasks| {
                tasks
                    .filter_map(|t| std::fs::read_to_string(t.ok()?.path().join("children")).ok())
                    .flat_map(|text| {
                        text.split_whitespace()
                            .filter_map(|p| p.parse::<u32>().ok())
                            .collect::<Vec<_>>()
                    })
                    .collect()
            })
            .unwrap_or_default()
    } else {
        // A kernel without the `children` files: every process is looked at.
        std::fs::read_dir("/proc")
            .map(|dir| {
                dir.filter_map(|e| e.ok()?.file_name().to_str()?.parse().ok())
                    .collect()
            })
            .unwrap_or_default()
    };
    candidates
        .into_iter()
        .filter_map(|pid| {
            let (ppid, pgid) = stat_of(pid)?;
            (ppid == me).then_some((pid, pgid))
        })
        .collect()
}

impl Running {
    /// Takes over a module that is registered in the live groups (on Unix).
    fn new(child: Child) -> Self {
        Running {
            child,
            status: None,
        }
    }

    /// Reports [`Event::Exited`] on `tx` when the module exits, without reaping it.
    #[cfg(unix)]
    fn watch_exit(&self, tx: mpsc::Sender<Event>) {
        use rustix::process::{Pid, WaitId, WaitIdOptions, waitid};
        let pid = Pid::from_child(&self.child);
        std::thread::spawn(move || {
            // Exited, or already reaped because the call ended another way; retried only
            // when interrupted.
            while let Err(rustix::io::Errno::INTR) = waitid(
                WaitId::Pid(pid),
                WaitIdOptions::EXITED | WaitIdOptions::NOWAIT,
            ) {}
            let _ = tx.send(Event::Exited);
        });
    }

    #[cfg(not(unix))]
    fn watch_exit(&self, tx: mpsc::Sender<Event>) {
        // Exits are polled (see `EXIT_POLL`); the sender is dropped so a closed pipe can end
        // the wait.
        drop(tx);
    }

    #[cfg(not(unix))]
    fn has_exited(&mut self) -> bool {
        matches!(self.child.try_wait(), Ok(Some(_)))
    }

    /// Kills every process in the module's group (the module too, if it is still running).
    fn kill_group(&mut self) {
        if self.status.is_some() {
            return;
        }
        #[cfg(unix)]
        {
            use rustix::process::{Pid, Signal, kill_process_group};
            // The module is not reaped yet, so its pid still names its group. ESRCH (the group
            // is already empty) is fine.
            let _ = kill_process_group(Pid::from_child(&self.child), Signal::KILL);
        }
        #[cfg(not(unix))]
        {
            let _ = self.child.kill();
        }
    }

    /// Kills the group and reaps the module; its exit status.
    fn finish(&mut self) -> std::io::Result<ExitStatus> {
        if let Some(s) = self.status {
            return Ok(s);
        }
        self.kill_group();
        #[cfg(unix)]
        {
            // Reaped first, unregistered after: a sweep for strays never sees the module
            // unregistered but not yet reaped (it would take it for a stray), and no lock is held
            // while waiting.
            let s = self.child.wait()?;
            let mut live = live_groups();
            live.remove(&self.child.id());
            self.status = Some(s);
            sweep_strays(&live);
            Ok(s)
        }
        #[cfg(not(unix))]
        {
            let s = self.child.wait()?;
            self.status = Some(s);
            Ok(s)
        }
    }
}

impl Drop for Running {
    fn drop(&mut self) {
        let _ = self.finish();
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

/// Whether `name` can name an output: ASCII letters, digits and `_`, starting with a letter (the
/// protocol asks for snake_case). Output names become column names in the tidy CSVs, so nothing
/// else gets through.
fn is_output_name(name: &str) -> bool {
    let mut chars = name.chars();
    chars.next().is_some_and(|c| c.is_ascii_alphabetic())
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
        && name.len() <= 100
}

/// Checks what the protocol promises about a `result` beyond its JSON shape: names are
/// snake_case and unique within their kind, a series' `step` is known and its points are sorted
/// by date (one per date in a daily or weekly series), every table row has one cell per column,
/// and flag codes are not empty.
pub fn validate_output(out: &ModuleOutput) -> Result<(), String> {
    fn names<'a>(kind: &str, names: impl Iterator<Item = &'a str>) -> Result<(), String> {
        let mut seen = std::collections::BTreeSet::new();
        for name in names {
            if !is_output_name(name) {
                return Err(format!(
                    "{kind} name `{}` is not snake_case (expected letters, digits and `_`, \
                     starting with a letter, at most 100 characters)",
                    snippet(name)
                ));
            }
            if !seen.insert(name) {
                return Err(format!("{kind} `{name}` appears twice"));
            }
        }
        Ok(())
    }
    let values: usize = out
        .tables
        .iter()
        .flat_map(|t| &t.rows)
        .map(Vec::len)
        .sum::<usize>()
        + out.series.iter().map(|s| s.points.len()).sum::<usize>();
    if values > crate::limits::MAX_MODULE_RESULT_VALUES {
        return Err(format!(
            "its tables and series hold {} values (cells and points) for one participant; at \
             most {} are accepted",
            crate::diag::thousands(values),
            crate::diag::thousands(crate::limits::MAX_MODULE_RESULT_VALUES)
        ));
    }
    names("scalar", out.scalars.iter().map(|s| s.name.as_str()))?;
    names("text", out.texts.iter().map(|t| t.name.as_str()))?;
    names("series", out.series.iter().map(|s| s.name.as_str()))?;
    names("table", out.tables.iter().map(|t| t.name.as_str()))?;
    for s in &out.series {
        if !["daily", "weekly", "irregular"].contains(&s.step.as_str()) {
            return Err(format!(
                "series `{}` has step `{}`; expected `daily`, `weekly` or `irregular`",
                s.name,
                snippet(&s.step)
            ));
        }
        if let Some(w) = s.points.windows(2).find(|w| w[1].date < w[0].date) {
            return Err(format!(
                "series `{}` is not sorted by date: {} comes after {}",
                s.name, w[1].date, w[0].date
            ));
        }
        // A daily or weekly series has one point per day or week: `metrics/weekly.csv` is
        // keyed by participant, module, series and week (its `datapackage.json` says so).
        if s.step != "irregular"
            && let Some(w) = s.points.windows(2).find(|w| w[1].date == w[0].date)
        {
            return Err(format!(
                "series `{}` ({}) has two points on {}",
                s.name, s.step, w[0].date
            ));
        }
        // ... and `weekly.csv` dates each week by its Monday, so a weekly series has one point
        // per calendar week (Monday to Sunday), as the protocol says.
        if s.step == "weekly"
            && let Some(w) = s.points.windows(2).find(|w| {
                cohortpress_metric_adherence::week_start(w[1].date)
                    == cohortpress_metric_adherence::week_start(w[0].date)
            })
        {
            return Err(format!(
                "series `{}` (weekly) has two points in the week of Monday {}: {} and {}",
                s.name,
                cohortpress_metric_adherence::week_start(w[0].date),
                w[0].date,
                w[1].date
            ));
        }
    }
    for t in &out.tables {
        names(
            &format!("table `{}`: column", t.name),
            t.columns.iter().map(|c| c.name.as_str()),
        )?;
        for (i, row) in t.rows.iter().enumerate() {
            if row.len() != t.columns.len() {
                return Err(format!(
                    "table `{}` row {} has {} cells for {} columns",
                    t.name,
                    i + 1,
                    row.len(),
                    t.columns.len()
                ));
            }
        }
    }
    if let Some(i) = out.flags.iter().position(|f| f.code.trim().is_empty()) {
        return Err(format!("flag {} has an empty `code`", i + 1));
    }
    Ok(())
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
        let stdout = launch.exchange(line_of(&hello_message())?, 1)?;
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
        let stdout = self.launch.exchange(self.request(ctx, data)?, 2)?;
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
            Some(ModuleMessage::Result { output }) => match validate_output(&output) {
                Ok(()) => Ok(output),
                Err(why) => Err(CallError::Failed(format!(
                    "it answered, but its `result` failed validation: {why}"
                ))),
            },
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

    /// The interrupt's log line said "the run stops here" for `import fhir` too, and "an
    /// output not yet put in place leaves the previous one as it was" when the output had
    /// already been put in place (the interrupt waits for a swap, or the import's moves, under
    /// way). Each now says where the interrupt came.
    #[cfg(unix)]
    #[test]
    fn the_interrupt_line_says_what_stopped_and_where() {
        use crate::output::{Abandoned, Interrupted};
        use std::path::PathBuf;
        let none = Interrupted {
            abandoned: Vec::new(),
            placed: Vec::new(),
        };
        let out = PathBuf::from("/srv/reports");
        let participants = PathBuf::from("/srv/program/participants");
        let placed = |p: &PathBuf| Interrupted {
            abandoned: Vec::new(),
            placed: vec![p.clone()],
        };
        assert_eq!(
            interrupted_words(Operation::Run, &none),
            "the run stops here, before any output was put in place; the output folder was left as it was"
        );
        assert_eq!(
            interrupted_words(Operation::Merge, &placed(&out)),
            "the merge stops here, after its output was put in place: /srv/reports holds it, complete; only the summary line and the exit code are not given"
        );
        assert_eq!(
            interrupted_words(Operation::Import, &none),
            "the import stops here, before any participant folder was written; the program folder was left as it was"
        );
        assert_eq!(
            interrupted_words(Operation::Import, &placed(&participants)),
            "the import stops here, after its participant folders were moved into /srv/program/participants, whole; only the summary of what was imported is not printed"
        );
        let staging = PathBuf::from("/srv/program/.cohortpress-import.staging");
        let writing = |removed: Result<(), String>| Interrupted {
            abandoned: vec![Abandoned {
                staging: staging.clone(),
                output: participants.clone(),
                removed,
            }],
            placed: Vec::new(),
        };
        assert_eq!(
            interrupted_words(Operation::Import, &writing(Ok(()))),
            "the import stops here; the unfinished output it was writing (/srv/program/.cohortpress-import.staging) was removed, and nothing was written to /srv/program/participants"
        );
        assert_eq!(
            interrupted_words(Operation::Import, &writing(Err("busy".into()))),
            "the import stops here; the unfinished output it was writing (/srv/program/.cohortpress-import.staging) could not be removed (busy); the next import into the same program folder removes it, and nothing was written to /srv/program/participants"
        );
    }

    /// Two points on one date in a weekly series made `metrics/weekly.csv` repeat a key its
    /// `datapackage.json` declares unique; an irregular series may hold both.
    #[test]
    fn a_daily_or_weekly_series_holds_one_point_per_date() {
        let d = chrono::NaiveDate::from_ymd_opt(2027, 3, 1).unwrap();
        let point = |value| cohortpress_metric_api::Point {
            date: d,
            value,
            lower: None,
            upper: None,
        };
        let out = |step: &str| ModuleOutput {
            series: vec![cohortpress_metric_api::Series {
                name: "weekly_mean_steps".into(),
                unit: "steps/d".into(),
                step: step.into(),
                label: "Steps".into(),
                points: vec![point(7000.0), point(9000.0)],
            }],
            ..Default::default()
        };
        assert_eq!(
            validate_output(&out("weekly")).unwrap_err(),
            "series `weekly_mean_steps` (weekly) has two points on 2027-03-01"
        );
        assert!(validate_output(&out("daily")).is_err());
        assert_eq!(validate_output(&out("irregular")), Ok(()));
    }

    /// `metrics/weekly.csv` dates each week by its Monday: a weekly series with two points in
    /// one calendar week (Wednesday 3 and Sunday 7 March 2027) would give it two rows of one key.
    /// A first week dated by its first day in the period (Wednesday 3 March), then the next
    /// Monday, is one point per week and is taken.
    #[test]
    fn a_weekly_series_holds_one_point_per_calendar_week() {
        let day = |d| chrono::NaiveDate::from_ymd_opt(2027, 3, d).unwrap();
        let out = |days: &[u32]| ModuleOutput {
            series: vec![cohortpress_metric_api::Series {
                name: "weekly_mean_steps".into(),
                unit: "steps/d".into(),
                step: "weekly".into(),
                label: "Steps".into(),
                points: days
                    .iter()
                    .map(|&d| cohortpress_metric_api::Point {
                        date: day(d),
                        value: 7000.0,
                        lower: None,
                        upper: None,
                    })
                    .collect(),
            }],
            ..Default::default()
        };
        assert_eq!(
            validate_output(&out(&[3, 7])).unwrap_err(),
            "series `weekly_mean_steps` (weekly) has two points in the week of Monday \
             2027-03-01: 2027-03-03 and 2027-03-07"
        );
        assert_eq!(validate_output(&out(&[3, 8, 15])), Ok(()));
    }

    /// A result may hold 100,000 table cells and series points in all, and not one more.
    #[test]
    fn a_result_may_hold_up_to_the_ceiling_of_values() {
        use crate::limits::MAX_MODULE_RESULT_VALUES;
        use cohortpress_metric_api::{Cell, Column, Point, Series, Table};
        let table = |rows: usize| Table {
            name: "t".into(),
            label: "T".into(),
            columns: vec![Column::new("a", "", "A")],
            rows: vec![vec![Cell::Number(1.0)]; rows],
        };
        let point = Point {
            date: chrono::NaiveDate::from_ymd_opt(2027, 3, 1).unwrap(),
            value: 1.0,
            lower: None,
            upper: None,
        };
        let mut out = ModuleOutput {
            tables: vec![table(MAX_MODULE_RESULT_VALUES - 10)],
            series: vec![Series {
                name: "s".into(),
                unit: String::new(),
                step: "irregular".into(),
                label: "S".into(),
                points: vec![point; 10],
            }],
            ..Default::default()
        };
        assert_eq!(validate_output(&out), Ok(()));
        out.tables = vec![table(MAX_MODULE_RESULT_VALUES - 9)];
        assert_eq!(
            validate_output(&out).unwrap_err(),
            "its tables and series hold 100,001 values (cells and points) for one participant; \
             at most 100,000 are accepted"
        );
    }

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
        let tmp = tempfile::tempdir().unwrap();
        std::fs::create_dir(tmp.path().join("plugins")).unwrap();
        std::fs::write(tmp.path().join("plugins/x.py"), "").unwrap();
        let command = [
            "python3",
            "plugins/x.py",
            "--opt=plugins/x.py",
            "a/b",
            "plain",
        ];
        let command: Vec<String> = command.iter().map(|s| s.to_string()).collect();
        let l = Launch::new("x", &command, tmp.path(), t).unwrap();
        let x = tmp
            .path()
            .join("plugins/x.py")
            .to_string_lossy()
            .into_owned();
        assert_eq!(l.args, [&x, "--opt=plugins/x.py", "a/b", "plain"]);
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

    #[cfg(target_os = "linux")]
    #[test]
    fn children_are_listed_with_their_process_groups() {
        use std::os::unix::process::CommandExt;
        let mut child = Command::new("sleep")
            .arg("5")
            .process_group(0)
            .spawn()
            .unwrap();
        let found = children_of(std::process::id());
        child.kill().unwrap();
        child.wait().unwrap();
        assert!(found.contains(&(child.id(), child.id())), "{found:?}");
    }

    #[test]
    fn complete_lines_count_only_finished_non_blank_lines() {
        assert_eq!(complete_lines(b""), 0);
        assert_eq!(complete_lines(b"{\"type\":\"hello\"}"), 0);
        assert_eq!(complete_lines(b"{\"type\":\"hello\"}\n"), 1);
        assert_eq!(complete_lines(b"a\n\n  \nb\nc"), 2);
    }
}
