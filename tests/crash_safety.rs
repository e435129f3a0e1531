//! Crash-safe index builds, on the real binary: `quarry build` killed with SIGKILL at
//! random points while it rebuilds a folder `quarry serve` is serving leaves the previous
//! index whole and served, and the next build succeeds; every part of a generation that is
//! damaged or truncated is refused by `quarry inspect --verify` and by `quarry serve`, naming
//! the file; a full disk fails a build with a clear error and leaves the old index as it was.
//! Kill rounds are seeded and bounded (`QUARRY_CRASH_ROUNDS`, `QUARRY_CRASH_SEED`).

#[allow(dead_code)]
#[path = "support/python.rs"]
mod python;
#[path = "support/server.rs"]
mod server;

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use server::*;

/// SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom number generators",
/// OOPSLA 2014): a seeded sequence of kill points, the same on every run.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

fn env_u64(name: &str, default: u64) -> u64 {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// `quarry build LIB --out OUT --quiet`, started.
fn spawn_build(lib: &Path, out: &Path) -> std::process::Child {
    Command::new(quarry_bin())
        .args([
            "build",
            lib.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .arg("--quiet")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("quarry build starts")
}

/// The live generation's folder.
fn live_generation(index: &Path) -> PathBuf {
    let current = std::fs::read_to_string(index.join("CURRENT")).expect("CURRENT is readable");
    index.join(current.trim())
}

/// Opens the index the way the server does, checks every part against the manifest, and
/// returns its build id.
fn assert_whole(index: &Path) -> String {
    let generation = quarry::library::store::open_generation(index)
        .unwrap_or_else(|e| panic!("the index does not open: {e}"));
    generation
        .verify_all()
        .unwrap_or_else(|e| panic!("the live generation is damaged: {e}"));
    quarry::index::OpenIndex::open(index)
        .unwrap_or_else(|e| panic!("the live generation does not load: {e}"));
    generation.manifest.build_id
}

fn served_build_id(server: &Server) -> String {
    let a = get(&client(), &server.url("/v1/status"));
    assert_eq!(a.status, 200, "{}", a.text);
    a.json["index"]["build_id"]
        .as_str()
        .unwrap_or("")
        .to_string()
}

#[test]
fn a_build_killed_anywhere_leaves_the_previous_index_whole_and_served() {
    let tmp = tempfile::tempdir().unwrap();
    let lib = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let index = tmp.path().join("index");
    let started = Instant::now();
    build(&lib, &index);
    let build_time = started.elapsed();
    let first = assert_whole(&index);
    let server = Server::start(&index, &[]);
    let agent = client();
    assert_eq!(served_build_id(&server), first);

    let rounds = env_u64("QUARRY_CRASH_ROUNDS", 8);
    let mut rng = SplitMix(env_u64("QUARRY_CRASH_SEED", 0x5eed_c0de));
    // Kill points spread over the whole build and a little past it, so some land in the
    // final renames and some after a finished build.
    let window_ms = (build_time.as_millis() as u64 * 6 / 5).max(50);
    let (mut killed, mut finished) = (0, 0);
    for round in 0..rounds {
        let delay = Duration::from_millis(rng.next() % window_ms);
        let mut child = spawn_build(&lib, &index);
        std::thread::sleep(delay);
        let done_before_kill = matches!(child.try_wait(), Ok(Some(_)));
        let _ = child.kill(); // SIGKILL on Unix
        let status = child.wait().unwrap();
        if done_before_kill && status.success() {
            finished += 1;
        } else {
            killed += 1;
        }
        let live = assert_whole(&index);
        let a = post_json(&agent, &server.url("/v1/rank"), &rank_body(GOAL));
        assert_eq!(
            a.status, 200,
            "round {round} (kill after {delay:?}): the server stopped answering: {}",
            a.text
        );
        eprintln!("round {round}: kill after {delay:?}, live generation {live}");
    }
    eprintln!("{killed} builds killed mid-way, {finished} finished before the kill");
    assert!(
        killed > 0,
        "no kill landed inside a build (window {window_ms} ms): the test saw no crash"
    );

    // A fresh build after all the crashes succeeds and the server moves to it; it removes
    // the killed builds' staging folders (their locks died with them).
    build(&lib, &index);
    let last = assert_whole(&index);
    let leftovers = staging_folders(&index);
    assert!(
        leftovers.is_empty(),
        "killed builds' staging left behind: {leftovers:?}"
    );
    assert_ne!(last, first);
    assert!(
        eventually(Duration::from_secs(30), || served_build_id(&server) == last),
        "the server did not pick up the build after the crashes; stderr: {}",
        server.stderr()
    );
    let o = quarry(&["inspect", index.to_str().unwrap(), "--verify"]);
    assert!(o.status.success(), "{}", text(&o.stderr));
}

/// The `.build-*` staging folders left in an index folder.
fn staging_folders(index: &Path) -> Vec<String> {
    std::fs::read_dir(index)
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(".build-"))
        .collect()
}

/// Runs `quarry serve INDEX` on a loopback port and expects it to refuse the index and exit;
/// returns its stderr.
fn serve_refuses(index: &Path) -> String {
    let mut child = Command::new(quarry_bin())
        .args(["serve", index.to_str().unwrap(), "--listen", "127.0.0.1:0"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    loop {
        if let Ok(Some(_)) = child.try_wait() {
            break;
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!(
                "quarry serve kept running on a damaged index `{}`",
                index.display()
            );
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    let out: Output = child.wait_with_output().unwrap();
    assert!(
        !out.status.success(),
        "quarry serve accepted a damaged index"
    );
    text(&out.stderr)
}

/// The largest file under `dir` (a folder part's data).
fn largest_file(dir: &Path) -> PathBuf {
    let mut best: Option<(u64, PathBuf)> = None;
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let p = e.path();
            let meta = e.metadata().unwrap();
            if meta.is_dir() {
                stack.push(p);
            } else if !p.to_string_lossy().ends_with(".lock")
                && best.as_ref().is_none_or(|(n, _)| meta.len() > *n)
            {
                best = Some((meta.len(), p));
            }
        }
    }
    best.expect("the folder part holds a file").1
}

/// Checks that a damaged generation is refused by `inspect --verify` and by `serve`, both
/// naming `part` and saying `what`.
fn assert_refused(index: &Path, part: &str, what: &[&str], case: &str) {
    let o = quarry(&["inspect", index.to_str().unwrap(), "--verify"]);
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{case}: inspect --verify: {err}");
    assert!(
        err.contains(part) && what.iter().any(|w| err.contains(w)),
        "{case}: inspect --verify does not name `{part}` and the problem: {err}"
    );
    let err = serve_refuses(index);
    assert!(
        err.contains(part) && what.iter().any(|w| err.contains(w)),
        "{case}: serve does not name `{part}` and the problem: {err}"
    );
}

#[test]
fn every_damaged_or_truncated_part_is_refused_naming_the_file() {
    let ix = scheduler_index();
    let gen = live_generation(&ix.index);
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(gen.join("manifest.json")).unwrap()).unwrap();
    let parts: Vec<String> = manifest["parts"]
        .as_object()
        .expect("the manifest lists its parts")
        .keys()
        .cloned()
        .collect();
    assert!(parts.len() >= 3, "parts: {parts:?}");
    for part in &parts {
        let path = gen.join(part);
        // The file whose bytes are damaged: the part itself or, for a folder part (the
        // lexical index), its largest file.
        let victim = if path.is_dir() {
            largest_file(&path)
        } else {
            path.clone()
        };
        let original = std::fs::read(&victim).unwrap();
        assert!(!original.is_empty(), "{}", victim.display());

        let mut flipped = original.clone();
        let mid = flipped.len() / 2;
        flipped[mid] ^= 0x20;
        std::fs::write(&victim, &flipped).unwrap();
        assert_refused(
            &ix.index,
            part,
            &["checksum"],
            &format!("flipped byte in {part}"),
        );

        std::fs::write(&victim, &original[..original.len() / 3]).unwrap();
        let what: &[&str] = if path.is_dir() {
            &["checksum"]
        } else {
            &["truncated"]
        };
        assert_refused(&ix.index, part, what, &format!("truncated {part}"));

        std::fs::write(&victim, &original).unwrap();
        assert_whole(&ix.index);
    }

    // A generation written by a future format is refused on the serving path as well (the
    // inspect path is covered in tests/cli_build.rs).
    let manifest_path = gen.join("manifest.json");
    let m = std::fs::read_to_string(&manifest_path).unwrap();
    let future = m.replace("\"format_version\": 1", "\"format_version\": 2");
    assert_ne!(
        future, m,
        "the manifest spells its format version as expected"
    );
    std::fs::write(&manifest_path, future).unwrap();
    let err = serve_refuses(&ix.index);
    assert!(
        err.contains("manifest.json") && err.contains("version 2"),
        "{err}"
    );
}

/// A tmpfs mounted for the test, unmounted when dropped.
struct Tmpfs(PathBuf);

impl Tmpfs {
    /// Mounts a tmpfs of `bytes` at `dir`; `Err` with the reason when that is not possible
    /// (not root, no mount permission in this container).
    fn mount(dir: &Path, bytes: u64) -> Result<Tmpfs, String> {
        std::fs::create_dir_all(dir).map_err(|e| e.to_string())?;
        let out = Command::new("mount")
            .args(["-t", "tmpfs", "-o"])
            .arg(format!("size={}k", bytes.div_ceil(1024)))
            .arg("tmpfs")
            .arg(dir)
            .output()
            .map_err(|e| format!("cannot run mount: {e}"))?;
        if !out.status.success() {
            return Err(format!("mount -t tmpfs failed: {}", text(&out.stderr)));
        }
        Ok(Tmpfs(dir.to_path_buf()))
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

fn folder_bytes(dir: &Path) -> u64 {
    let mut total = 0;
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let meta = e.metadata().unwrap();
            if meta.is_dir() {
                stack.push(e.path());
            } else {
                total += meta.len();
            }
        }
    }
    total
}

#[test]
fn a_full_disk_fails_the_build_clearly_and_keeps_the_old_index() {
    let lib = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let tmp = tempfile::tempdir().unwrap();
    // How much one generation of the demo library takes.
    let probe = tmp.path().join("probe");
    build(&lib, &probe);
    let one = folder_bytes(&live_generation(&probe));

    let mount = tmp.path().join("small-disk");
    let disk = match Tmpfs::mount(&mount, one * 4 + (4 << 20)) {
        Ok(d) => d,
        Err(why) => {
            python::unavailable::<()>("a small tmpfs for the full-disk test", &why);
            return;
        }
    };
    let index = disk.0.join("index");
    build(&lib, &index);
    let old = assert_whole(&index);
    let old_files: Vec<(PathBuf, Vec<u8>)> = {
        let gen = live_generation(&index);
        let mut files = Vec::new();
        let mut stack = vec![gen];
        while let Some(d) = stack.pop() {
            for e in std::fs::read_dir(&d).unwrap().flatten() {
                if e.path().is_dir() {
                    stack.push(e.path());
                } else {
                    files.push((e.path(), std::fs::read(e.path()).unwrap()));
                }
            }
        }
        files
    };

    // Fill the disk, then free a third of a generation: the next build runs out of space
    // part-way through.
    let filler = disk.0.join("filler");
    {
        use std::io::Write;
        let mut f = std::fs::File::create(&filler).unwrap();
        let chunk = vec![0xA5u8; 64 * 1024];
        while f.write_all(&chunk).is_ok() {}
        let _ = f.sync_all();
    }
    let full = std::fs::metadata(&filler).unwrap().len();
    let f = std::fs::OpenOptions::new()
        .write(true)
        .open(&filler)
        .unwrap();
    f.set_len(full.saturating_sub(one / 3)).unwrap();
    drop(f);

    let o = quarry(&[
        "build",
        lib.to_str().unwrap(),
        "--out",
        index.to_str().unwrap(),
        "--quiet",
    ]);
    let err = text(&o.stderr);
    eprintln!("the build on a full disk said: {}", err.trim());
    assert!(!o.status.success(), "the build succeeded on a full disk");
    assert_eq!(
        o.status.code(),
        Some(1),
        "a clear error, not a crash: {err}"
    );
    assert!(
        err.contains("No space left on device") && err.contains(index.to_str().unwrap()),
        "the error says the disk is full and names the file: {err}"
    );
    assert_eq!(
        err.matches("No space left on device").count(),
        1,
        "the OS error is said once: {err}"
    );
    assert!(!err.contains("panicked"), "{err}");

    // The old generation is live and byte for byte as it was; the failed build's staging
    // folder is gone.
    assert_eq!(assert_whole(&index), old);
    for (path, bytes) in &old_files {
        assert_eq!(&std::fs::read(path).unwrap(), bytes, "{}", path.display());
    }
    let leftovers = staging_folders(&index);
    assert!(leftovers.is_empty(), "staging left behind: {leftovers:?}");

    // With room again the same build succeeds.
    std::fs::remove_file(&filler).unwrap();
    build(&lib, &index);
    assert_ne!(assert_whole(&index), old);
}
