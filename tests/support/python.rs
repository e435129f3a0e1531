//! Test setup: a Python virtual environment under `target/` with reference packages from
//! PyPI, created once and reused. Outside CI a missing Python or registry skips the test
//! with the reason printed; under `CI=true` it fails the test instead.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;

/// Whether the tests run in CI, where every reference check must run.
pub fn in_ci() -> bool {
    std::env::var("CI")
        .map(|v| v == "true" || v == "1")
        .unwrap_or(false)
}

/// Skips (returns `None`, printing why) outside CI, panics in CI.
pub fn unavailable<T>(what: &str, why: &str) -> Option<T> {
    if in_ci() {
        panic!("{what} is required under CI=true but is unavailable: {why}");
    }
    eprintln!("skipping: {what} is unavailable here: {why}");
    None
}

fn target_dir() -> PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(d) => PathBuf::from(d),
        None => Path::new(env!("CARGO_MANIFEST_DIR")).join("target"),
    }
}

/// The Python interpreter of a venv under `target/` holding `packages` (pip requirement
/// strings), creating or completing it when needed.
pub fn venv_with(packages: &[&str]) -> Option<PathBuf> {
    // The tests of one binary run on parallel threads; one of them creates or completes the
    // venv at a time (pip installing into one venv twice at once can leave it broken).
    static SETUP: Mutex<()> = Mutex::new(());
    let _guard = SETUP
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner());
    let venv = target_dir().join("reference-venv");
    let python = venv.join("bin").join("python");
    if !python.exists() {
        let made = Command::new("python3")
            .args(["-m", "venv"])
            .arg(&venv)
            .status();
        match made {
            Ok(s) if s.success() => {}
            Ok(s) => return unavailable("a Python venv", &format!("python3 -m venv exited {s}")),
            Err(e) => return unavailable("a Python venv", &format!("cannot run python3: {e}")),
        }
    }
    let marker = venv.join(format!(
        "quarry-installed-{}",
        packages.join("_").replace(['=', '<', '>', '/', ' '], "-")
    ));
    if !marker.exists() {
        let out = Command::new(&python)
            .args([
                "-m",
                "pip",
                "install",
                "--quiet",
                "--disable-pip-version-check",
            ])
            .args(packages)
            .output();
        match out {
            Ok(o) if o.status.success() => {
                let _ = std::fs::write(&marker, packages.join("\n"));
            }
            Ok(o) => {
                return unavailable(
                    &format!("PyPI packages {packages:?}"),
                    &String::from_utf8_lossy(&o.stderr),
                )
            }
            Err(e) => return unavailable("pip", &e.to_string()),
        }
    }
    Some(python)
}
