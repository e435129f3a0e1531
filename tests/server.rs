//! `quarry serve` end to end: the real binary on an ephemeral loopback port, driven over HTTP.
//! Each endpoint, each error one by one, the time and admission limits, 200 concurrent
//! requests, authentication and CORS. Answers are validated against docs/openapi.yaml with a
//! JSON Schema 2020-12 validator (the `jsonschema` crate); statuses follow RFC 9110's
//! meanings (section 15). Loops are bounded in count and time; only 127.0.0.1 is contacted.
//! Reload and shutdown are in `server_lifecycle.rs`.

#[path = "support/server.rs"]
mod support;

use std::sync::{Arc, Barrier};
use std::time::Duration;

use support::*;

#[test]
fn rank_answers_with_premises_the_parsed_goal_and_the_index_identity() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &[]);
    let agent = client();
    let doc = openapi();

    let a = post_json(
        &agent,
        &server.url("/v1/rank"),
        &serde_json::json!({ "goal": GOAL, "limit": 3, "explain": true }).to_string(),
    );
    assert_eq!(a.status, 200, "{}", a.text);
    assert!(a.content_type.starts_with("application/json"));
    assert_matches_schema(&doc, "RankResponse", &a.json);
    let premises = a.json["premises"].as_array().unwrap();
    assert!(!premises.is_empty() && premises.len() <= 3, "{}", a.text);
    // The goal states `size_push` itself; a lexical ranking must put it among the first three.
    assert!(
        premises
            .iter()
            .any(|p| p["name"] == "Sched.Queue.size_push"),
        "{}",
        a.text
    );
    for p in premises {
        assert!(p["file"].as_str().unwrap().ends_with(".v"));
        assert!(p["line"].as_u64().unwrap() >= 1);
        assert!(p.get("matched_terms").is_some(), "explain was asked: {p}");
        assert!(p["voters"].is_array(), "explain was asked: {p}");
    }
    assert_eq!(a.json["goal"]["format"], "lean");
    assert!(a.json["goal"]["goals"][0]["conclusion"]
        .as_str()
        .unwrap()
        .contains("size (push t q)"));
    assert_eq!(a.json["goal"]["goals"][0]["hypotheses"][1]["names"][0], "q");
    let status = get(&agent, &server.url("/v1/status"));
    assert_eq!(
        a.json["index"]["build_id"],
        status.json["index"]["build_id"]
    );

    // From inside Policy.v, only what Policy.v can see before the cursor is offered; the
    // file is named by its indexed path, never opened.
    let a = post_json(
        &agent,
        &server.url("/v1/rank"),
        &serde_json::json!({ "goal": "pick (push t q) = Some t", "file": "theories/Policy.v", "line": 11, "kinds": ["theorem"] }).to_string(),
    );
    assert_eq!(a.status, 200, "{}", a.text);
    for p in a.json["premises"].as_array().unwrap() {
        assert_eq!(p["kind"], "theorem");
        assert_ne!(
            p["name"], "Sched.Policy.pick_push",
            "the lemma being proved is not offered"
        );
        assert_ne!(
            p["name"], "Sched.Policy.pick_none_is_empty",
            "a later lemma is not offered"
        );
    }

    // A goal over 8 KiB is ranked on a blocking thread, a shorter one on the thread that
    // read the request: the same goal padded with spaces past that size is answered alike.
    let short = post_json(&agent, &server.url("/v1/rank"), &rank_body(GOAL));
    let padded = GOAL.replacen(
        "q : queue",
        &format!("q : queue{}", " ".repeat(9 * 1024)),
        1,
    );
    assert!(padded.len() > 9 * 1024);
    let long = post_json(&agent, &server.url("/v1/rank"), &rank_body(&padded));
    assert_eq!((short.status, long.status), (200, 200), "{}", long.text);
    assert!(!short.json["premises"].as_array().unwrap().is_empty());
    assert_eq!(long.json["premises"], short.json["premises"]);
}

#[test]
fn batch_declarations_status_health_and_metrics() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &[]);
    let agent = client();
    let doc = openapi();

    let a = post_json(
        &agent,
        &server.url("/v1/rank/batch"),
        &serde_json::json!({ "items": [
            { "goal": GOAL },
            { "goal": "pick (push t q) = Some t", "limit": 1 },
            { "goal": "  \n " },
        ]})
        .to_string(),
    );
    assert_eq!(a.status, 200, "{}", a.text);
    assert_matches_schema(&doc, "BatchResponse", &a.json);
    let results = a.json["results"].as_array().unwrap();
    assert_eq!(results.len(), 3);
    assert_eq!(results[0]["status"], 200);
    assert_eq!(
        results[1]["ranking"]["premises"].as_array().unwrap().len(),
        1
    );
    assert_eq!(results[2]["status"], 422);
    assert_eq!(results[2]["error"]["code"], "goal_empty");

    let items: Vec<_> = (0..65)
        .map(|_| serde_json::json!({ "goal": GOAL }))
        .collect();
    let a = post_json(
        &agent,
        &server.url("/v1/rank/batch"),
        &serde_json::json!({ "items": items }).to_string(),
    );
    assert_eq!(
        (a.status, a.json["error"]["code"].as_str()),
        (400, Some("batch_size"))
    );

    let a = get(
        &agent,
        &server.url("/v1/declarations/Sched.Queue.size_push_positive"),
    );
    assert_eq!(a.status, 200, "{}", a.text);
    assert_matches_schema(&doc, "DeclarationResponse", &a.json);
    let premises: Vec<&str> = a.json["premises"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap())
        .collect();
    assert!(premises.contains(&"Sched.Queue.size_push"), "{premises:?}");
    // A unique partial name finds the same declaration.
    let b = get(&agent, &server.url("/v1/declarations/size_push_positive"));
    assert_eq!(
        b.json["declaration"]["name"],
        "Sched.Queue.size_push_positive"
    );
    let b = get(&agent, &server.url("/v1/declarations/Queue.size_push"));
    let dependents: Vec<&str> = b.json["dependents"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap())
        .collect();
    assert!(
        dependents.contains(&"Sched.Queue.size_push_positive"),
        "{}",
        b.text
    );

    let a = get(&agent, &server.url("/v1/status"));
    assert_eq!(a.status, 200);
    assert_matches_schema(&doc, "StatusResponse", &a.json);
    assert_eq!(a.json["quarry_version"], env!("CARGO_PKG_VERSION"));
    assert!(a.json["index"]["counts"]["declarations"].as_u64().unwrap() >= 8);

    let a = get(&agent, &server.url("/healthz"));
    assert_eq!((a.status, a.json["status"].as_str()), (200, Some("alive")));
    assert_matches_schema(&doc, "HealthResponse", &a.json);
    let a = get(&agent, &server.url("/readyz"));
    assert_eq!((a.status, a.json["status"].as_str()), (200, Some("ready")));

    let a = get(&agent, &server.url("/metrics"));
    assert_eq!(a.status, 200);
    // Prometheus text exposition format 0.0.4 is served as text/plain; version=0.0.4.
    assert!(
        a.content_type.starts_with("text/plain"),
        "{}",
        a.content_type
    );
    assert!(
        a.text.contains(
            "quarry_http_requests_total{route=\"/v1/rank/batch\",method=\"POST\",status=\"200\"} 1"
        ),
        "{}",
        a.text
    );
    assert!(
        a.text.contains(
            "quarry_http_request_duration_seconds_bucket{route=\"/v1/status\",le=\"+Inf\"} 1"
        ),
        "{}",
        a.text
    );
    assert!(a.text.contains("quarry_index_declarations "));
}

#[test]
fn every_error_has_its_status_code_and_a_json_body() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--max-body", "4KiB"]);
    let agent = client();
    let doc = openapi();
    let rank = server.url("/v1/rank");
    let cases: Vec<(Answer, u16, &str)> = vec![
        (
            post_json(&agent, &rank, r#"{"goal": "size q"#),
            400,
            "malformed_json",
        ),
        (
            post_json(&agent, &rank, r#"{"limit": 3}"#),
            400,
            "missing_field",
        ),
        (
            post_json(&agent, &rank, r#"{"goal": "size q", "limmit": 3}"#),
            400,
            "unknown_field",
        ),
        (
            post_json(&agent, &rank, r#"{"goal": "size q", "limit": 500}"#),
            400,
            "invalid_field",
        ),
        (
            post_json(&agent, &rank, r#"{"goal": 42}"#),
            400,
            "invalid_field",
        ),
        (
            post_json(&agent, &rank, &rank_body(&"size q ".repeat(1000))),
            413,
            "body_too_large",
        ),
        (
            {
                let r = agent
                    .post(&rank)
                    .header("Content-Type", "text/plain")
                    .send(rank_body(GOAL))
                    .unwrap();
                answer(r)
            },
            415,
            "unsupported_media_type",
        ),
        (
            post_json(&agent, &rank, &rank_body("   ")),
            422,
            "goal_empty",
        ),
        (
            post_json(&agent, &rank, &rank_body("( ) ⊢ , ;")),
            422,
            "goal_unparsable",
        ),
        (
            post_json(
                &agent,
                &rank,
                r#"{"goal": "size q", "file": "/etc/passwd"}"#,
            ),
            422,
            "unknown_file",
        ),
        (
            get(
                &agent,
                &server.url("/v1/declarations/Sched.Queue.no_such_lemma"),
            ),
            404,
            "unknown_declaration",
        ),
        (
            get(&agent, &server.url("/v1/ranking")),
            404,
            "unknown_route",
        ),
        (get(&agent, &rank), 405, "method_not_allowed"),
    ];
    for (a, status, code) in &cases {
        assert_eq!(a.status, *status, "{code}: {}", a.text);
        assert_eq!(a.json["error"]["code"], *code, "{}", a.text);
        assert!(a.content_type.starts_with("application/json"), "{code}");
        assert!(a.json["error"]["message"]
            .as_str()
            .is_some_and(|m| m.len() > 10));
        assert_matches_schema(&doc, "ErrorResponse", &a.json);
    }
    // The unknown field is named in the message.
    let unknown = &cases[2].0;
    assert!(unknown.json["error"]["message"]
        .as_str()
        .unwrap()
        .contains("`limmit`"));
    // The file named is never opened: the answer is the same for a path that exists on this
    // machine and one that does not.
    let missing = post_json(
        &agent,
        &rank,
        r#"{"goal": "size q", "file": "/no/such/file.v"}"#,
    );
    assert_eq!(missing.json["error"]["code"], "unknown_file");

    // The server is still whole after all of that.
    let a = post_json(&agent, &rank, &rank_body(GOAL));
    assert_eq!(a.status, 200, "{}", a.text);
}

#[test]
fn over_the_time_limit_is_504_and_over_the_admission_limit_is_503() {
    let ix = scheduler_index();
    let server = Server::start(
        &ix.index,
        &["--request-timeout", "700ms", "--max-pending", "1"],
    );
    let agent = client();
    let body = rank_body(GOAL);

    // A request whose body never finishes holds the only admission slot...
    let mut stalled = start_unfinished(&server.base, &body, 10);
    std::thread::sleep(Duration::from_millis(150));
    // ...so another one is refused at once with 503 and Retry-After,
    let r = agent
        .post(&server.url("/v1/rank"))
        .header("Content-Type", "application/json")
        .send(body.as_str())
        .unwrap();
    assert_eq!(
        r.headers().get("retry-after").and_then(|v| v.to_str().ok()),
        Some("1")
    );
    let a = answer(r);
    assert_eq!(
        (a.status, a.json["error"]["code"].as_str()),
        (503, Some("overloaded")),
        "{}",
        a.text
    );
    // ...and the stalled one is answered 504 when the time limit passes.
    let (status, text) = read_response(&mut stalled);
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (504, Some("timeout")),
        "{text}"
    );
    // Health answers regardless of admission.
    assert_eq!(get(&agent, &server.url("/healthz")).status, 200);
    let a = post_json(&agent, &server.url("/v1/rank"), &body);
    assert_eq!(a.status, 200, "the slot is free again: {}", a.text);
}

#[test]
fn two_hundred_concurrent_requests_are_all_answered() {
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--quiet"]);
    let n = 200;
    let barrier = Arc::new(Barrier::new(n));
    let url = server.url("/v1/rank");
    let handles: Vec<_> = (0..n)
        .map(|i| {
            let barrier = barrier.clone();
            let url = url.clone();
            std::thread::spawn(move || {
                let agent = client();
                let goal = if i % 2 == 0 {
                    GOAL
                } else {
                    "pick q = None -> is_empty q = true"
                };
                barrier.wait();
                let a = post_json(&agent, &url, &rank_body(goal));
                (a.status, a.text)
            })
        })
        .collect();
    let mut failed = Vec::new();
    for h in handles {
        let (status, text) = h.join().unwrap();
        if status != 200 {
            failed.push(format!("{status} {text}"));
        }
    }
    assert!(
        failed.is_empty(),
        "{} of {n} failed: {:?}",
        failed.len(),
        &failed[..failed.len().min(3)]
    );
    let m = get(&client(), &server.url("/metrics"));
    assert!(
        m.text.contains(&format!(
            "quarry_http_requests_total{{route=\"/v1/rank\",method=\"POST\",status=\"200\"}} {n}"
        )),
        "{}",
        m.text
    );
}

#[test]
fn tokens_are_required_off_loopback_and_never_logged() {
    let ix = scheduler_index();
    // Without a token the server refuses to listen on a non-loopback address (it exits
    // before binding anything).
    let o = quarry(&["serve", ix.index.to_str().unwrap(), "--listen", "0.0.0.0:0"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--token-file"));

    let token = "sched-queue-token-7f3a9c21";
    let token_file = ix.tmp.path().join("token");
    std::fs::write(&token_file, format!("{token}\n")).unwrap();
    let server = Server::start(&ix.index, &["--token-file", token_file.to_str().unwrap()]);
    let agent = client();
    let url = server.url("/v1/rank");
    let a = post_json(&agent, &url, &rank_body(GOAL));
    assert_eq!(
        (a.status, a.json["error"]["code"].as_str()),
        (401, Some("unauthorized"))
    );
    let a = post_json_with_token(&agent, &url, &rank_body(GOAL), "sched-queue-token-7f3a9c22");
    assert_eq!(a.status, 401);
    let a = post_json_with_token(&agent, &url, &rank_body(GOAL), token);
    assert_eq!(a.status, 200, "{}", a.text);
    assert_eq!(get(&agent, &server.url("/metrics")).status, 401);
    // Probes need no token.
    assert_eq!(get(&agent, &server.url("/healthz")).status, 200);
    assert_eq!(get(&agent, &server.url("/readyz")).status, 200);
    assert!(!server.stderr().contains(token), "the token was logged");
    assert!(
        !server.stderr().contains("7f3a9c22"),
        "an offered token was logged"
    );
}

#[test]
fn cors_is_off_unless_origins_are_listed() {
    let ix = scheduler_index();
    let agent = client();
    let origin = "http://editor.localhost:5173";
    let preflight = |server: &Server| {
        agent
            .options(&server.url("/v1/rank"))
            .header("Origin", origin)
            .header("Access-Control-Request-Method", "POST")
            .call()
            .unwrap()
    };
    let plain = Server::start(&ix.index, &[]);
    let r = preflight(&plain);
    assert!(r.headers().get("access-control-allow-origin").is_none());
    let allowed = Server::start(&ix.index, &["--cors-origin", origin]);
    let r = preflight(&allowed);
    // Fetch standard, CORS protocol: the preflight answer echoes the allowed origin.
    assert_eq!(
        r.headers()
            .get("access-control-allow-origin")
            .and_then(|v| v.to_str().ok()),
        Some(origin)
    );
    let r = agent
        .options(&allowed.url("/v1/rank"))
        .header("Origin", "http://elsewhere.localhost")
        .header("Access-Control-Request-Method", "POST")
        .call()
        .unwrap();
    assert!(r.headers().get("access-control-allow-origin").is_none());
}

#[test]
fn with_no_folder_the_demo_library_is_built_once_and_served() {
    let cache = tempfile::tempdir().unwrap();
    let xdg = cache.path().to_str().unwrap();
    let args: Vec<String> = ["serve", "--listen", "127.0.0.1:0"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let server = Server::start_with(&args, &[("XDG_CACHE_HOME", xdg)]);
    assert!(
        eventually(Duration::from_secs(5), || server
            .stderr()
            .contains("built the demo index")),
        "{}",
        server.stderr()
    );
    let agent = client();
    let status = get(&agent, &server.url("/v1/status"));
    let served = status.json["index"]["counts"]["declarations"]
        .as_u64()
        .unwrap();
    // The same count `quarry inspect` reads from the cached index.
    let index = cache.path().join("quarry/demo-index");
    let o = quarry(&["inspect", index.to_str().unwrap(), "--json"]);
    let summary: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(summary["counts"]["declarations"].as_u64(), Some(served));
    assert!(served > 0);
    let first = status.json["index"]["build_id"].clone();
    drop(server);

    // A second start finds the cache up to date and builds nothing.
    let server = Server::start_with(&args, &[("XDG_CACHE_HOME", xdg)]);
    assert!(
        !server.stderr().contains("built the demo index"),
        "{}",
        server.stderr()
    );
    let status = get(&agent, &server.url("/v1/status"));
    assert_eq!(status.json["index"]["build_id"], first);
}

#[test]
fn every_error_code_and_endpoint_is_documented() {
    let doc = openapi();
    let listed: Vec<&str> = doc["components"]["schemas"]["ErrorCode"]["enum"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    let prose = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/api.md"),
    )
    .unwrap();
    let codes: Vec<&str> = quarry::server::errors::ErrorCode::ALL
        .iter()
        .map(|c| c.as_str())
        .collect();
    for code in &codes {
        assert!(
            listed.contains(code),
            "`{code}` missing from docs/openapi.yaml"
        );
        assert!(
            prose.contains(&format!("`{code}`")),
            "`{code}` missing from docs/api.md"
        );
    }
    assert_eq!(
        listed.len(),
        codes.len(),
        "docs/openapi.yaml lists codes the server never sends"
    );
    for path in [
        "/v1/rank",
        "/v1/rank/batch",
        "/v1/declarations/{name}",
        "/v1/status",
        "/healthz",
        "/readyz",
        "/metrics",
    ] {
        assert!(
            doc["paths"].get(path).is_some(),
            "{path} missing from docs/openapi.yaml"
        );
        assert!(prose.contains(path), "{path} missing from docs/api.md");
    }
}
