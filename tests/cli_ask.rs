//! `quarry ask` end to end on the real binary: the demo library's Coq ring buffer answered
//! for a Coq goal display, JSON output, restriction to a place, the exit codes of a goal that
//! cannot be ranked, and the same request sent to a running `quarry serve` with `--server`.

#[path = "support/server.rs"]
mod server;

use std::io::Write;
use std::path::Path;
use std::process::{Command, Output, Stdio};

use server::{quarry, Server};

const GOAL: &str = "b : buffer nat\nx : nat\nH : is_full b = false\n============================\nsize (push x b) = S (size b)\n";

fn demo_index(dir: &Path) -> std::path::PathBuf {
    let out = dir.join("idx");
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let o = quarry(&[
        "build",
        fixtures.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "-q",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    out
}

fn ask_stdin(args: &[&str], stdin: &str) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("ask")
        .args(args)
        .env("NO_COLOR", "1")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("quarry runs");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(stdin.as_bytes())
        .unwrap();
    child.wait_with_output().unwrap()
}

#[test]
fn a_coq_goal_display_is_answered_with_the_lemma_that_closes_it() {
    let tmp = tempfile::tempdir().unwrap();
    let idx = demo_index(tmp.path());
    // From stdin, as an editor pipes it. `size_push_not_full` (Lemmas.v) states exactly this
    // under the hypothesis `is_full b = false`: it must come first.
    let o = ask_stdin(&[idx.to_str().unwrap(), "--limit", "5"], GOAL);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let first = out.lines().nth(1).unwrap_or("");
    assert!(
        first.contains("RingBuffer.Lemmas.size_push_not_full"),
        "{out}"
    );
    assert!(first.contains("coq/Lemmas.v:"), "{out}");

    let o = quarry(&["ask", idx.to_str().unwrap(), GOAL, "--json", "--limit", "3"]);
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["goal"]["format"], "coq");
    assert_eq!(
        v["goal"]["goals"][0]["conclusion"],
        "size (push x b) = S (size b)"
    );
    assert_eq!(v["premises"].as_array().unwrap().len(), 3);
    assert_eq!(
        v["premises"][0]["name"],
        "RingBuffer.Lemmas.size_push_not_full"
    );
    // Hypothesis names are never query terms.
    let terms: Vec<&str> = v["terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t[0].as_str().unwrap())
        .collect();
    assert!(
        !terms.contains(&"h") && terms.contains(&"size"),
        "{terms:?}"
    );

    let o = quarry(&[
        "ask",
        idx.to_str().unwrap(),
        GOAL,
        "--show-tokens",
        "--limit",
        "1",
    ]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("goal read as coq") && out.contains("tokens:"),
        "{out}"
    );
}

#[test]
fn a_place_restricts_the_answers_to_what_is_accessible_there() {
    let tmp = tempfile::tempdir().unwrap();
    let idx = demo_index(tmp.path());
    // At the first line of Core.v nothing of the ring buffer is declared yet: no premise of
    // RingBuffer.Lemmas may answer.
    let o = quarry(&[
        "ask",
        idx.to_str().unwrap(),
        GOAL,
        "--file",
        "coq/Core.v",
        "--line",
        "1",
        "--json",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for p in v["premises"].as_array().unwrap() {
        assert!(
            !p["name"].as_str().unwrap().starts_with("RingBuffer."),
            "{p}"
        );
    }
    let o = quarry(&[
        "ask",
        idx.to_str().unwrap(),
        GOAL,
        "--file",
        "no/such/File.v",
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("no/such/File.v"));
}

#[test]
fn goals_that_cannot_be_ranked_exit_3_with_the_reason() {
    let tmp = tempfile::tempdir().unwrap();
    let idx = demo_index(tmp.path());
    let o = quarry(&["ask", idx.to_str().unwrap(), "   "]);
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("empty"));
    let huge = "a".repeat(300 * 1024);
    let o = ask_stdin(&[idx.to_str().unwrap()], &huge);
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("bytes"));
    let o = quarry(&["ask", idx.to_str().unwrap(), GOAL, "--limit", "0"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn ask_with_server_gives_the_same_first_answer_as_the_local_index() {
    let tmp = tempfile::tempdir().unwrap();
    let idx = demo_index(tmp.path());
    let server = Server::start(&idx, &[]);
    let local = quarry(&["ask", idx.to_str().unwrap(), GOAL, "--json", "--limit", "5"]);
    let local: serde_json::Value = serde_json::from_slice(&local.stdout).unwrap();
    let o = quarry(&[
        "ask",
        "--server",
        &server.base,
        GOAL,
        "--json",
        "--limit",
        "5",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let remote: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let names = |v: &serde_json::Value| -> Vec<String> {
        v["premises"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["name"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(names(&local), names(&remote));
    let o = quarry(&["ask", "--server", &server.base, "  "]);
    assert_eq!(o.status.code(), Some(3));
    let o = quarry(&["ask", "--server", &server.base, GOAL, "--limit", "3"]);
    assert!(String::from_utf8_lossy(&o.stdout).contains("size_push_not_full"));
}
