//! Safe files (issue 9): `--out` never replaces something that is not a
//! regular file, never writes over a file the command read, and refuses a
//! read-only target; the loaders point at the right place for bytes YAML
//! does not allow, a second document, old Mac line ends and text that is
//! not UTF-8; whole-number counts refuse fractions; ids refuse control
//! characters; `replan --today` before the window is an error.

use crate::util::{cmd, repo, write_in};

fn quickstart() -> String {
    repo("portfolios/quickstart.yaml").display().to_string()
}

fn quickstart_text() -> String {
    std::fs::read_to_string(quickstart()).unwrap()
}

fn stderr_of(args: &[&str], code: i32) -> String {
    String::from_utf8(cmd(args).assert_exit_code(code).stderr).unwrap()
}

const PROGRESS: &str = "\
as_of: 2027-01-18
experiments:
  - id: bigger-photos
    state: running
    started: 2027-01-04
    share: 1.0
    units: 100000
";

// ------------------------------------------------------------- --out

#[cfg(unix)]
#[test]
fn out_onto_a_fifo_writes_into_it_and_keeps_the_fifo() {
    use std::os::unix::fs::FileTypeExt;
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("plan.pipe");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap();
    assert!(made.success());
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
    };
    let f = fifo.display().to_string();
    cmd(&["plan", &quickstart(), "--format", "csv", "--out", &f]).assert_exit_code(0);
    let got = reader.join().unwrap();
    assert!(got.starts_with("id,title,"), "{got}");
    let meta = std::fs::symlink_metadata(&fifo).unwrap();
    assert!(meta.file_type().is_fifo(), "the FIFO is still a FIFO");
}

/// A private copy of /dev/null (character device 1,3), made with mknod in
/// a temporary folder so that the machine's own /dev/null is never at
/// risk; needs the right to make devices (root in the test machine).
#[cfg(unix)]
#[test]
fn out_onto_a_character_device_writes_into_it_and_keeps_the_device() {
    use std::os::unix::fs::FileTypeExt;
    let dir = tempfile::tempdir().unwrap();
    let dev = dir.path().join("null");
    let made = std::process::Command::new("mknod")
        .arg(&dev)
        .args(["c", "1", "3"])
        .status()
        .unwrap();
    if !made.success() {
        eprintln!("mknod is not permitted here; the FIFO test covers streams");
        return;
    }
    let d = dev.display().to_string();
    cmd(&["plan", &quickstart(), "--format", "json", "--out", &d]).assert_exit_code(0);
    let meta = std::fs::symlink_metadata(&dev).unwrap();
    assert!(
        meta.file_type().is_char_device(),
        "still a device: {meta:?}"
    );
    assert_eq!(meta.len(), 0);
}

#[test]
fn out_never_writes_over_the_progress_file_or_the_previous_plan() {
    let dir = tempfile::tempdir().unwrap();
    let progress = write_in(dir.path(), "progress.yaml", PROGRESS.as_bytes());
    let previous = dir.path().join("plan.json");
    let prev = previous.display().to_string();
    cmd(&["plan", &quickstart(), "--format", "json", "--out", &prev]).assert_exit_code(0);
    let before = std::fs::read(&previous).unwrap();
    let replan = |out: &str| {
        stderr_of(
            &[
                "replan",
                &quickstart(),
                "--progress",
                &progress,
                "--today",
                "2027-01-18",
                "--previous",
                &prev,
                "--format",
                "json",
                "--out",
                out,
            ],
            1,
        )
    };
    let err = replan(&progress);
    assert!(
        err.contains("refusing to write") && err.contains("input file"),
        "{err}"
    );
    assert_eq!(std::fs::read_to_string(&progress).unwrap(), PROGRESS);
    let err = replan(&prev);
    assert!(err.contains("refusing to write"), "{err}");
    assert_eq!(std::fs::read(&previous).unwrap(), before);
}

#[cfg(unix)]
#[test]
fn out_refuses_a_read_only_file_and_leaves_it() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let out = write_in(dir.path(), "plan.md", b"kept");
    std::fs::set_permissions(&out, std::fs::Permissions::from_mode(0o444)).unwrap();
    let err = stderr_of(&["plan", &quickstart(), "--format", "md", "--out", &out], 1);
    assert!(err.contains("read-only"), "{err}");
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "kept");
}

// ------------------------------------------------------------- loaders

/// The error's `--> file:line:column` position.
fn position(err: &str) -> (usize, usize) {
    let at = err
        .lines()
        .find_map(|l| l.trim_start().strip_prefix("--> "))
        .unwrap_or_else(|| panic!("no position in {err}"));
    let mut parts = at.rsplitn(3, ':');
    let column = parts.next().unwrap().parse().unwrap();
    let line = parts.next().unwrap().parse().unwrap();
    (line, column)
}

#[test]
fn a_nul_or_control_byte_is_reported_at_its_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let text = quickstart_text();
    for (byte, name) in [('\0', "NUL"), ('\u{7}', "U+0007"), ('\u{1b}', "U+001B")] {
        // Inside `label: Product pages` (line 9), after `label: Pro`.
        let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
        assert_eq!(lines[8], "    label: Product pages");
        lines[8].insert(14, byte);
        let path = write_in(dir.path(), "p.yaml", lines.join("\n").as_bytes());
        let err = stderr_of(&["check", &path], 2);
        assert!(err.contains(name), "{err}");
        assert_eq!(position(&err), (9, 15), "{err}");
        // The line is shown, but not the byte itself.
        assert!(err.contains("label: Pro\u{fffd}duct pages"), "{err}");
        assert!(!err.contains(byte), "{err:?}");
    }
}

#[test]
fn a_second_yaml_document_is_reported_at_its_marker() {
    let dir = tempfile::tempdir().unwrap();
    let text = quickstart_text();
    let lines = text.lines().count();
    for doc in [
        format!("{text}---\nname: again\n"),
        format!("---\n{text}---\nname: again\n"),
    ] {
        let path = write_in(dir.path(), "p.yaml", doc.as_bytes());
        let err = stderr_of(&["check", &path], 2);
        assert!(err.contains("second YAML document"), "{err}");
        let want = doc.lines().count() - 1;
        assert!(want > lines);
        assert_eq!(position(&err).0, want, "{err}");
    }
}

#[test]
fn old_mac_line_ends_read_as_line_breaks() {
    let dir = tempfile::tempdir().unwrap();
    let text = quickstart_text();
    let lf = write_in(dir.path(), "lf.yaml", text.as_bytes());
    let cr = write_in(dir.path(), "cr.yaml", text.replace('\n', "\r").as_bytes());
    let plan = |p: &str| cmd(&["plan", p, "--format", "csv", "--no-timing"]).stdout();
    assert_eq!(plan(&cr), plan(&lf));
    // And a problem in such a file is found at its line.
    let bad = text.replace("max_concurrent: 3", "max_concurrent: three");
    let cr_bad = write_in(
        dir.path(),
        "cr-bad.yaml",
        bad.replace('\n', "\r").as_bytes(),
    );
    let err = stderr_of(&["check", &cr_bad], 2);
    assert!(!err.contains("empty"), "{err}");
    assert_eq!(position(&err).0, 13, "{err}");
}

#[test]
fn a_progress_file_that_is_not_utf8_gives_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = PROGRESS
        .replace("state: running", "state: runnin\u{e9}")
        .into_bytes();
    // Latin-1 é instead of UTF-8's two bytes, on line 4.
    let at = bytes.windows(2).position(|w| w == [0xc3, 0xa9]).unwrap();
    bytes.splice(at..at + 2, [0xe9]);
    let progress = write_in(dir.path(), "progress.yaml", &bytes);
    let err = stderr_of(
        &[
            "replan",
            &quickstart(),
            "--progress",
            &progress,
            "--today",
            "2027-01-18",
        ],
        2,
    );
    assert!(err.contains("not UTF-8"), "{err}");
    assert_eq!(position(&err), (4, 18), "{err}");
}

#[test]
fn whole_number_counts_refuse_fractions() {
    let dir = tempfile::tempdir().unwrap();
    let progress = write_in(
        dir.path(),
        "progress.yaml",
        PROGRESS
            .replace("units: 100000", "units: 100000.5")
            .as_bytes(),
    );
    let err = stderr_of(
        &[
            "replan",
            &quickstart(),
            "--progress",
            &progress,
            "--today",
            "2027-01-18",
        ],
        2,
    );
    assert!(
        err.contains("`units` is 100000.5") && err.contains("whole number"),
        "{err}"
    );
    assert_eq!(position(&err).0, 7, "{err}");
}

#[test]
fn replan_today_before_the_window_is_an_error_as_for_plan() {
    let dir = tempfile::tempdir().unwrap();
    let progress = write_in(
        dir.path(),
        "progress.yaml",
        "as_of: 2027-01-02\nexperiments: []\n".as_bytes(),
    );
    let err = stderr_of(
        &[
            "replan",
            &quickstart(),
            "--progress",
            &progress,
            "--today",
            "2027-01-02",
        ],
        2,
    );
    assert!(
        err.contains("2027-01-02") && err.contains("outside the window"),
        "{err}"
    );
    let plan_err = stderr_of(&["plan", &quickstart(), "--today", "2027-01-02"], 2);
    assert_eq!(err, plan_err);
}

#[test]
fn ids_with_line_breaks_or_control_characters_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let text = quickstart_text();
    for (from, to, key) in [
        (
            "- id: bigger-photos",
            "- id: \"bigger\\nphotos\"",
            "experiments[0].id",
        ),
        ("- id: checkout", "- id: \"check\\tout\"", "pools[1].id"),
        ("name: Larkspur", "id: \"shop\\rq1\"\nname: Larkspur", "id"),
    ] {
        let bad = text.replacen(from, to, 1);
        assert_ne!(bad, text);
        let path = write_in(dir.path(), "p.yaml", bad.as_bytes());
        let err = stderr_of(&["check", &path], 2);
        assert!(err.contains("control character"), "{key}: {err}");
        assert!(err.contains(&format!("key: {key}")), "{key}: {err}");
    }
}
