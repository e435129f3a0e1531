//! `quarry serve` over its lifetime, on the real binary and loopback only: a new build
//! picked up while a load loop runs (no failed request), a corrupt or truncated generation
//! refused while the old one keeps answering, SIGHUP reloads, and SIGTERM letting the
//! request in flight finish. Loops are bounded in count and time.

#[path = "support/server.rs"]
mod support;

use std::io::Write;
use std::net::TcpStream;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use support::*;

/// Runs rank requests from `threads` threads until `stop` is set or `limit` passes;
/// returns (answered 200, failed, build ids seen).
fn load_loop(
    url: String,
    threads: usize,
    stop: Arc<std::sync::atomic::AtomicBool>,
    limit: Duration,
) -> std::thread::JoinHandle<(u64, Vec<String>, std::collections::BTreeSet<String>)> {
    std::thread::spawn(move || {
        let ok = Arc::new(AtomicU64::new(0));
        let workers: Vec<_> = (0..threads)
            .map(|_| {
                let (url, stop, ok) = (url.clone(), stop.clone(), ok.clone());
                std::thread::spawn(move || {
                    let agent = client();
                    let started = Instant::now();
                    let mut failed = Vec::new();
                    let mut ids = std::collections::BTreeSet::new();
                    let mut sent = 0;
                    while !stop.load(Ordering::Relaxed)
                        && started.elapsed() < limit
                        && sent < 20_000
                    {
                        sent += 1;
                        let a = post_json(&agent, &url, &rank_body(GOAL));
                        if a.status == 200 {
                            ok.fetch_add(1, Ordering::Relaxed);
                            ids.insert(
                                a.json["index"]["build_id"]
                                    .as_str()
                                    .unwrap_or("")
                                    .to_string(),
                            );
                        } else {
                            failed.push(format!("{} {}", a.status, a.text));
                        }
                    }
                    (failed, ids)
                })
            })
            .collect();
        let mut failed = Vec::new();
        let mut ids = std::collections::BTreeSet::new();
        for w in workers {
            let (f, i) = w.join().unwrap();
            failed.extend(f);
            ids.extend(i);
        }
        (ok.load(Ordering::Relaxed), failed, ids)
    })
}

fn build_id(server: &Server) -> String {
    get(&client(), &server.url("/v1/status")).json["index"]["build_id"]
        .as_str()
        .unwrap_or("")
        .to_string()
}

#[test]
fn a_new_build_is_picked_up_under_load_without_a_failed_request() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--quiet"]);
    let before = build_id(&server);
    let stop = Arc::new(std::sync::atomic::AtomicBool::new(false));
    let load = load_loop(
        server.url("/v1/rank"),
        4,
        stop.clone(),
        Duration::from_secs(60),
    );
    std::thread::sleep(Duration::from_millis(300));

    let policy = ix.lib.join("theories/Policy.v");
    std::fs::write(&policy, format!("{POLICY_V}{POLICY_EXTRA}")).unwrap();
    build(&ix.lib, &ix.index);
    let swapped = eventually(Duration::from_secs(20), || build_id(&server) != before);
    std::thread::sleep(Duration::from_millis(300));
    stop.store(true, Ordering::Relaxed);
    let (ok, failed, ids) = load.join().unwrap();
    assert!(
        swapped,
        "the server did not pick up the new build; stderr: {}",
        server.stderr()
    );
    assert!(
        failed.is_empty(),
        "{} failed during the reload: {:?}",
        failed.len(),
        &failed[..failed.len().min(3)]
    );
    assert!(ok > 0);
    let after = build_id(&server);
    assert!(
        ids.contains(&before) && ids.contains(&after),
        "answers came from {ids:?}"
    );
    // The new lemma is served.
    let a = get(
        &client(),
        &server.url("/v1/declarations/Sched.Policy.pick_some_size"),
    );
    assert_eq!(a.status, 200, "{}", a.text);
}

#[test]
fn a_corrupt_index_is_refused_and_the_old_one_keeps_answering() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &[]);
    let agent = client();
    let before = build_id(&server);

    // A generation whose manifest is not JSON, made live the way a build does it: the
    // folder first, then CURRENT replaced by a rename.
    let broken = ix.index.join("gen-20260101T000000-broken");
    std::fs::create_dir_all(&broken).unwrap();
    std::fs::write(
        broken.join("manifest.json"),
        b"{\"format\": \"quarry-index\", \"form",
    )
    .unwrap();
    let tmp = ix.index.join(".CURRENT.broken");
    std::fs::write(&tmp, "gen-20260101T000000-broken\n").unwrap();
    std::fs::rename(&tmp, ix.index.join("CURRENT")).unwrap();

    let refused = eventually(Duration::from_secs(10), || {
        get(&agent, &server.url("/v1/status")).json["reload"]["failures"].as_u64() >= Some(1)
    });
    assert!(refused, "no refused reload; stderr: {}", server.stderr());
    let status = get(&agent, &server.url("/v1/status"));
    assert_eq!(status.json["index"]["build_id"], before.as_str());
    assert!(status.json["reload"]["last_error"]
        .as_str()
        .unwrap()
        .contains("manifest.json"));
    let a = post_json(&agent, &server.url("/v1/rank"), &rank_body(GOAL));
    assert_eq!(a.status, 200, "{}", a.text);
    assert_eq!(a.json["index"]["build_id"], before.as_str());
    assert!(
        server.stderr().contains("refused the new index"),
        "{}",
        server.stderr()
    );

    // A damaged part (a generation copied by hand, truncated) is refused the same way, on SIGHUP.
    let good_gen = std::fs::read_dir(&ix.index)
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().to_string())
        .find(|n| n.starts_with("gen-") && !n.contains("broken"))
        .unwrap();
    let copy = ix.index.join("gen-20260101T000001-truncated");
    std::fs::create_dir_all(&copy).unwrap();
    for e in std::fs::read_dir(ix.index.join(&good_gen))
        .unwrap()
        .flatten()
    {
        if e.file_type().unwrap().is_file() {
            std::fs::copy(e.path(), copy.join(e.file_name())).unwrap();
        }
    }
    let lib = copy.join("library.bin");
    let bytes = std::fs::read(&lib).unwrap();
    std::fs::write(&lib, &bytes[..bytes.len() / 2]).unwrap();
    std::fs::write(&tmp, "gen-20260101T000001-truncated\n").unwrap();
    std::fs::rename(&tmp, ix.index.join("CURRENT")).unwrap();
    server.signal("HUP");
    let refused_again = eventually(Duration::from_secs(10), || {
        get(&agent, &server.url("/v1/status")).json["reload"]["failures"].as_u64() >= Some(2)
    });
    assert!(refused_again, "stderr: {}", server.stderr());
    let a = post_json(&agent, &server.url("/v1/rank"), &rank_body(GOAL));
    assert_eq!(
        (a.status, a.json["index"]["build_id"].as_str()),
        (200, Some(before.as_str()))
    );
}

#[test]
fn sighup_reloads_when_the_watcher_is_off() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--no-watch"]);
    let before = build_id(&server);
    std::fs::write(
        ix.lib.join("theories/Policy.v"),
        format!("{POLICY_V}{POLICY_EXTRA}"),
    )
    .unwrap();
    build(&ix.lib, &ix.index);
    std::thread::sleep(Duration::from_millis(500));
    assert_eq!(build_id(&server), before, "--no-watch still reloaded");
    server.signal("HUP");
    assert!(eventually(Duration::from_secs(10), || build_id(&server) != before));
}

#[test]
fn sigterm_lets_the_request_in_flight_finish() {
    let ix = scheduler_index();
    let mut server = Server::start(&ix.index, &[]);
    let body = rank_body(GOAL);
    let mut s = start_unfinished(&server.base, &body, 5);
    std::thread::sleep(Duration::from_millis(200));
    server.signal("TERM");
    std::thread::sleep(Duration::from_millis(300));
    // New connections are no longer accepted...
    let refused = TcpStream::connect(server.base.trim_start_matches("http://")).is_err();
    // ...but the request in flight completes.
    s.write_all(&body.as_bytes()[5..]).unwrap();
    let (status, text) = read_response(&mut s);
    assert_eq!(status, 200, "{text}");
    drop(s);
    assert_eq!(
        server.wait_exit(Duration::from_secs(10)),
        Some(0),
        "stderr: {}",
        server.stderr()
    );
    assert!(refused, "the listener was still open after SIGTERM");
}
