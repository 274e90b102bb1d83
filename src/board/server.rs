//! The board's HTTP side (tiny_http): a few worker threads on a socket
//! bound to 127.0.0.1, one page and a small JSON API.
//!
//! Safe by default:
//! - it listens on the loopback address only;
//! - every request carries the random token (`?token=` on the page's
//!   address, the `X-Sluice-Token` header on API calls), compared in
//!   constant time;
//! - the `Host` header must be the server's own address and an `Origin`,
//!   when sent, its own origin, so a page elsewhere cannot reach the board
//!   through DNS rebinding or a cross-site request;
//! - request bodies are limited to [`BODY_LIMIT`] bytes; malformed JSON is
//!   a 400 with serde's message;
//! - no request names a file: the board reads only what the command line
//!   gave it and writes nothing (a saved scenario is sent to the page,
//!   which offers it as a download);
//! - changes are applied in the order they arrive, under one lock; a plan
//!   worked out for a state that a later change has already replaced is
//!   dropped (its answer says `superseded`) and never cached;
//! - the page is served with a content security policy that allows no
//!   network request beyond this server and no script but its own.
//!
//! API (JSON unless said): `GET /api/state`; `POST /api/edit` with one
//! edit in the shape of a scenario file's entry; `POST /api/undo`;
//! `POST /api/redo`; `GET /api/scenario` (the scenario YAML);
//! `GET /api/plan.json` (the plan as `sluice plan --format json
//! --no-timing` gives it).

use super::{Base, History};
use crate::render::{self, Format, RenderOptions};
use crate::scenario::RawEdit;
use std::io::Read;
use std::net::SocketAddr;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Duration;
use tiny_http::{Header, Method, Request, Response, Server};

/// The largest request body accepted, in bytes.
pub const BODY_LIMIT: usize = 16 * 1024;

/// Worker threads answering requests.
const WORKERS: usize = 4;

/// The page, its styles and its script, embedded in the binary.
const PAGE: &str = include_str!("page.html");
const STYLE: &str = include_str!("page.css");
const SCRIPT: &str = include_str!("page.js");

/// A running board: its address and token.
pub struct Board {
    server: Arc<Server>,
    shared: Arc<Shared>,
    /// The socket it listens on.
    pub addr: SocketAddr,
    stop: Arc<AtomicBool>,
}

/// What the workers share.
struct Shared {
    base: Base,
    token: String,
    nonce: String,
    addr: SocketAddr,
    state: Mutex<State>,
}

/// The mutable state: the edits and the last answer worked out.
struct State {
    history: History,
    /// The version the cached answer is for, and its JSON bytes.
    cached: Option<(u64, Arc<Vec<u8>>)>,
}

/// Why the board could not start.
#[derive(Debug)]
pub enum StartError {
    /// The port could not be bound.
    Bind(String),
    /// No random token could be drawn from the system.
    Random(String),
}

impl std::fmt::Display for StartError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            StartError::Bind(e) => write!(f, "cannot listen on 127.0.0.1: {e}"),
            StartError::Random(e) => write!(f, "cannot draw a random token: {e}"),
        }
    }
}

/// `bytes` random bytes from the system as lower-case hex.
fn random_hex(bytes: usize) -> Result<String, StartError> {
    let mut buf = vec![0u8; bytes];
    getrandom::fill(&mut buf).map_err(|e| StartError::Random(e.to_string()))?;
    Ok(buf.iter().map(|b| format!("{b:02x}")).collect())
}

impl Board {
    /// Binds 127.0.0.1:`port` (0 picks a free port) with a fresh token.
    pub fn bind(base: Base, port: u16) -> Result<Board, StartError> {
        let server =
            Server::http(("127.0.0.1", port)).map_err(|e| StartError::Bind(e.to_string()))?;
        let addr = server
            .server_addr()
            .to_ip()
            .ok_or_else(|| StartError::Bind("no IP address".into()))?;
        let shared = Shared {
            base,
            token: random_hex(16)?,
            nonce: random_hex(16)?,
            addr,
            state: Mutex::new(State {
                history: History::default(),
                cached: None,
            }),
        };
        Ok(Board {
            server: Arc::new(server),
            shared: Arc::new(shared),
            addr,
            stop: Arc::new(AtomicBool::new(false)),
        })
    }

    /// The page's address, token included.
    pub fn url(&self) -> String {
        format!("http://{}/?token={}", self.addr, self.shared.token)
    }

    /// A flag that stops [`Board::run`] when set (Ctrl-C sets it).
    pub fn stop_flag(&self) -> Arc<AtomicBool> {
        self.stop.clone()
    }

    /// Answers requests until the stop flag is set, then returns once
    /// every worker has finished its request.
    pub fn run(self) {
        let workers: Vec<_> = (0..WORKERS)
            .map(|_| {
                let server = self.server.clone();
                let shared = self.shared.clone();
                let stop = self.stop.clone();
                std::thread::spawn(move || {
                    while !stop.load(Ordering::SeqCst) {
                        match server.recv_timeout(Duration::from_millis(100)) {
                            Ok(Some(request)) => shared.answer(request),
                            Ok(None) => {}
                            Err(_) => break,
                        }
                    }
                })
            })
            .collect();
        for w in workers {
            let _ = w.join();
        }
    }
}

/// An answer before it is sent.
struct Answer {
    status: u16,
    content_type: &'static str,
    body: Vec<u8>,
    extra: Vec<(&'static str, String)>,
}

impl Answer {
    fn json(status: u16, body: Vec<u8>) -> Answer {
        Answer {
            status,
            content_type: "application/json; charset=utf-8",
            body,
            extra: Vec::new(),
        }
    }

    /// An error as `{"error": message}`.
    fn error(status: u16, message: &str) -> Answer {
        let body = serde_json::to_vec(&serde_json::json!({ "error": message })).unwrap_or_default();
        Answer::json(status, body)
    }
}

/// Whether two strings are equal, in time that depends only on their
/// lengths.
fn same_secret(a: &str, b: &str) -> bool {
    a.len() == b.len()
        && a.bytes()
            .zip(b.bytes())
            .fold(0u8, |acc, (x, y)| acc | (x ^ y))
            == 0
}

/// The value of the header `name`, if sent.
fn header<'r>(request: &'r Request, name: &'static str) -> Option<&'r str> {
    request
        .headers()
        .iter()
        .find(|h| h.field.equiv(name))
        .map(|h| h.value.as_str())
}

impl Shared {
    /// Answers one request; a client that went away is not an error.
    fn answer(&self, mut request: Request) {
        let answer = self.route(&mut request);
        let mut response = Response::from_data(answer.body).with_status_code(answer.status);
        let mut headers = vec![
            ("Content-Type", answer.content_type.to_string()),
            ("Cache-Control", "no-store".to_string()),
            ("X-Content-Type-Options", "nosniff".to_string()),
            ("Referrer-Policy", "no-referrer".to_string()),
            ("X-Frame-Options", "DENY".to_string()),
        ];
        headers.extend(answer.extra);
        for (name, value) in headers {
            if let Ok(h) = Header::from_bytes(name.as_bytes(), value.as_bytes()) {
                response.add_header(h);
            }
        }
        let _ = request.respond(response);
    }

    /// The safety checks, then the route.
    fn route(&self, request: &mut Request) -> Answer {
        let port = self.addr.port();
        let hosts = [format!("127.0.0.1:{port}"), format!("localhost:{port}")];
        match header(request, "Host") {
            Some(h) if hosts.iter().any(|ok| ok.eq_ignore_ascii_case(h)) => {}
            _ => return Answer::error(403, "the Host header is not this board's address"),
        }
        if let Some(origin) = header(request, "Origin") {
            if !hosts
                .iter()
                .any(|ok| format!("http://{ok}").eq_ignore_ascii_case(origin))
            {
                return Answer::error(403, "requests from other sites are refused");
            }
        }
        let url = request.url().to_string();
        let (path, query) = url.split_once('?').unwrap_or((&url, ""));
        let from_query = query
            .split('&')
            .find_map(|kv| kv.strip_prefix("token="))
            .unwrap_or("");
        let token = header(request, "X-Sluice-Token").unwrap_or(from_query);
        if !same_secret(token, &self.token) {
            return Answer::error(
                403,
                "the token is missing or wrong; open the address the board printed",
            );
        }
        let method = request.method().clone();
        match (path, method) {
            ("/", Method::Get) => self.page(),
            ("/api/state", Method::Get) => self.state(),
            ("/api/edit", Method::Post) => match read_body(request) {
                Ok(body) => match serde_json::from_slice::<RawEdit>(&body) {
                    Ok(raw) => self.change(|h, base| h.edit(base, &raw)),
                    Err(e) => {
                        Answer::error(400, &format!("the edit is not valid JSON for an edit: {e}"))
                    }
                },
                Err(a) => a,
            },
            ("/api/undo", Method::Post) => self.change(|h, _| {
                if h.undo() {
                    Ok(())
                } else {
                    Err("there is nothing to undo".into())
                }
            }),
            ("/api/redo", Method::Post) => self.change(|h, _| {
                if h.redo() {
                    Ok(())
                } else {
                    Err("there is nothing to redo".into())
                }
            }),
            ("/api/scenario", Method::Get) => {
                let edits = self.lock().history.snapshot().edits;
                Answer {
                    status: 200,
                    content_type: "application/yaml; charset=utf-8",
                    body: self.base.scenario_yaml(&edits).into_bytes(),
                    extra: vec![(
                        "Content-Disposition",
                        "attachment; filename=\"scenario.yaml\"".to_string(),
                    )],
                }
            }
            ("/api/plan.json", Method::Get) => {
                let edits = self.lock().history.snapshot().edits;
                match self.base.plan(&edits) {
                    Ok(plan) => {
                        match render::render(&plan, Format::Json, &RenderOptions::for_file()) {
                            Ok(bytes) => Answer::json(200, bytes),
                            Err(e) => Answer::error(500, &e.to_string()),
                        }
                    }
                    Err(e) => Answer::error(500, &e.to_string()),
                }
            }
            (
                "/" | "/api/state" | "/api/edit" | "/api/undo" | "/api/redo" | "/api/scenario"
                | "/api/plan.json",
                _,
            ) => Answer::error(405, "this address does not take that method"),
            _ => Answer::error(404, "there is nothing at this address"),
        }
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, State> {
        // A worker that panicked leaves the state as it was: go on with it.
        self.state.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// The page, with its styles, script and nonce.
    fn page(&self) -> Answer {
        let html = PAGE
            .replace("{{STYLE}}", STYLE)
            .replace("{{SCRIPT}}", SCRIPT)
            .replace("{{NONCE}}", &self.nonce);
        Answer {
            status: 200,
            content_type: "text/html; charset=utf-8",
            body: html.into_bytes(),
            extra: vec![(
                "Content-Security-Policy",
                format!(
                    "default-src 'none'; script-src 'nonce-{}'; style-src 'unsafe-inline'; \
                     img-src data:; connect-src 'self'; base-uri 'none'; form-action 'none'; \
                     frame-ancestors 'none'",
                    self.nonce
                ),
            )],
        }
    }

    /// The current state's answer, planned if not cached.
    fn state(&self) -> Answer {
        let snapshot = self.lock().history.snapshot();
        self.planned(snapshot)
    }

    /// Applies a change under the lock (in arrival order), then plans the
    /// new state outside it.
    fn change(&self, f: impl FnOnce(&mut History, &Base) -> Result<(), String>) -> Answer {
        let snapshot = {
            let mut state = self.lock();
            if let Err(message) = f(&mut state.history, &self.base) {
                return Answer::error(422, &message);
            }
            state.history.snapshot()
        };
        self.planned(snapshot)
    }

    /// The answer for `snapshot`: from the cache, or planned; dropped
    /// when a later change has replaced it meanwhile.
    fn planned(&self, snapshot: super::Snapshot) -> Answer {
        let superseded = |latest: u64| {
            let body = serde_json::json!({
                "superseded": true,
                "version": snapshot.version,
                "latest": latest,
            });
            Answer::json(200, serde_json::to_vec(&body).unwrap_or_default())
        };
        {
            let state = self.lock();
            if let Some((v, bytes)) = &state.cached {
                if *v == snapshot.version {
                    return Answer::json(200, bytes.to_vec());
                }
            }
            if state.history.version() != snapshot.version {
                return superseded(state.history.version());
            }
        }
        let plan = match self.base.plan(&snapshot.edits) {
            Ok(plan) => plan,
            Err(e) => return Answer::error(422, &e.to_string()),
        };
        let view = self.base.view(&snapshot, &plan);
        let bytes = Arc::new(serde_json::to_vec(&view).unwrap_or_default());
        let mut state = self.lock();
        if state.history.version() != snapshot.version {
            return superseded(state.history.version());
        }
        state.cached = Some((snapshot.version, bytes.clone()));
        Answer::json(200, bytes.to_vec())
    }
}

/// The request's body, at most [`BODY_LIMIT`] bytes; a larger one is a
/// 413 without being read further.
fn read_body(request: &mut Request) -> Result<Vec<u8>, Answer> {
    let too_large = || {
        Answer::error(
            413,
            &format!("the request body is larger than {BODY_LIMIT} bytes"),
        )
    };
    if request.body_length().is_some_and(|n| n > BODY_LIMIT) {
        return Err(too_large());
    }
    let mut body = Vec::new();
    request
        .as_reader()
        .take(BODY_LIMIT as u64 + 1)
        .read_to_end(&mut body)
        .map_err(|e| Answer::error(400, &format!("cannot read the request body: {e}")))?;
    if body.len() > BODY_LIMIT {
        return Err(too_large());
    }
    Ok(body)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn secrets_compare_whole() {
        assert!(same_secret("abc", "abc"));
        assert!(!same_secret("abc", "abd"));
        assert!(!same_secret("abc", "ab"));
        assert!(!same_secret("", "a"));
    }

    #[test]
    fn tokens_are_fresh_hex() {
        let a = random_hex(16).unwrap();
        let b = random_hex(16).unwrap();
        assert_eq!(a.len(), 32);
        assert!(a.bytes().all(|c| c.is_ascii_hexdigit()));
        assert_ne!(a, b);
    }
}
