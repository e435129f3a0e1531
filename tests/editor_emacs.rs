//! The Emacs client snippet (`docs/editor/quarry.el`) run for real: GNU Emacs in batch mode
//! (Debian's `emacs-nox`) loads it and asks a live `quarry serve` on loopback, from a buffer
//! visiting a file of the scheduler library. Outside CI a missing Emacs skips the test with
//! the reason printed; under `CI=true` it is installed with apt-get, and fails the test if
//! that cannot be done.

#[path = "support/server.rs"]
mod support;

use std::path::Path;
use std::process::Command;

use support::*;

fn in_ci() -> bool {
    std::env::var("CI")
        .map(|v| v == "true" || v == "1")
        .unwrap_or(false)
}

/// Whether `emacs` runs, installing Debian's `emacs-nox` under CI.
fn emacs_available() -> bool {
    let runs = || {
        Command::new("emacs")
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
    };
    if runs() {
        return true;
    }
    if !in_ci() {
        eprintln!("skipping: emacs is not installed here (apt-get install emacs-nox)");
        return false;
    }
    let install = || {
        Command::new("apt-get")
            .args([
                "install",
                "-y",
                "-q",
                "--no-install-recommends",
                "emacs-nox",
            ])
            .env("DEBIAN_FRONTEND", "noninteractive")
            .status()
            .is_ok_and(|s| s.success())
    };
    // A stale package list is refreshed once, as tests/support/debian.rs does.
    let installed = install()
        || (Command::new("apt-get")
            .args(["update", "-q"])
            .status()
            .is_ok_and(|s| s.success())
            && install());
    assert!(
        installed && runs(),
        "emacs-nox is required under CI=true and could not be installed"
    );
    true
}

/// Runs `emacs --batch` with the snippet loaded and `forms` evaluated; returns stdout.
fn emacs(server: &Server, forms: &str) -> String {
    let snippet = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/editor/quarry.el");
    let program = format!(
        "(progn (setq quarry-server-url \"{}\") {forms})",
        server.base
    );
    let o = Command::new("emacs")
        .args(["--batch", "-Q", "-l"])
        .arg(&snippet)
        .args(["--eval", &program])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout).to_string();
    let stderr = String::from_utf8_lossy(&o.stderr).to_string();
    assert!(o.status.success(), "emacs failed: {stderr}\n{stdout}");
    format!("{stdout}{stderr}")
}

#[test]
fn the_emacs_snippet_shows_premises_for_a_goal_in_a_proof_buffer() {
    if !emacs_available() {
        return;
    }
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--quiet"]);
    let policy = ix.lib.join("theories/Policy.v");

    // From the proof of the last lemma of Policy.v: the goal is typed at the end of the
    // buffer, so everything declared above it is in scope, but not the lemma itself.
    let forms = format!(
        r#"(with-current-buffer (find-file-noselect "{}")
             (goto-char (point-max))
             (let ((begin (point)))
               (insert "q : queue\nH : pick q = None\n⊢ is_empty q = true")
               (quarry-premises-for-region begin (point))
               (with-current-buffer "*quarry*" (princ (buffer-string)))))"#,
        policy.display()
    );
    let out = emacs(&server, &forms);
    assert!(out.contains("Premises for: q : queue"), "{out}");
    assert!(out.contains("Sched."), "no premise listed: {out}");
    assert!(
        out.contains("theories/"),
        "premises carry their file: {out}"
    );

    // The bare function returns the parsed premises; a server error becomes an Emacs error
    // carrying the server's code.
    let out = emacs(
        &server,
        r#"(progn
             (princ (alist-get 'name (car (quarry-rank "size (push t q) = S (size q)"))))
             (terpri)
             (condition-case e (quarry-rank "   ")
               (error (princ (error-message-string e)))))"#,
    );
    assert!(out.contains("Sched.Queue.size_push"), "{out}");
    assert!(out.contains("(goal_empty)"), "{out}");
}
