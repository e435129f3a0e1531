//! Running coqc on one instrumented copy, with a time limit.
//!
//! Takes the coqc program, its load-path arguments, the copy to compile and a time limit;
//! gives coqc's standard output and the `.glob` it wrote, or why the copy did not compile
//! (Coq's first error line, the time limit, or coqc not starting). Output goes to files, not
//! pipes, so a talkative proof cannot block coqc; coqc is killed when over the limit. It
//! does not read what coqc printed.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// What coqc gave for a copy that compiled.
#[derive(Clone, Debug)]
pub struct Compiled {
    pub stdout: String,
    pub glob: String,
}

/// Why a copy did not compile.
#[derive(Debug, thiserror::Error)]
pub enum CompileError {
    #[error("cannot run `{0}`: {1}")]
    Start(PathBuf, std::io::Error),
    #[error("coqc took longer than {0:?} and was stopped")]
    TimedOut(Duration),
    #[error("{0}")]
    Rejected(String),
    #[error("reading coqc's output `{0}`: {1}")]
    Output(PathBuf, std::io::Error),
}

/// The first error coqc reported in `stderr`, with its `File ..., line N` location when
/// there is one (lines of the copy are those of the original: markers add no line).
pub fn first_error(stderr: &str) -> String {
    let lines: Vec<&str> = stderr.lines().collect();
    for (i, l) in lines.iter().enumerate() {
        if l.starts_with("Error") {
            // The message runs to the first blank line; keep it on one line, shortened.
            let message: Vec<&str> = lines
                .get(i..)
                .unwrap_or(&[])
                .iter()
                .take_while(|m| !m.trim().is_empty())
                .map(|m| m.trim())
                .collect();
            let mut l = message.join(" ");
            if l.chars().count() > 200 {
                l = l.chars().take(200).collect::<String>() + "...";
            }
            let at = i
                .checked_sub(1)
                .and_then(|j| lines.get(j))
                .and_then(|p| p.split(", line ").nth(1))
                .and_then(|p| p.split(',').next());
            return match at {
                Some(line) => format!("line {line}: {l}"),
                None => l.to_string(),
            };
        }
    }
    lines.iter().find(|l| !l.trim().is_empty()).map_or_else(
        || "coqc failed without a message".to_string(),
        |l| l.to_string(),
    )
}

/// Compiles `file` (inside `workdir`) with `coqc -q <load_path> file`, stopping it after
/// `limit`.
pub fn compile(
    coqc: &Path,
    load_path: &[String],
    workdir: &Path,
    file: &Path,
    limit: Duration,
) -> Result<Compiled, CompileError> {
    let out_path = workdir.join("coqc.stdout");
    let err_path = workdir.join("coqc.stderr");
    let open = |p: &Path| std::fs::File::create(p).map_err(|e| CompileError::Output(p.into(), e));
    let stdout = open(&out_path)?;
    let stderr = open(&err_path)?;
    let mut child = Command::new(coqc)
        .arg("-q")
        .args(load_path)
        .arg(file)
        .current_dir(workdir)
        .stdin(Stdio::null())
        .stdout(stdout)
        .stderr(stderr)
        .spawn()
        .map_err(|e| CompileError::Start(coqc.into(), e))?;
    let started = Instant::now();
    let status = loop {
        match child.try_wait() {
            Ok(Some(status)) => break status,
            Ok(None) if started.elapsed() > limit => {
                // Already exited or not: either way it is over.
                let _ = child.kill();
                let _ = child.wait();
                return Err(CompileError::TimedOut(limit));
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(20)),
            Err(e) => return Err(CompileError::Start(coqc.into(), e)),
        }
    };
    let read = |p: &Path| {
        std::fs::read(p)
            .map(|b| String::from_utf8_lossy(&b).into_owned())
            .map_err(|e| CompileError::Output(p.into(), e))
    };
    if !status.success() {
        return Err(CompileError::Rejected(first_error(&read(&err_path)?)));
    }
    Ok(Compiled {
        stdout: read(&out_path)?,
        glob: read(&file.with_extension("glob"))?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_first_error_keeps_its_line() {
        // As coqc 8.16 (Debian's coq) prints a failed tactic.
        let stderr = "File \"./T.v\", line 15, characters 0-13:\nError: No such goal.\n\n";
        assert_eq!(first_error(stderr), "line 15: Error: No such goal.");
        assert_eq!(first_error("Error: bad"), "Error: bad");
        assert_eq!(first_error(""), "coqc failed without a message");
    }
}
