//! Measuring one size of the cost curve with the release `quarry` binary, as a user runs
//! it: `quarry build` (wall time, peak memory, the stage timings it prints), the index's
//! size on disk, and `quarry serve` (resident memory after warm-up, ranking latency over
//! the library's goals).
//!
//! Takes the generated library folder and the binary; gives a [`SizeResult`]. It reads
//! memory from `/proc` (Linux only) and never reuses an old figure: every field is measured
//! in the call that returns it.

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use serde::Serialize;

/// Warm-up requests before latency and memory are read.
const WARM_UP: usize = 50;

/// The figures of one library size.
#[derive(Clone, Debug, Serialize, serde::Deserialize)]
pub struct SizeResult {
    pub declarations: usize,
    pub source_files: usize,
    pub build_seconds: f64,
    /// The highest `VmHWM` seen while `quarry build` ran (sampled every 200 ms).
    pub build_peak_rss_bytes: u64,
    /// The stage line `quarry build` printed.
    pub build_stages: String,
    pub index_bytes: u64,
    /// `VmRSS` of `quarry serve` after warm-up and the measured queries.
    pub serve_rss_bytes: u64,
    pub goals: usize,
    /// The server's own ranking time (`elapsed_ms` of the answer).
    pub rank_median_ms: f64,
    pub rank_p99_ms: f64,
    /// Client round trip over loopback HTTP.
    pub round_trip_median_ms: f64,
    pub round_trip_p99_ms: f64,
    /// `/proc/loadavg` (1 min) at the start and the end of the measurement: the machine is
    /// shared.
    pub load_before: f64,
    pub load_after: f64,
}

/// Why a size could not be measured.
#[derive(Debug, thiserror::Error)]
pub enum MeasureError {
    #[error("running `{command}`: {source}")]
    Spawn {
        command: String,
        source: std::io::Error,
    },
    #[error("`{command}` failed ({status}): {stderr}")]
    Failed {
        command: String,
        status: String,
        stderr: String,
    },
    #[error("reading `{path}`: {source}")]
    Read {
        path: String,
        source: std::io::Error,
    },
    #[error("the server did not say where it listens: {0}")]
    NoAddress(String),
    #[error("query {index} to the server: {message}")]
    Query { index: usize, message: String },
}

fn read_err(path: &Path) -> impl FnOnce(std::io::Error) -> MeasureError + '_ {
    move |source| MeasureError::Read {
        path: path.display().to_string(),
        source,
    }
}

/// The 1-minute load average.
pub fn load_average() -> f64 {
    std::fs::read_to_string("/proc/loadavg")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|x| x.parse().ok()))
        .unwrap_or(f64::NAN)
}

/// A `kB` field of `/proc/PID/status`, in bytes.
fn status_bytes(pid: u32, field: &str) -> Option<u64> {
    let text = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    let line = text.lines().find(|l| l.starts_with(field))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

/// The apparent size of every file below `dir`.
pub fn folder_bytes(dir: &Path) -> Result<u64, MeasureError> {
    let mut total = 0;
    for entry in std::fs::read_dir(dir).map_err(read_err(dir))? {
        let entry = entry.map_err(read_err(dir))?;
        let meta = entry.metadata().map_err(read_err(dir))?;
        total += if meta.is_dir() {
            folder_bytes(&entry.path())?
        } else {
            meta.len()
        };
    }
    Ok(total)
}

/// The `q`-quantile of sorted values (nearest rank).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let rank = ((q * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    sorted[rank - 1]
}

/// Kills the server when dropped, so an error cannot leave it running.
struct Server(Child);

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// Builds the index of the library at `root` and measures it.
pub fn measure_size(
    quarry: &Path,
    root: &Path,
    index: &Path,
    declarations: usize,
    source_files: usize,
) -> Result<SizeResult, MeasureError> {
    let load_before = load_average();
    let prefix = format!("Wh={}", root.join("Wh").display());
    let command = format!(
        "{} build {} --coq-prefix {prefix} --out {}",
        quarry.display(),
        root.display(),
        index.display()
    );
    eprintln!("cost: {command}");
    let started = Instant::now();
    let mut child = Command::new(quarry)
        .arg("build")
        .arg(root)
        .arg("--coq-prefix")
        .arg(&prefix)
        .arg("--out")
        .arg(index)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|source| MeasureError::Spawn {
            command: command.clone(),
            source,
        })?;
    let pid = child.id();
    let stdout = child.stdout.take();
    let stderr = child.stderr.take();
    let out_reader = std::thread::spawn(move || read_all(stdout));
    let err_reader = std::thread::spawn(move || read_all(stderr));
    let mut peak = 0;
    let status = loop {
        if let Some(hwm) = status_bytes(pid, "VmHWM:") {
            peak = peak.max(hwm);
        }
        match child.try_wait() {
            Ok(Some(status)) => break status,
            Ok(None) => std::thread::sleep(Duration::from_millis(200)),
            Err(source) => {
                return Err(MeasureError::Spawn { command, source });
            }
        }
    };
    let build_seconds = started.elapsed().as_secs_f64();
    let stdout = out_reader.join().unwrap_or_default();
    let stderr = err_reader.join().unwrap_or_default();
    if !status.success() {
        return Err(MeasureError::Failed {
            command,
            status: status.to_string(),
            stderr: tail(&stderr, 2000),
        });
    }
    eprintln!("cost: built in {build_seconds:.1} s\n{stdout}");
    let build_stages = stdout
        .lines()
        .filter(|l| l.starts_with("extracted in") || l.starts_with("indexed "))
        .collect::<Vec<_>>()
        .join(" | ");
    let index_bytes = folder_bytes(index)?;
    let goals_path = root.join("goals.txt");
    let goals: Vec<String> = std::fs::read_to_string(&goals_path)
        .map_err(read_err(&goals_path))?
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(str::to_string)
        .collect();
    let served = serve_and_query(quarry, index, &goals)?;
    Ok(SizeResult {
        declarations,
        source_files,
        build_seconds,
        build_peak_rss_bytes: peak,
        build_stages,
        index_bytes,
        serve_rss_bytes: served.rss,
        goals: goals.len(),
        rank_median_ms: quantile(&served.rank_ms, 0.5),
        rank_p99_ms: quantile(&served.rank_ms, 0.99),
        round_trip_median_ms: quantile(&served.round_trip_ms, 0.5),
        round_trip_p99_ms: quantile(&served.round_trip_ms, 0.99),
        load_before,
        load_after: load_average(),
    })
}

fn read_all<R: std::io::Read>(stream: Option<R>) -> String {
    let mut out = String::new();
    if let Some(mut s) = stream {
        let _ = s.read_to_string(&mut out);
    }
    out
}

fn tail(text: &str, n: usize) -> String {
    let start = text.len().saturating_sub(n);
    let start = (start..text.len())
        .find(|&i| text.is_char_boundary(i))
        .unwrap_or(text.len());
    text[start..].to_string()
}

/// What the server measured.
struct Served {
    rss: u64,
    rank_ms: Vec<f64>,
    round_trip_ms: Vec<f64>,
}

/// Starts `quarry serve` on a free loopback port, warms it up, times every goal once
/// (one client, sequential) and reads its resident memory.
fn serve_and_query(quarry: &Path, index: &Path, goals: &[String]) -> Result<Served, MeasureError> {
    let command = format!(
        "{} serve {} --listen 127.0.0.1:0 --no-watch --quiet",
        quarry.display(),
        index.display()
    );
    let mut child = Command::new(quarry)
        .arg("serve")
        .arg(index)
        .args(["--listen", "127.0.0.1:0", "--no-watch", "--quiet"])
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .map_err(|source| MeasureError::Spawn {
            command: command.clone(),
            source,
        })?;
    let stdout = child.stdout.take();
    let server = Server(child);
    let pid = server.0.id();
    let mut lines =
        BufReader::new(stdout.ok_or_else(|| MeasureError::NoAddress(command.clone()))?).lines();
    let mut address = None;
    for line in lines.by_ref() {
        let line = line.map_err(|e| MeasureError::NoAddress(e.to_string()))?;
        if let Some(rest) = line.strip_prefix("quarry: ready on ") {
            address = rest.split_whitespace().next().map(str::to_string);
            break;
        }
    }
    let address = address.ok_or_else(|| MeasureError::NoAddress(command.clone()))?;
    // Keep draining stdout so the server never blocks on a full pipe.
    std::thread::spawn(move || for _ in lines {});
    let url = format!("{address}/v1/rank");
    let agent = ureq::Agent::new_with_defaults();
    let ask = |index: usize, goal: &str| -> Result<(f64, f64), MeasureError> {
        let started = Instant::now();
        let body = serde_json::json!({ "goal": goal, "limit": 10 });
        let mut answer = agent
            .post(&url)
            .send_json(&body)
            .map_err(|e| MeasureError::Query {
                index,
                message: e.to_string(),
            })?;
        let value: serde_json::Value =
            answer
                .body_mut()
                .read_json()
                .map_err(|e| MeasureError::Query {
                    index,
                    message: e.to_string(),
                })?;
        let round_trip = started.elapsed().as_secs_f64() * 1000.0;
        let rank = value
            .get("elapsed_ms")
            .and_then(|v| v.as_f64())
            .ok_or_else(|| MeasureError::Query {
                index,
                message: format!("no elapsed_ms in {value}"),
            })?;
        Ok((rank, round_trip))
    };
    for (i, goal) in goals.iter().cycle().take(WARM_UP).enumerate() {
        ask(i, goal)?;
    }
    let mut rank_ms = Vec::with_capacity(goals.len());
    let mut round_trip_ms = Vec::with_capacity(goals.len());
    for (i, goal) in goals.iter().enumerate() {
        let (r, t) = ask(i, goal)?;
        rank_ms.push(r);
        round_trip_ms.push(t);
    }
    rank_ms.sort_by(f64::total_cmp);
    round_trip_ms.sort_by(f64::total_cmp);
    let rss = status_bytes(pid, "VmRSS:").unwrap_or(0);
    drop(server);
    Ok(Served {
        rss,
        rank_ms,
        round_trip_ms,
    })
}

/// The binary to measure: `$QUARRY_BIN` when set (run.sh points it at a copy, so a
/// rebuild by someone else during a long run cannot change what is measured), else the
/// release binary next to this bench's own executable (`target/release/deps/..` →
/// `target/release/quarry`).
pub fn release_binary() -> Option<PathBuf> {
    if let Some(bin) = std::env::var_os("QUARRY_BIN") {
        let bin = PathBuf::from(bin);
        return bin.is_file().then_some(bin);
    }
    let exe = std::env::current_exe().ok()?;
    let release = exe.parent()?.parent()?;
    let quarry = release.join("quarry");
    quarry.is_file().then_some(quarry)
}
