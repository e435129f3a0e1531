//! The router in-process on a small hand-made library (a scheduler's run queue), through
//! `tower::ServiceExt::oneshot`: conversions, lookups and error codes without a socket.
//! The real binary on loopback is driven by `tests/server.rs`.

use std::collections::BTreeMap;
use std::sync::Arc;

use axum::body::Body;
use axum::http::{header, Request, StatusCode};
use tower::ServiceExt;

use crate::index::{build_index, OpenIndex};
use crate::library::{
    DeclId, DeclKind, Declaration, DependencyGraph, FileId, Hypothesis, Language, Library, Module,
    ModuleId, Position, ReferenceCounts, SourceFile, Span, Visibility,
};
use crate::server::reload::{LiveIndex, Loaded};

use super::{router, AppState, Limits};

fn decl(id: u32, name: &str, kind: DeclKind, statement: &str, line: u32) -> Declaration {
    let at = |l: u32| Position {
        line: l,
        column: 1,
        byte: 0,
    };
    Declaration {
        id: DeclId(id),
        name: name.to_string(),
        kind,
        statement: statement.to_string(),
        hypotheses: vec![Hypothesis {
            names: vec!["q".to_string()],
            ty: "RunQueue".to_string(),
            style: Default::default(),
        }],
        conclusion: statement.split_once(',').map(|(_, c)| c.trim().to_string()),
        module: ModuleId(0),
        file: FileId(0),
        statement_span: Span {
            start: at(line),
            end: at(line),
        },
        proof_span: Some(Span {
            start: at(line + 1),
            end: at(line + 2),
        }),
        proof_ending: None,
        visibility: Visibility::Public,
        attributes: Vec::new(),
        notation: None,
        references: ReferenceCounts::default(),
        unresolved_names: Vec::new(),
    }
}

/// A run queue of a scheduler: enqueue, dequeue, length; lemmas relating them.
pub fn scheduler_library() -> Library {
    let declarations = vec![
        decl(
            0,
            "Sched.Queue.RunQueue",
            DeclKind::Inductive,
            "Inductive RunQueue : Type",
            1,
        ),
        decl(
            1,
            "Sched.Queue.enqueue",
            DeclKind::Definition,
            "Definition enqueue (t : Task) (q : RunQueue) : RunQueue",
            5,
        ),
        decl(
            2,
            "Sched.Queue.length",
            DeclKind::Definition,
            "Definition length (q : RunQueue) : nat",
            9,
        ),
        decl(
            3,
            "Sched.Queue.length_enqueue",
            DeclKind::Theorem,
            "Lemma length_enqueue : forall t q, length (enqueue t q) = S (length q)",
            13,
        ),
        decl(
            4,
            "Sched.Queue.dequeue_enqueue_empty",
            DeclKind::Theorem,
            "Lemma dequeue_enqueue_empty : forall t, dequeue (enqueue t empty) = Some (t, empty)",
            17,
        ),
        decl(
            5,
            "Sched.Other.length_enqueue",
            DeclKind::Theorem,
            "Lemma length_enqueue : forall t q, 0 < length (enqueue t q)",
            21,
        ),
    ];
    let n = declarations.len();
    Library {
        roots: vec!["/srv/sched".to_string()],
        files: vec![SourceFile {
            id: FileId(0),
            path: "theories/Queue.v".to_string(),
            root: 0,
            language: Language::Coq,
            module: Some(ModuleId(0)),
            content_hash: "00".repeat(32),
            bytes: 1000,
            diagnostics: Vec::new(),
            references: ReferenceCounts::default(),
        }],
        modules: vec![Module {
            id: ModuleId(0),
            name: "Sched.Queue".to_string(),
            file: FileId(0),
            imports: Vec::new(),
        }],
        declarations,
        // length_enqueue's proof uses enqueue and length; the other lemma uses length_enqueue.
        graph: DependencyGraph::from_edges(n, &[(3, 1), (3, 2), (5, 3)], &[(3, 1), (3, 2)]),
    }
}

/// A built, opened and served scheduler index in a temporary folder.
pub struct Fixture {
    pub _dir: tempfile::TempDir,
    pub app: axum::Router,
}

pub fn fixture(limits: Limits) -> Fixture {
    let dir = tempfile::tempdir().unwrap();
    let idx = dir.path().join("idx");
    build_index(&idx, &scheduler_library(), BTreeMap::new()).unwrap();
    let live = Arc::new(LiveIndex::new(&idx, false));
    live.install(Loaded::new(OpenIndex::open(&idx).unwrap()));
    let state = Arc::new(AppState::new(live, limits, None, false));
    Fixture {
        _dir: dir,
        app: router(state, &[]),
    }
}

async fn call(app: &axum::Router, req: Request<Body>) -> (StatusCode, serde_json::Value) {
    let response = app.clone().oneshot(req).await.unwrap();
    let status = response.status();
    let bytes = axum::body::to_bytes(response.into_body(), usize::MAX)
        .await
        .unwrap();
    let value = serde_json::from_slice(&bytes).unwrap_or(serde_json::Value::Null);
    (status, value)
}

fn post(path: &str, body: &str) -> Request<Body> {
    Request::post(path)
        .header(header::CONTENT_TYPE, "application/json")
        .body(Body::from(body.to_string()))
        .unwrap()
}

fn get(path: &str) -> Request<Body> {
    Request::get(path).body(Body::empty()).unwrap()
}

#[tokio::test]
async fn a_ranking_names_premises_from_the_library_and_the_index() {
    let f = fixture(Limits::default());
    let (status, v) = call(
        &f.app,
        post("/v1/rank", r#"{"goal": "q : RunQueue\n⊢ length (enqueue t q) = S (length q)", "limit": 3, "explain": true}"#),
    )
    .await;
    assert_eq!(status, StatusCode::OK, "{v}");
    let premises = v["premises"].as_array().unwrap();
    assert!(!premises.is_empty() && premises.len() <= 3, "{v}");
    for (i, p) in premises.iter().enumerate() {
        assert_eq!(p["rank"], i + 1);
        let name = p["name"].as_str().unwrap();
        assert!(
            scheduler_library()
                .declarations
                .iter()
                .any(|d| d.name == name),
            "{name}"
        );
        assert_eq!(p["file"], "theories/Queue.v");
        assert!(
            p.get("matched_terms").is_some(),
            "explain gives matched terms: {p}"
        );
    }
    assert!(v["index"]["build_id"]
        .as_str()
        .is_some_and(|s| !s.is_empty()));
    assert!(v["elapsed_ms"].as_f64().is_some());
}

#[tokio::test]
async fn request_fields_are_checked_against_the_library() {
    let f = fixture(Limits::default());
    for (body, code) in [
        (r#"{"goal": "length q", "limit": 0}"#, "invalid_field"),
        (r#"{"goal": "length q", "limit": 201}"#, "invalid_field"),
        (
            r#"{"goal": "length q", "kinds": ["lemma"]}"#,
            "invalid_field",
        ),
        (
            r#"{"goal": "length q", "signals": ["telepathy"]}"#,
            "invalid_field",
        ),
        (r#"{"goal": "length q", "line": 3}"#, "invalid_field"),
        (
            r#"{"goal": "length q", "file": "/etc/passwd"}"#,
            "unknown_file",
        ),
        (
            r#"{"goal": "length q", "file": "theories/Queue.v", "line": 0}"#,
            "invalid_field",
        ),
        (
            r#"{"goal": "length q", "module": "Sched.Nowhere"}"#,
            "unknown_module",
        ),
        (
            r#"{"goal": "length q", "module": "Sched.Queue", "file": "Queue.v"}"#,
            "invalid_field",
        ),
        (r#"{"goal": "length q", "signals": []}"#, "invalid_field"),
        (r#"{"goal": "length q", "limitt": 5}"#, "unknown_field"),
        (r#"{"limit": 5}"#, "missing_field"),
        (r#"{"goal": "length q""#, "malformed_json"),
    ] {
        let (status, v) = call(&f.app, post("/v1/rank", body)).await;
        assert_eq!(v["error"]["code"], code, "{body} gave {status} {v}");
        assert!(status.is_client_error(), "{body}: {status}");
    }
    let (status, v) = call(
        &f.app,
        post("/v1/rank", r#"{"goal": "length (enqueue t q)", "file": "Queue.v", "line": 14, "kinds": ["theorem", "definition"]}"#),
    )
    .await;
    assert_eq!(status, StatusCode::OK, "{v}");
    // At line 14 of Queue.v the proof of length_enqueue (lines 13–15) is being written: the
    // theorem itself and everything after it are not yet available (accessible.rs).
    for p in v["premises"].as_array().unwrap() {
        assert_ne!(p["name"], "Sched.Queue.length_enqueue");
        assert_ne!(p["name"], "Sched.Queue.dequeue_enqueue_empty");
    }
    // The same place named by its module gives the same answer.
    let (status, by_module) = call(
        &f.app,
        post("/v1/rank", r#"{"goal": "length (enqueue t q)", "module": "Sched.Queue", "line": 14, "kinds": ["theorem", "definition"]}"#),
    )
    .await;
    assert_eq!(status, StatusCode::OK, "{by_module}");
    assert_eq!(by_module["premises"], v["premises"]);
}

#[tokio::test]
async fn declarations_are_found_by_full_or_unique_partial_name() {
    let f = fixture(Limits::default());
    let (status, v) = call(&f.app, get("/v1/declarations/Sched.Queue.length_enqueue")).await;
    assert_eq!(status, StatusCode::OK, "{v}");
    assert_eq!(v["declaration"]["kind"], "theorem");
    let premises: Vec<&str> = v["premises"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap())
        .collect();
    assert_eq!(premises, ["Sched.Queue.enqueue", "Sched.Queue.length"]);
    assert_eq!(v["dependents"][0]["name"], "Sched.Other.length_enqueue");
    assert_eq!(v["dependents_total"], 1);

    let (status, v) = call(&f.app, get("/v1/declarations/Queue.dequeue_enqueue_empty")).await;
    assert_eq!(status, StatusCode::OK, "{v}");
    assert_eq!(
        v["declaration"]["name"],
        "Sched.Queue.dequeue_enqueue_empty"
    );

    let (status, v) = call(&f.app, get("/v1/declarations/length_enqueue")).await;
    assert_eq!(status, StatusCode::CONFLICT);
    assert_eq!(v["error"]["code"], "ambiguous_declaration");
    assert_eq!(v["error"]["candidates"].as_array().unwrap().len(), 2);

    let (status, v) = call(&f.app, get("/v1/declarations/Sched.Queue.pop_push")).await;
    assert_eq!(status, StatusCode::NOT_FOUND);
    assert_eq!(v["error"]["code"], "unknown_declaration");
}

#[tokio::test]
async fn routes_methods_and_media_types_are_refused_as_json() {
    let f = fixture(Limits {
        max_body_bytes: 64,
        ..Limits::default()
    });
    let (status, v) = call(&f.app, get("/v2/rank")).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::NOT_FOUND, Some("unknown_route"))
    );
    let (status, v) = call(&f.app, get("/v1/rank")).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::METHOD_NOT_ALLOWED, Some("method_not_allowed"))
    );
    let plain = Request::post("/v1/rank")
        .header(header::CONTENT_TYPE, "text/plain")
        .body(Body::from(r#"{"goal": "x"}"#))
        .unwrap();
    let (status, v) = call(&f.app, plain).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (
            StatusCode::UNSUPPORTED_MEDIA_TYPE,
            Some("unsupported_media_type")
        )
    );
    let big = format!(r#"{{"goal": "{}"}}"#, "x".repeat(100));
    let (status, v) = call(&f.app, post("/v1/rank", &big)).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::PAYLOAD_TOO_LARGE, Some("body_too_large"))
    );
}

#[tokio::test]
async fn a_batch_reports_each_item_in_place() {
    let f = fixture(Limits::default());
    let (status, v) = call(
        &f.app,
        post("/v1/rank/batch", r#"{"items": [{"goal": "length (enqueue t q)"}, {"goal": "x", "limit": 999}, {"goal": "   "}]}"#),
    )
    .await;
    assert_eq!(status, StatusCode::OK, "{v}");
    let results = v["results"].as_array().unwrap();
    assert_eq!(results.len(), 3);
    assert_eq!(results[0]["status"], 200);
    assert!(results[0]["ranking"]["premises"].is_array());
    assert_eq!(results[1]["status"], 400);
    assert_eq!(results[1]["error"]["code"], "invalid_field");
    assert_eq!(results[2]["status"], 422);
    assert_eq!(results[2]["error"]["code"], "goal_empty");
    let (status, v) = call(&f.app, post("/v1/rank/batch", r#"{"items": []}"#)).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::BAD_REQUEST, Some("batch_size"))
    );
}

#[tokio::test]
async fn status_health_and_metrics_describe_the_served_index() {
    let f = fixture(Limits::default());
    let (status, v) = call(&f.app, get("/v1/status")).await;
    assert_eq!(status, StatusCode::OK);
    assert_eq!(v["index"]["counts"]["declarations"], 6);
    assert_eq!(v["index"]["counts"]["declarations_by_kind"]["theorem"], 3);
    assert_eq!(v["quarry_version"], env!("CARGO_PKG_VERSION"));
    let (status, v) = call(&f.app, get("/readyz")).await;
    assert_eq!(
        (status, v["status"].as_str()),
        (StatusCode::OK, Some("ready"))
    );
    let response = f.app.clone().oneshot(get("/metrics")).await.unwrap();
    let bytes = axum::body::to_bytes(response.into_body(), usize::MAX)
        .await
        .unwrap();
    let text = String::from_utf8(bytes.to_vec()).unwrap();
    assert!(text.contains("quarry_index_declarations 6"), "{text}");
    assert!(
        text.contains("route=\"/v1/status\",method=\"GET\",status=\"200\""),
        "{text}"
    );
}

#[tokio::test]
async fn nothing_is_answered_before_the_first_load_but_health() {
    let dir = tempfile::tempdir().unwrap();
    let live = Arc::new(LiveIndex::new(dir.path(), false));
    let app = router(
        Arc::new(AppState::new(live, Limits::default(), None, false)),
        &[],
    );
    let (status, _) = call(&app, get("/healthz")).await;
    assert_eq!(status, StatusCode::OK);
    let (status, v) = call(&app, get("/readyz")).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::SERVICE_UNAVAILABLE, Some("not_ready"))
    );
    let (status, v) = call(&app, post("/v1/rank", r#"{"goal": "x"}"#)).await;
    assert_eq!(
        (status, v["error"]["code"].as_str()),
        (StatusCode::SERVICE_UNAVAILABLE, Some("not_ready"))
    );
}

#[test]
fn no_request_body_or_name_makes_the_server_fail() {
    use proptest::prelude::*;
    let f = fixture(Limits::default());
    let runtime = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .unwrap();
    let fields = prop::sample::select(vec![
        "goal",
        "limit",
        "file",
        "module",
        "line",
        "kinds",
        "signals",
        "explain",
        "all_goals",
        "items",
    ]);
    let values = prop::sample::select(vec![
        "\"q : RunQueue ⊢ length q = 0\"",
        "0",
        "-1",
        "4294967296",
        "201",
        "null",
        "true",
        "[]",
        "[\"theorem\"]",
        "{}",
        "\"\"",
        "\"theories/Queue.v\"",
        "\"../../etc\"",
        "1e9",
    ]);
    let body = prop::collection::vec((fields, values), 0..6).prop_map(|pairs| {
        let inner: Vec<String> = pairs.iter().map(|(k, v)| format!("\"{k}\": {v}")).collect();
        format!("{{{}}}", inner.join(", "))
    });
    let config = ProptestConfig {
        cases: 200,
        failure_persistence: None,
        ..ProptestConfig::default()
    };
    proptest!(config, |(body in body, noise in "\\PC{0,40}", name in "[A-Za-z0-9_.%']{1,30}")| {
        for (path, text) in [("/v1/rank", body.clone()), ("/v1/rank/batch", format!("{{\"items\": [{body}]}}")), ("/v1/rank", noise.clone())] {
            let (status, v) = runtime.block_on(call(&f.app, post(path, &text)));
            prop_assert!(status != StatusCode::INTERNAL_SERVER_ERROR, "{path} {text}: {v}");
            prop_assert!(status == StatusCode::OK || v["error"]["code"].is_string(), "{path} {text}: {status}");
        }
        let (status, v) = runtime.block_on(call(&f.app, get(&format!("/v1/declarations/{name}"))));
        prop_assert!(status != StatusCode::INTERNAL_SERVER_ERROR, "{name}: {v}");
    });
}
