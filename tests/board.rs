//! `sluice board`, run as the real binary (`--no-open --port 0`) and
//! driven over HTTP from a plain socket: the page, the API (edit, undo,
//! redo, the saved scenario, the plan), the safety refusals (no token, a
//! wrong Host, a foreign Origin, an oversized body, malformed JSON), a
//! saved scenario that plans byte for byte the same through
//! `sluice plan --scenario`, and a clean stop on Ctrl-C.

use crate::util::{cmd, repo};
use serde_json::Value;
use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

/// A running board, stopped with SIGINT when dropped.
struct Board {
    child: Option<Child>,
    /// `127.0.0.1:PORT`.
    addr: String,
    token: String,
}

impl Board {
    fn start(portfolio: &str) -> Board {
        Board::start_with(&[portfolio])
    }

    /// `sluice board ARGS --no-open --port 0`.
    fn start_with(args: &[&str]) -> Board {
        let mut child = Command::new(env!("CARGO_BIN_EXE_sluice"))
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .arg("board")
            .args(args)
            .args(["--no-open", "--port", "0"])
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("the board starts");
        let mut line = String::new();
        BufReader::new(child.stdout.take().unwrap())
            .read_line(&mut line)
            .unwrap();
        let url = line
            .trim()
            .strip_prefix("sluice board: http://")
            .unwrap_or_else(|| panic!("the address line: {line}"))
            .to_string();
        let (addr, token) = url.split_once("/?token=").expect("a token in the address");
        assert_eq!(token.len(), 32, "{token}");
        assert!(addr.starts_with("127.0.0.1:"), "{addr}");
        Board {
            child: Some(child),
            addr: addr.to_string(),
            token: token.to_string(),
        }
    }

    /// Sends one request with these extra header lines; (status, headers, body).
    fn raw(
        &self,
        method: &str,
        path: &str,
        headers: &[String],
        body: &[u8],
    ) -> (u16, String, Vec<u8>) {
        let mut s = TcpStream::connect(&self.addr).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(120))).unwrap();
        let mut head = format!(
            "{method} {path} HTTP/1.1\r\nConnection: close\r\nContent-Length: {}\r\n",
            body.len()
        );
        for h in headers {
            head.push_str(h);
            head.push_str("\r\n");
        }
        head.push_str("\r\n");
        s.write_all(head.as_bytes()).unwrap();
        // A refused body may close the socket before it is all sent.
        let _ = s.write_all(body);
        let mut out = Vec::new();
        let _ = s.read_to_end(&mut out);
        let split = out
            .windows(4)
            .position(|w| w == b"\r\n\r\n")
            .expect("a whole response");
        let head = String::from_utf8_lossy(&out[..split]).to_string();
        let status = head.split(' ').nth(1).unwrap().parse().unwrap();
        let mut body = out[split + 4..].to_vec();
        if head
            .to_ascii_lowercase()
            .contains("transfer-encoding: chunked")
        {
            body = dechunk(&body);
        }
        (status, head, body)
    }

    /// A request as the page sends it: its Host, its token.
    fn call(&self, method: &str, path: &str, body: &str) -> (u16, Value) {
        let headers = [
            format!("Host: {}", self.addr),
            format!("X-Sluice-Token: {}", self.token),
        ];
        let (status, _, body) = self.raw(method, path, &headers, body.as_bytes());
        (status, serde_json::from_slice(&body).unwrap_or(Value::Null))
    }

    fn text(&self, path: &str) -> String {
        let headers = [
            format!("Host: {}", self.addr),
            format!("X-Sluice-Token: {}", self.token),
        ];
        let (status, _, body) = self.raw("GET", path, &headers, b"");
        assert_eq!(status, 200, "{path}");
        String::from_utf8(body).unwrap()
    }

    /// Stops it with SIGINT; its exit code and stderr.
    fn stop(&mut self) -> (Option<i32>, String) {
        let child = self.child.take().unwrap();
        Command::new("kill")
            .args(["-INT", &child.id().to_string()])
            .status()
            .unwrap();
        child.wait_with_output_after_stdout_taken()
    }
}

trait WaitOutput {
    fn wait_with_output_after_stdout_taken(self) -> (Option<i32>, String);
}

impl WaitOutput for Child {
    fn wait_with_output_after_stdout_taken(mut self) -> (Option<i32>, String) {
        let mut err = String::new();
        if let Some(mut e) = self.stderr.take() {
            let _ = e.read_to_string(&mut err);
        }
        let status = self.wait().unwrap();
        (status.code(), err)
    }
}

impl Drop for Board {
    fn drop(&mut self) {
        if let Some(mut child) = self.child.take() {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

fn dechunk(mut b: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    while let Some(end) = b.windows(2).position(|w| w == b"\r\n") {
        let n = usize::from_str_radix(String::from_utf8_lossy(&b[..end]).trim(), 16).unwrap_or(0);
        if n == 0 {
            break;
        }
        out.extend_from_slice(&b[end + 2..end + 2 + n]);
        b = &b[end + 2 + n + 2..];
    }
    out
}

fn quickstart() -> String {
    repo("portfolios/quickstart.yaml").display().to_string()
}

fn test<'a>(view: &'a Value, id: &str) -> &'a Value {
    view["tests"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["id"] == id)
        .unwrap()
}

#[test]
fn requests_without_the_token_or_from_elsewhere_are_refused() {
    let b = Board::start(&quickstart());
    let host = format!("Host: {}", b.addr);
    let token = format!("X-Sluice-Token: {}", b.token);
    let error = |r: (u16, String, Vec<u8>)| -> (u16, String) {
        let v: Value = serde_json::from_slice(&r.2).unwrap_or(Value::Null);
        (r.0, v["error"].as_str().unwrap_or("").to_string())
    };
    // No token, a wrong one, the page without its query.
    let (s, e) = error(b.raw("GET", "/api/state", std::slice::from_ref(&host), b""));
    assert_eq!(s, 403);
    assert!(e.contains("token is missing or wrong"), "{e}");
    let wrong = format!("X-Sluice-Token: {}", "0".repeat(32));
    assert_eq!(
        b.raw("GET", "/api/state", &[host.clone(), wrong], b"").0,
        403
    );
    assert_eq!(b.raw("GET", "/", std::slice::from_ref(&host), b"").0, 403);
    // DNS rebinding: the right token under another name.
    let (s, e) = error(b.raw(
        "GET",
        "/api/state",
        &["Host: attacker.example".into(), token.clone()],
        b"",
    ));
    assert_eq!(s, 403);
    assert!(e.contains("Host"), "{e}");
    let port = b.addr.rsplit(':').next().unwrap();
    assert_eq!(
        b.raw(
            "GET",
            "/api/state",
            &[format!("Host: 127.0.0.2:{port}"), token.clone()],
            b""
        )
        .0,
        403
    );
    // A page on another site posting to the board.
    let (s, e) = error(b.raw(
        "POST",
        "/api/edit",
        &[
            host.clone(),
            token.clone(),
            "Origin: http://attacker.example".into(),
        ],
        br#"{"test": "bigger-photos", "leave_out": true}"#,
    ));
    assert_eq!(s, 403);
    assert!(e.contains("other sites"), "{e}");
    // Its own origin is fine.
    let own = format!("Origin: http://{}", b.addr);
    assert_eq!(
        b.raw(
            "GET",
            "/api/state",
            &[host.clone(), token.clone(), own],
            b""
        )
        .0,
        200
    );
    // Too large a body, malformed JSON, JSON that is no edit.
    let big = vec![b' '; 64 * 1024];
    let (s, e) = error(b.raw("POST", "/api/edit", &[host.clone(), token.clone()], &big));
    assert_eq!(s, 413);
    assert!(e.contains("larger than"), "{e}");
    let (s, e) = error(b.raw(
        "POST",
        "/api/edit",
        &[host.clone(), token.clone()],
        b"{\"test\": ",
    ));
    assert_eq!(s, 400);
    assert!(e.contains("not valid JSON"), "{e}");
    let (s, e) = error(b.raw(
        "POST",
        "/api/edit",
        &[host.clone(), token.clone()],
        br#"{"file": "/etc/passwd"}"#,
    ));
    assert_eq!(s, 400);
    assert!(e.contains("unknown field `file`"), "{e}");
    // Nothing else is served; the API keeps its methods.
    assert_eq!(
        b.raw("GET", "/etc/passwd", &[host.clone(), token.clone()], b"")
            .0,
        404
    );
    assert_eq!(
        b.raw("GET", "/api/edit", &[host.clone(), token.clone()], b"")
            .0,
        405
    );
    // None of it changed the state.
    let (_, v) = b.call("GET", "/api/state", "");
    assert_eq!(v["version"], 0);
}

#[test]
fn the_page_is_self_contained_and_locked_down() {
    let b = Board::start(&quickstart());
    let headers = [format!("Host: {}", b.addr)];
    let (status, head, body) = b.raw("GET", &format!("/?token={}", b.token), &headers, b"");
    assert_eq!(status, 200);
    let page = String::from_utf8(body).unwrap();
    let head = head.to_ascii_lowercase();
    assert!(
        head.contains("content-security-policy: default-src 'none'"),
        "{head}"
    );
    assert!(head.contains("connect-src 'self'"), "{head}");
    assert!(page.contains("<h1>Planning board</h1>"));
    // Its styles and script are inside it; it names no other address.
    assert!(!page.contains("src=\"http"), "no outside script or image");
    assert!(
        !page.contains("href=\"http"),
        "no outside style sheet or link"
    );
    assert!(page.contains("<script nonce="));
}

#[test]
fn edits_undo_and_redo_re_plan_and_say_what_moved() {
    let b = Board::start(&quickstart());
    let (s, v) = b.call("GET", "/api/state", "");
    assert_eq!(s, 200);
    let start_due = test(&v, "reviews-first")["result_date"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(v["report"].as_str().unwrap().starts_with("<!DOCTYPE html>"));
    let (s, v) = b.call(
        "POST",
        "/api/edit",
        r#"{"test": "bigger-photos", "leave_out": true}"#,
    );
    assert_eq!(s, 200, "{v}");
    assert_eq!(v["version"], 1);
    assert_eq!(test(&v, "bigger-photos")["left_out"], true);
    assert_eq!(
        test(&v, "bigger-photos")["reason"],
        "left out by the scenario"
    );
    let due = test(&v, "reviews-first")["result_date"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(due < start_due, "{due} comes before {start_due}");
    assert!(
        v["moved"]["headline"].as_str().unwrap().contains("earlier"),
        "{}",
        v["moved"]
    );
    assert!(v["report"].as_str().unwrap().contains("What moved"));
    assert_eq!(v["steps"][0], "bigger-photos: left out");
    // A bad edit is refused with its hint and changes nothing.
    let (s, e) = b.call(
        "POST",
        "/api/edit",
        r#"{"test": "bigger-photo", "priority": 2}"#,
    );
    assert_eq!(s, 422);
    assert!(
        e["error"]
            .as_str()
            .unwrap()
            .contains("did you mean `bigger-photos`?"),
        "{e}"
    );
    let (s, v) = b.call("POST", "/api/undo", "");
    assert_eq!(s, 200);
    assert_eq!(v["version"], 2);
    assert_eq!(v["can_redo"], true);
    assert_eq!(test(&v, "reviews-first")["result_date"], start_due.as_str());
    let (_, v) = b.call("POST", "/api/redo", "");
    assert_eq!(test(&v, "bigger-photos")["left_out"], true);
    let (s, e) = b.call("POST", "/api/redo", "");
    assert_eq!(s, 422);
    assert!(e["error"].as_str().unwrap().contains("nothing to redo"));
}

#[test]
fn a_saved_scenario_plans_byte_for_byte_the_same_on_the_command_line() {
    let b = Board::start(&quickstart());
    for edit in [
        r#"{"test": "delivery-dates", "leave_out": true}"#,
        r#"{"pool": "product", "scale": 0.7, "from": "2027-02-01"}"#,
        r#"{"test": "reviews-first", "start": "2027-03-01"}"#,
        r#"{"test": "bigger-photos", "mde": 0.07, "priority": 5}"#,
        r#"{"test": "one-page-checkout", "max_share": 0.5, "deadline": "2027-03-14"}"#,
    ] {
        let (s, v) = b.call("POST", "/api/edit", edit);
        assert_eq!(s, 200, "{edit}: {v}");
    }
    let yaml = b.text("/api/scenario");
    assert!(yaml.starts_with("# A sluice scenario"), "{yaml}");
    let from_board = b.text("/api/plan.json");
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("board");
    std::fs::create_dir_all(&dir).unwrap();
    let saved = dir.join("scenario.yaml");
    std::fs::write(&saved, &yaml).unwrap();
    let from_cli = cmd(&[
        "plan",
        &quickstart(),
        "--scenario",
        saved.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
    ])
    .stdout();
    assert!(
        from_board == from_cli,
        "the board's plan and the command line's differ"
    );
    let plan: Value = serde_json::from_str(&from_cli).unwrap();
    let pinned = plan["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == "reviews-first")
        .unwrap();
    assert_eq!(pinned["start"], "2027-03-01");
}

#[test]
fn ctrl_c_stops_it_cleanly() {
    let mut b = Board::start(&quickstart());
    assert_eq!(b.call("GET", "/api/state", "").0, 200);
    let (code, err) = b.stop();
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("sluice board: stopped"), "{err}");
}

#[test]
fn a_port_in_use_is_an_error_that_says_what_to_do() {
    let b = Board::start(&quickstart());
    let port = b.addr.rsplit(':').next().unwrap().to_string();
    let out = cmd(&["board", &quickstart(), "--no-open", "--port", &port]).assert_exit_code(1);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("the planning board cannot start"), "{err}");
    assert!(err.contains("--port 0"), "{err}");
}

#[test]
fn a_board_from_progress_re_plans_and_the_cli_agrees() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("board");
    std::fs::create_dir_all(&dir).unwrap();
    let progress = dir.join("progress.yaml");
    std::fs::write(
        &progress,
        "experiments:\n  - {id: bigger-photos, state: running, started: 2027-01-04, share: 0.5, units: 20000}\n",
    )
    .unwrap();
    let progress = progress.to_str().unwrap();
    let b = Board::start_with(&[
        &quickstart(),
        "--progress",
        progress,
        "--today",
        "2027-02-01",
    ]);
    let (_, v) = b.call("GET", "/api/state", "");
    assert_eq!(v["replan"], true);
    assert_eq!(v["today"], "2027-02-01");
    assert_eq!(test(&v, "bigger-photos")["status"], "running");
    let (s, v) = b.call(
        "POST",
        "/api/edit",
        r#"{"test": "bigger-photos", "leave_out": true}"#,
    );
    assert_eq!(s, 200, "{v}");
    let stopped = test(&v, "bigger-photos");
    assert_eq!(stopped["status"], "cancelled");
    assert_eq!(stopped["reason"], "cancelled: left out by the scenario");
    let saved = dir.join("replan-scenario.yaml");
    std::fs::write(&saved, b.text("/api/scenario")).unwrap();
    let from_cli = cmd(&[
        "replan",
        &quickstart(),
        "--progress",
        progress,
        "--today",
        "2027-02-01",
        "--scenario",
        saved.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
    ])
    .stdout();
    assert!(
        b.text("/api/plan.json") == from_cli,
        "the board's re-plan and the command line's differ"
    );
}

#[test]
fn progress_needs_today() {
    let out =
        cmd(&["board", &quickstart(), "--no-open", "--progress", "p.yaml"]).assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("--today"));
}

#[test]
fn edits_sent_at_once_all_apply_and_stale_plans_are_dropped() {
    let b = std::sync::Arc::new(Board::start(&quickstart()));
    let edits = [
        r#"{"test": "bigger-photos", "priority": 2}"#,
        r#"{"test": "reviews-first", "priority": 3}"#,
        r#"{"test": "delivery-dates", "priority": 4}"#,
        r#"{"pool": "checkout", "scale": 0.9}"#,
    ];
    let answers: Vec<Value> = std::thread::scope(|s| {
        let handles: Vec<_> = edits
            .iter()
            .map(|e| {
                let b = b.clone();
                s.spawn(move || {
                    let (status, v) = b.call("POST", "/api/edit", e);
                    assert_eq!(status, 200, "{v}");
                    v
                })
            })
            .collect();
        handles.into_iter().map(|h| h.join().unwrap()).collect()
    });
    // Every answer is either the plan of its own state or says a later
    // state replaced it; no two full answers share a version.
    let mut versions = Vec::new();
    for a in &answers {
        if a["superseded"] == true {
            assert!(a["version"].as_u64() < a["latest"].as_u64(), "{a}");
        } else {
            versions.push(a["version"].as_u64().unwrap());
        }
    }
    let count = versions.len();
    versions.sort_unstable();
    versions.dedup();
    assert_eq!(versions.len(), count);
    // All four applied, each once.
    let (_, v) = b.call("GET", "/api/state", "");
    assert_eq!(v["version"], 4);
    assert_eq!(v["steps"].as_array().unwrap().len(), 4);
    assert_eq!(test(&v, "delivery-dates")["priority"], 4.0);
    assert_eq!(test(&v, "bigger-photos")["priority"], 2.0);
}
