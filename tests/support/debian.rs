//! Test setup: Debian's Coq packages, the outside oracle several tests check quarry against.
//! `libcoq-stdlib` (8.16) ships the Coq standard library sources and coqdoc HTML; `coq`
//! ships `coqc`. Installed packages are used as they are; otherwise, under `CI=true`, they
//! are installed with `apt-get`; outside CI the sources are unpacked into `target/debian/`
//! with `apt-get download` + `dpkg-deb -x`, and a test that still lacks them skips with the
//! reason printed.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

use super::python::{in_ci, unavailable};

/// Where Debian installs the standard library's sources.
pub const SYSTEM_THEORIES: &str = "/usr/lib/ocaml/coq/theories";

fn target_dir() -> PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(d) => PathBuf::from(d),
        None => Path::new(env!("CARGO_MANIFEST_DIR")).join("target"),
    }
}

fn run(cmd: &mut Command) -> Result<(), String> {
    match cmd.output() {
        Ok(o) if o.status.success() => Ok(()),
        Ok(o) => Err(format!(
            "{:?} exited {}: {}",
            cmd,
            o.status,
            String::from_utf8_lossy(&o.stderr).trim()
        )),
        Err(e) => Err(format!("cannot run {cmd:?}: {e}")),
    }
}

fn apt_install(packages: &[&str]) -> Result<(), String> {
    if run(Command::new("apt-get")
        .args(["install", "-y", "-q"])
        .args(packages))
    .is_ok()
    {
        return Ok(());
    }
    run(Command::new("apt-get").args(["update", "-q"]))?;
    run(Command::new("apt-get")
        .args(["install", "-y", "-q"])
        .args(packages))
}

fn theories_in(root: &Path) -> Option<PathBuf> {
    let t = root.join("usr/lib/ocaml/coq/theories");
    t.join("Init/Prelude.v").is_file().then_some(t)
}

fn find_stdlib() -> Result<PathBuf, String> {
    let system = PathBuf::from(SYSTEM_THEORIES);
    if system.join("Init/Prelude.v").is_file() {
        return Ok(system);
    }
    let unpacked = target_dir().join("debian/libcoq-stdlib");
    if let Some(t) = theories_in(&unpacked) {
        return Ok(t);
    }
    if in_ci() {
        apt_install(&["libcoq-stdlib", "coq"])?;
        return if system.join("Init/Prelude.v").is_file() {
            Ok(system)
        } else {
            Err(format!(
                "installed libcoq-stdlib but `{SYSTEM_THEORIES}` has no Init/Prelude.v"
            ))
        };
    }
    unpack("libcoq-stdlib", &unpacked)?;
    theories_in(&unpacked).ok_or_else(|| "the unpacked package has no theories folder".into())
}

/// Downloads Debian's `package` (`apt-get download`, no root needed) into
/// `target/debian/downloads` and unpacks it into `into` (`dpkg-deb -x`).
fn unpack(package: &str, into: &Path) -> Result<(), String> {
    let dl = target_dir().join("debian/downloads");
    std::fs::create_dir_all(&dl).map_err(|e| e.to_string())?;
    run(Command::new("apt-get")
        .args(["download", package])
        .current_dir(&dl))?;
    let prefix = format!("{package}_");
    let deb = std::fs::read_dir(&dl)
        .map_err(|e| e.to_string())?
        .flatten()
        .map(|e| e.path())
        .find(|p| {
            p.file_name()
                .is_some_and(|n| n.to_string_lossy().starts_with(&prefix))
        })
        .ok_or_else(|| format!("apt-get download left no {package} .deb"))?;
    run(Command::new("dpkg-deb").arg("-x").arg(&deb).arg(into))
}

/// Where Debian installs a Coq library that is not the standard library.
const USER_CONTRIB: &str = "/usr/lib/ocaml/coq/user-contrib";

/// The folder `user-contrib/<folder>` of Debian's Coq library `package` (say
/// `libcoq-stdpp`, folder `stdpp`): installed, else unpacked into `target/debian/`,
/// installed with `apt-get` under `CI=true`; `None` (printed reason) outside CI when it
/// cannot be had. These packages ship their sources with the `.glob` files coqc wrote when
/// Debian built them.
pub fn coq_user_contrib(package: &str, folder: &str) -> Option<PathBuf> {
    let find = || -> Result<PathBuf, String> {
        let system = Path::new(USER_CONTRIB).join(folder);
        if system.is_dir() {
            return Ok(system);
        }
        let unpacked = target_dir().join("debian").join(package);
        let there = unpacked
            .join(USER_CONTRIB.trim_start_matches('/'))
            .join(folder);
        if there.is_dir() {
            return Ok(there);
        }
        if in_ci() {
            apt_install(&[package])?;
            return if system.is_dir() {
                Ok(system)
            } else {
                Err(format!(
                    "installed {package} but `{}` is missing",
                    system.display()
                ))
            };
        }
        unpack(package, &unpacked)?;
        if there.is_dir() {
            Ok(there)
        } else {
            Err(format!(
                "the unpacked {package} has no `{}`",
                there.display()
            ))
        }
    };
    match find() {
        Ok(p) => Some(p),
        Err(why) => unavailable(&format!("Debian's {package}"), &why),
    }
}

/// The Coq standard library's `theories` folder (logical prefix `Coq`), or `None` (printed
/// reason) outside CI when it cannot be had.
pub fn coq_stdlib() -> Option<PathBuf> {
    static FOUND: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    match FOUND.get_or_init(find_stdlib) {
        Ok(p) => Some(p.clone()),
        Err(why) => unavailable("the Coq standard library (Debian's libcoq-stdlib)", why),
    }
}

/// The options that read the standard library at `theories` as its users load it: the
/// logical prefix `Coq` bound to the folder (coqc's `-R theories Coq`).
pub fn stdlib_options(theories: &Path) -> quarry::extract::BuildOptions {
    quarry::extract::BuildOptions {
        roots: vec![theories.to_path_buf()],
        coq_prefixes: vec![quarry::extract::CoqPrefix {
            logical: "Coq".into(),
            dir: theories.to_path_buf(),
        }],
        threads: None,
        progress: false,
    }
}

/// The `coqc` compiler, installing Debian's `coq` under `CI=true`.
pub fn coqc() -> Option<PathBuf> {
    static FOUND: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    let found = FOUND.get_or_init(|| {
        let which = || {
            Command::new("sh")
                .args(["-c", "command -v coqc"])
                .output()
                .ok()
                .filter(|o| o.status.success())
                .map(|o| PathBuf::from(String::from_utf8_lossy(&o.stdout).trim()))
        };
        if let Some(p) = which() {
            return Ok(p);
        }
        if in_ci() {
            apt_install(&["coq", "libcoq-stdlib"])?;
            return which().ok_or_else(|| "installed coq but no coqc on PATH".to_string());
        }
        Err("coqc is not installed (apt-get install coq)".into())
    });
    match found {
        Ok(p) => Some(p.clone()),
        Err(why) => unavailable("coqc (Debian's coq)", why),
    }
}
