//! What the integration tests share: the `sluice` binary as a test command
//! and the paths of the shipped portfolios.
//!
//! Every command runs from the crate root with the caller's `COLUMNS` and
//! `NO_COLOR` removed (unless the test sets them), so the shell that runs
//! `cargo test` does not leak into what the binary prints.

use std::ffi::OsStr;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The demo on day 30 (2027-02-03), by an invented progress file: a test
/// running, two finished (one early) and one cancelled before it started.
pub const DAY30_PROGRESS: &str = "\
as_of: 2027-02-03
experiments:
  - id: search-ranking-v2
    state: running
    started: 2027-01-04
    share: 1.0
    units: 1000000
  - id: home-personal-recs
    state: finished
    started: 2027-01-04
    ended: 2027-01-17
  - id: home-static-hero
    state: finished
    started: 2027-01-18
    ended: 2027-01-31
  - id: pdp-bundles
    state: cancelled
    note: the bundle supplier pulled out
";

/// The `sluice` binary with its arguments, environment and working folder.
pub struct TestCommand {
    cmd: Command,
}

impl TestCommand {
    /// The binary with no arguments yet.
    pub fn new() -> TestCommand {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_sluice"));
        cmd.current_dir(env!("CARGO_MANIFEST_DIR"))
            .env_remove("COLUMNS")
            .env_remove("NO_COLOR");
        TestCommand { cmd }
    }

    /// Adds arguments.
    pub fn args<I, S>(&mut self, args: I) -> &mut TestCommand
    where
        I: IntoIterator<Item = S>,
        S: AsRef<OsStr>,
    {
        self.cmd.args(args);
        self
    }

    /// Sets an environment variable for the run.
    pub fn env(&mut self, key: &str, value: &str) -> &mut TestCommand {
        self.cmd.env(key, value);
        self
    }

    /// Runs the binary and returns what it did, whatever its exit code.
    pub fn output(&mut self) -> Output {
        self.cmd.output().expect("the sluice binary runs")
    }

    /// Runs the binary, insists on exit code 0, and returns stdout.
    pub fn stdout(&mut self) -> String {
        let out = self.assert_exit_code(0);
        String::from_utf8(out.stdout).expect("UTF-8 on stdout")
    }

    /// Runs the binary and insists on exit code `expected`; the panic shows
    /// the command and its stderr.
    pub fn assert_exit_code(&mut self, expected: i32) -> Output {
        let out = self.output();
        assert_eq!(
            out.status.code(),
            Some(expected),
            "{:?}: exit code\nstderr:\n{}",
            self.cmd,
            String::from_utf8_lossy(&out.stderr)
        );
        out
    }
}

/// A test command with these arguments.
pub fn cmd(args: &[&str]) -> TestCommand {
    let mut c = TestCommand::new();
    c.args(args);
    c
}

/// Runs the binary with these arguments, whatever its exit code.
pub fn sluice(args: &[&str]) -> Output {
    cmd(args).output()
}

/// A path relative to the crate root.
pub fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// Copies the demo's traffic histories into `dir/history`, so a copy of
/// the demo portfolio written to `dir` finds them beside it.
pub fn demo_history_into(dir: &Path) {
    std::fs::create_dir_all(dir.join("history")).unwrap();
    for f in std::fs::read_dir(repo("portfolios/history")).unwrap() {
        let f = f.unwrap().path();
        std::fs::copy(&f, dir.join("history").join(f.file_name().unwrap())).unwrap();
    }
}

/// The demo portfolio's path.
pub fn demo() -> String {
    repo("portfolios/demo.yaml").display().to_string()
}

/// Writes `text` to `name` in a new scratch folder, removed when the
/// returned guard drops; returns the guard and the file's path.
pub fn scratch_file(name: &str, text: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().expect("a scratch folder");
    let path = dir.path().join(name);
    std::fs::write(&path, text).expect("the scratch file is written");
    (dir, path)
}

/// Writes `bytes` to `name` in `dir`; returns the path as a string.
pub fn write_in(dir: &Path, name: &str, bytes: impl AsRef<[u8]>) -> String {
    let path = dir.join(name);
    std::fs::write(&path, bytes).expect("the file is written");
    path.display().to_string()
}

/// A path for `name` in the folder `area` under cargo's scratch folder for
/// integration tests, made if missing: for files a test module keeps.
pub fn scratch_path(area: &str, name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(area);
    std::fs::create_dir_all(&dir).expect("the scratch folder is made");
    dir.join(name)
}

/// Writes `text` to `name` under [`scratch_path`]`(area, ..)` and returns
/// the path. The text goes to a temporary file that is then renamed into
/// place, so tests that share a helper (and so a file name) never read a
/// half-written file while another test rewrites it with the same bytes.
pub fn write_scratch(area: &str, name: &str, text: &str) -> String {
    use std::io::Write;
    let path = scratch_path(area, name);
    let mut file = tempfile::NamedTempFile::new_in(path.parent().expect("a scratch folder"))
        .expect("a temporary scratch file");
    file.write_all(text.as_bytes())
        .expect("the scratch file is written");
    file.persist(&path)
        .expect("the scratch file is put in place");
    path.display().to_string()
}

/// Insists that `out` succeeded; returns its stdout.
pub fn stdout_of(out: &Output) -> String {
    assert!(
        out.status.success(),
        "exit {:?}: {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).expect("UTF-8 on stdout")
}

/// Undoes RFC 5545 §3.3.11 TEXT escaping (the `ical` parser leaves values
/// as written).
pub fn ics_unescape(s: &str) -> String {
    let mut out = String::new();
    let mut chars = s.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            match chars.next() {
                Some('n') | Some('N') => out.push('\n'),
                Some(other) => out.push(other),
                None => {}
            }
        } else {
            out.push(c);
        }
    }
    out
}
