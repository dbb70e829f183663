//! `ProgramTest`: copies a fixture program into a fresh temporary folder, runs the real binary on
//! it with a scrubbed environment, and returns what happened.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// Root of the repository.
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A fixture folder under `tests/fixtures/`.
pub fn fixture(name: &str) -> PathBuf {
    repo_root().join("tests/fixtures").join(name)
}

/// What one run of the binary did.
#[derive(Debug)]
pub struct Outcome {
    /// Exit code.
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

/// A program copied into a temporary folder, ready to run commands on.
pub struct ProgramTest {
    /// Keeps the folder alive.
    _tmp: tempfile::TempDir,
    /// The copied program folder.
    pub dir: PathBuf,
}

impl ProgramTest {
    /// Copies `src` (a program folder) into a fresh temporary folder.
    pub fn from_dir(src: &Path) -> Self {
        let tmp = tempfile::Builder::new()
            .prefix("cohortpress-test-")
            .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
            .expect("temp dir");
        let dir = tmp.path().join("program");
        copy_tree(src, &dir);
        ProgramTest { _tmp: tmp, dir }
    }

    /// Copies the fixture `tests/fixtures/NAME`.
    pub fn fixture(name: &str) -> Self {
        Self::from_dir(&fixture(name))
    }

    /// Copies the bundled sample program.
    pub fn sample() -> Self {
        Self::from_dir(&repo_root().join("sample-program"))
    }

    /// A fresh generated demo program of `n` participants (seed 2026) without planted defects,
    /// made by the real binary's `demo-program`.
    pub fn demo(n: usize) -> Self {
        let scratch = tempfile::Builder::new()
            .prefix("cohortpress-demo-")
            .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
            .expect("temp dir");
        let dir = scratch.path().join("p");
        let out = Command::new(env!("CARGO_BIN_EXE_cohortpress"))
            .args(["demo-program", &dir.to_string_lossy(), "--no-defects"])
            .args(["--participants", &n.to_string()])
            .output()
            .expect("run cohortpress demo-program");
        assert!(out.status.success(), "{out:?}");
        Self::from_dir(&dir)
    }

    /// Runs `cohortpress ARGS…` with the program folder as working directory. `{dir}` in an
    /// argument is replaced by the program folder.
    pub fn run(&self, args: &[&str]) -> Outcome {
        self.exec(
            args.iter()
                .map(|a| a.replace("{dir}", &self.dir.to_string_lossy()).into())
                .collect(),
        )
    }

    /// [`ProgramTest::run`] with arguments that need not be UTF-8 (paths of any bytes).
    pub fn run_os(&self, args: &[&std::ffi::OsStr]) -> Outcome {
        let args: Vec<std::ffi::OsString> = args
            .iter()
            .map(|a| {
                if *a == "{dir}" {
                    self.dir.clone().into_os_string()
                } else {
                    a.to_os_string()
                }
            })
            .collect();
        self.exec(args)
    }

    /// [`ProgramTest::run`] with variables `env` added to the clean environment.
    pub fn run_env(&self, args: &[&str], env: &[(&str, &str)]) -> Outcome {
        self.exec_env(
            args.iter()
                .map(|a| a.replace("{dir}", &self.dir.to_string_lossy()).into())
                .collect(),
            env,
        )
    }

    /// Runs the binary with `args` in the program folder, with a clean environment.
    fn exec(&self, args: Vec<std::ffi::OsString>) -> Outcome {
        self.exec_env(args, &[])
    }

    fn exec_env(&self, args: Vec<std::ffi::OsString>, env: &[(&str, &str)]) -> Outcome {
        let out = Command::new(env!("CARGO_BIN_EXE_cohortpress"))
            .args(&args)
            .current_dir(&self.dir)
            .env_clear()
            .env("PATH", std::env::var("PATH").unwrap_or_default())
            .env("HOME", self.dir.parent().unwrap())
            .envs(env.iter().copied())
            .output()
            .expect("run cohortpress");
        Outcome {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        }
    }

    /// Replaces the temporary folder's path by `[DIR]` so output can be snapshotted.
    pub fn redact(&self, s: &str) -> String {
        s.replace(&*self.dir.to_string_lossy(), "[DIR]")
    }
}

/// Copies a folder tree (files and folders only).
///
/// A program's own output (the default `reports/` folder, its ledger and its hidden staging
/// and lock files) is left out: after the README's first command the sample program holds its reports,
/// and a test must start from the inputs alone.
pub fn copy_tree(src: &Path, dst: &Path) {
    let is_output = |e: &walkdir::DirEntry| {
        let name = e.file_name().to_string_lossy();
        e.depth() == 1
            && (name == "reports" || name == "reports.ledger" || name.starts_with(".reports"))
    };
    for entry in walkdir::WalkDir::new(src)
        .sort_by_file_name()
        .into_iter()
        .filter_entry(|e| !is_output(e))
    {
        let entry = entry.expect("walk fixture");
        let rel = entry.path().strip_prefix(src).unwrap();
        let target = dst.join(rel);
        if entry.file_type().is_dir() {
            std::fs::create_dir_all(&target).unwrap();
        } else if entry.file_type().is_file() {
            std::fs::copy(entry.path(), &target).unwrap();
        }
    }
}

/// blake3 hashes of every file under `dir`, by relative path (to prove inputs are untouched).
pub fn tree_hashes(dir: &Path) -> Vec<(String, String)> {
    let mut v = Vec::new();
    for entry in walkdir::WalkDir::new(dir).sort_by_file_name() {
        let entry = entry.unwrap();
        if entry.file_type().is_file() {
            let bytes = std::fs::read(entry.path()).unwrap();
            v.push((
                entry
                    .path()
                    .strip_prefix(dir)
                    .unwrap()
                    .to_string_lossy()
                    .into_owned(),
                blake3::hash(&bytes).to_hex().to_string(),
            ));
        }
    }
    v
}

/// A tmpfs mounted at a folder for one test, unmounted when dropped.
pub struct Tmpfs(PathBuf);

impl Tmpfs {
    /// Mounts a 16 MB tmpfs at `dir` (a folder that exists). Needs the right to mount (root, as
    /// on the project's test machine): `None` without it, after saying the test is skipped.
    pub fn mount(dir: &Path) -> Option<Tmpfs> {
        let mounted = Command::new("mount")
            .args(["-t", "tmpfs", "-o", "size=16m", "tmpfs"])
            .arg(dir)
            .stderr(std::process::Stdio::null())
            .status()
            .is_ok_and(|s| s.success());
        if !mounted {
            eprintln!("skipped: cannot mount a tmpfs here (not root)");
            return None;
        }
        Some(Tmpfs(dir.to_path_buf()))
    }

    /// Remounts it read-only.
    pub fn make_read_only(&self) {
        let remounted = Command::new("mount")
            .args(["-o", "remount,ro"])
            .arg(&self.0)
            .status()
            .is_ok_and(|s| s.success());
        assert!(remounted, "remount read-only");
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}
