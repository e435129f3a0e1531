//! Test setup for the HTTP server: a small Coq library of our own (a scheduler's run queue),
//! `quarry build` on it, `quarry serve` on an ephemeral loopback port, and a blocking HTTP
//! client. Every process started here is ended by its own id when its handle drops.

#![allow(dead_code)]

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// The quarry binary under test.
pub fn quarry_bin() -> &'static str {
    env!("CARGO_BIN_EXE_quarry")
}

/// Runs the quarry binary to completion.
pub fn quarry(args: &[&str]) -> Output {
    Command::new(quarry_bin())
        .args(args)
        .env("NO_COLOR", "1")
        .output()
        .expect("the quarry binary runs")
}

pub const QUEUE_V: &str = r#"(* A scheduler's run queue: tasks waiting for a processor. *)
Require Import Coq.Arith.PeanoNat.

Inductive task : Type :=
| Task (id : nat) (priority : nat).

Definition priority (t : task) : nat :=
  match t with Task _ p => p end.

Inductive queue : Type :=
| empty : queue
| push : task -> queue -> queue.

Fixpoint size (q : queue) : nat :=
  match q with
  | empty => 0
  | push _ rest => S (size rest)
  end.

Definition is_empty (q : queue) : bool :=
  match q with
  | empty => true
  | push _ _ => false
  end.

Lemma size_push : forall t q, size (push t q) = S (size q).
Proof. intros t q. simpl. reflexivity. Qed.

Lemma is_empty_size : forall q, is_empty q = true -> size q = 0.
Proof. intros q H. destruct q; simpl in *; congruence. Qed.

Lemma size_push_positive : forall t q, 0 < size (push t q).
Proof. intros t q. rewrite size_push. apply Nat.lt_0_succ. Qed.
"#;

pub const POLICY_V: &str = r#"(* Which task runs next. *)
From Sched Require Import Queue.

Definition pick (q : queue) : option task :=
  match q with
  | empty => None
  | push t _ => Some t
  end.

Lemma pick_push : forall t q, pick (push t q) = Some t.
Proof. reflexivity. Qed.

Lemma pick_none_is_empty : forall q, pick q = None -> is_empty q = true.
Proof. intros q H. destruct q. reflexivity. discriminate. Qed.
"#;

/// A lemma appended to `Policy.v` to make a second, different build.
pub const POLICY_EXTRA: &str = r#"
Lemma pick_some_size : forall q t, pick q = Some t -> 0 < size q.
Proof. intros q t H. destruct q. discriminate. apply size_push_positive. Qed.
"#;

/// Writes the scheduler library under `dir` (a `_CoqProject` mapping `theories` to `Sched`).
pub fn write_scheduler_library(dir: &Path) {
    let theories = dir.join("theories");
    std::fs::create_dir_all(&theories).unwrap();
    std::fs::write(dir.join("_CoqProject"), "-R theories Sched\n").unwrap();
    std::fs::write(theories.join("Queue.v"), QUEUE_V).unwrap();
    std::fs::write(theories.join("Policy.v"), POLICY_V).unwrap();
}

/// `quarry build LIB --out OUT`, asserting success.
pub fn build(lib: &Path, out: &Path) {
    let o = quarry(&[
        "build",
        lib.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(
        o.status.success(),
        "quarry build failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
}

/// A library and its index in a temporary folder.
pub struct Indexed {
    pub tmp: tempfile::TempDir,
    pub lib: PathBuf,
    pub index: PathBuf,
}

/// The scheduler library, built.
pub fn scheduler_index() -> Indexed {
    let tmp = tempfile::tempdir().unwrap();
    let lib = tmp.path().join("sched");
    write_scheduler_library(&lib);
    let index = tmp.path().join("index");
    build(&lib, &index);
    Indexed { tmp, lib, index }
}

/// A running `quarry serve`.
pub struct Server {
    child: Child,
    pub base: String,
    stderr: Arc<Mutex<String>>,
}

impl Server {
    /// Starts `quarry serve INDEX --listen 127.0.0.1:0 EXTRA...` and waits until it is ready.
    pub fn start(index: &Path, extra: &[&str]) -> Server {
        let mut args = vec![
            "serve".to_string(),
            index.to_str().unwrap().to_string(),
            "--listen".to_string(),
            "127.0.0.1:0".to_string(),
        ];
        args.extend(extra.iter().map(|s| s.to_string()));
        Server::start_with(&args, &[])
    }

    /// Starts `quarry ARGS` with extra environment variables and waits until it is ready.
    pub fn start_with(args: &[String], env: &[(&str, &str)]) -> Server {
        let mut cmd = Command::new(quarry_bin());
        cmd.args(args)
            .stdin(Stdio::null())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped());
        for (k, v) in env {
            cmd.env(k, v);
        }
        let mut child = cmd.spawn().expect("quarry serve starts");
        let stderr = Arc::new(Mutex::new(String::new()));
        let mut err_pipe = child.stderr.take().unwrap();
        let sink = stderr.clone();
        std::thread::spawn(move || {
            let mut buf = [0u8; 4096];
            while let Ok(n) = err_pipe.read(&mut buf) {
                if n == 0 {
                    break;
                }
                sink.lock()
                    .unwrap()
                    .push_str(&String::from_utf8_lossy(&buf[..n]));
            }
        });
        let stdout = child.stdout.take().unwrap();
        let (tx, rx) = std::sync::mpsc::channel::<String>();
        std::thread::spawn(move || {
            for line in BufReader::new(stdout).lines().map_while(Result::ok) {
                if tx.send(line).is_err() {
                    break;
                }
            }
        });
        let deadline = Instant::now() + Duration::from_secs(120);
        let mut seen = Vec::new();
        loop {
            let left = deadline.saturating_duration_since(Instant::now());
            match rx.recv_timeout(left) {
                Ok(line) => {
                    if let Some(rest) = line.strip_prefix("quarry: ready on http://") {
                        let addr = rest.split(' ').next().unwrap_or(rest);
                        let base = format!("http://{addr}");
                        // Keep draining stdout so the server never blocks on a full pipe.
                        std::thread::spawn(move || while rx.recv().is_ok() {});
                        return Server {
                            child,
                            base,
                            stderr,
                        };
                    }
                    seen.push(line);
                }
                Err(_) => {
                    let _ = child.kill();
                    let _ = child.wait();
                    panic!(
                        "quarry serve did not become ready; stdout: {seen:?}; stderr: {}",
                        stderr.lock().unwrap()
                    );
                }
            }
        }
    }

    /// The process id.
    pub fn pid(&self) -> u32 {
        self.child.id()
    }

    /// Sends a signal (`TERM`, `HUP`, ...) to this server, by its id.
    pub fn signal(&self, name: &str) {
        let status = Command::new("kill")
            .args(["-s", name, &self.pid().to_string()])
            .status()
            .unwrap();
        assert!(status.success());
    }

    /// Everything the server wrote on stderr so far.
    pub fn stderr(&self) -> String {
        self.stderr.lock().unwrap().clone()
    }

    /// Waits for the process to exit (at most `limit`), returning its exit code.
    pub fn wait_exit(&mut self, limit: Duration) -> Option<i32> {
        let deadline = Instant::now() + limit;
        while Instant::now() < deadline {
            if let Ok(Some(status)) = self.child.try_wait() {
                return status.code();
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        None
    }

    /// `base` + `path`.
    pub fn url(&self, path: &str) -> String {
        format!("{}{path}", self.base)
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
        }
        let _ = self.child.wait();
    }
}

/// A blocking HTTP client that returns error statuses as answers.
pub fn client() -> ureq::Agent {
    ureq::Agent::config_builder()
        .http_status_as_error(false)
        .timeout_global(Some(Duration::from_secs(30)))
        .build()
        .into()
}

/// A decoded answer: status, headers of interest and JSON body (`Null` when not JSON).
pub struct Answer {
    pub status: u16,
    pub content_type: String,
    pub text: String,
    pub json: serde_json::Value,
}

pub fn answer(mut r: ureq::http::Response<ureq::Body>) -> Answer {
    let status = r.status().as_u16();
    let content_type = r
        .headers()
        .get("content-type")
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_string();
    let text = r.body_mut().read_to_string().unwrap_or_default();
    let json = serde_json::from_str(&text).unwrap_or(serde_json::Value::Null);
    Answer {
        status,
        content_type,
        text,
        json,
    }
}

/// `POST url` with a JSON body given as text.
pub fn post_json(agent: &ureq::Agent, url: &str, body: &str) -> Answer {
    answer(
        agent
            .post(url)
            .header("Content-Type", "application/json")
            .send(body)
            .expect("the server answers"),
    )
}

/// `POST url` with a JSON body and a bearer token.
pub fn post_json_with_token(agent: &ureq::Agent, url: &str, body: &str, token: &str) -> Answer {
    answer(
        agent
            .post(url)
            .header("Content-Type", "application/json")
            .header("Authorization", format!("Bearer {token}"))
            .send(body)
            .expect("the server answers"),
    )
}

/// `GET url`.
pub fn get(agent: &ureq::Agent, url: &str) -> Answer {
    answer(agent.get(url).call().expect("the server answers"))
}

/// Polls `check` every 50 ms until it holds or `limit` passes; returns whether it held.
pub fn eventually(limit: Duration, mut check: impl FnMut() -> bool) -> bool {
    let deadline = Instant::now() + limit;
    while Instant::now() < deadline {
        if check() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    check()
}

/// The OpenAPI document as JSON.
pub fn openapi() -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/openapi.yaml");
    let text = std::fs::read_to_string(&path).expect("docs/openapi.yaml exists");
    serde_norway::from_str(&text).expect("docs/openapi.yaml is YAML")
}

/// Checks `value` against `#/components/schemas/NAME` of docs/openapi.yaml (JSON Schema
/// 2020-12, which OpenAPI 3.1 schemas are), panicking with every violation.
pub fn assert_matches_schema(doc: &serde_json::Value, name: &str, value: &serde_json::Value) {
    let schema = serde_json::json!({
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$ref": format!("#/components/schemas/{name}"),
        "components": doc["components"].clone(),
    });
    let validator = jsonschema::validator_for(&schema)
        .unwrap_or_else(|e| panic!("schema {name} does not compile: {e}"));
    let errors: Vec<String> = validator
        .iter_errors(value)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect();
    assert!(
        errors.is_empty(),
        "{name} does not match docs/openapi.yaml: {errors:#?}\n{value:#}"
    );
}

/// A goal of the scheduler library, as Lean-style display text.
pub const GOAL: &str = "t : task\nq : queue\n⊢ size (push t q) = S (size q)";

/// A `/v1/rank` body for `goal` with `limit` 5.
pub fn rank_body(goal: &str) -> String {
    serde_json::json!({ "goal": goal, "limit": 5 }).to_string()
}

/// Sends a request head announcing `length` body bytes and the first `sent` of `body`,
/// leaving the request unfinished; returns the open connection.
pub fn start_unfinished(base: &str, body: &str, sent: usize) -> TcpStream {
    let addr = base.trim_start_matches("http://");
    let mut s = TcpStream::connect(addr).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(20))).unwrap();
    let head = format!(
        "POST /v1/rank HTTP/1.1\r\nHost: {addr}\r\nContent-Type: application/json\r\nContent-Length: {}\r\n\r\n",
        body.len()
    );
    s.write_all(head.as_bytes()).unwrap();
    s.write_all(&body.as_bytes()[..sent]).unwrap();
    s.flush().unwrap();
    s
}

/// Reads a whole HTTP/1.1 response (the server closes or sends Content-Length bytes).
pub fn read_response(s: &mut TcpStream) -> (u16, String) {
    let mut raw = Vec::new();
    let mut buf = [0u8; 8192];
    loop {
        match s.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => {
                raw.extend_from_slice(&buf[..n]);
                let text = String::from_utf8_lossy(&raw).to_string();
                if let Some(end) = text.find("\r\n\r\n") {
                    let len = text[..end]
                        .lines()
                        .find_map(|l| {
                            l.to_ascii_lowercase()
                                .strip_prefix("content-length:")
                                .map(|v| v.trim().parse::<usize>().unwrap())
                        })
                        .unwrap_or(0);
                    if raw.len() >= end + 4 + len {
                        break;
                    }
                }
            }
            Err(e) => panic!("reading the response: {e}"),
        }
    }
    status_and_body(&raw)
}

/// The status code (0 when there is none) and the body of raw HTTP/1.1 response bytes.
pub fn status_and_body(raw: &[u8]) -> (u16, String) {
    let text = String::from_utf8_lossy(raw).to_string();
    let status = text
        .split(' ')
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(0);
    let body = text
        .split_once("\r\n\r\n")
        .map(|(_, b)| b.to_string())
        .unwrap_or_default();
    (status, body)
}
