//! The server's documented formats checked by outside implementations, from PyPI:
//! docs/openapi.yaml by `openapi-spec-validator` 0.9.0 (the OpenAPI 3.1 specification's
//! schema), and `GET /metrics` by the parser of `prometheus_client` 0.26.0 (the reference
//! Python client of Prometheus). Outside CI a missing Python or registry skips with the
//! reason printed; under `CI=true` it fails (tests/support/python.rs).

#[path = "support/server.rs"]
mod server_support;
mod support;

use std::path::Path;
use std::process::Command;

use server_support::*;

const VALIDATOR: &str = "openapi-spec-validator==0.9.0";
const PROMETHEUS: &str = "prometheus_client==0.26.0";

#[test]
fn the_openapi_document_is_valid_openapi_3_1() {
    let Some(python) = support::python::venv_with(&[VALIDATOR, PROMETHEUS]) else {
        return;
    };
    let spec = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/openapi.yaml");
    let program = r#"
import sys
from openapi_spec_validator import validate
from openapi_spec_validator.readers import read_from_filename
spec, _ = read_from_filename(sys.argv[1])
assert spec["openapi"].startswith("3.1"), spec["openapi"]
validate(spec)
print("valid", len(spec["paths"]))
"#;
    let o = Command::new(&python)
        .args(["-c", program])
        .arg(&spec)
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "docs/openapi.yaml is not valid OpenAPI: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert_eq!(out.trim(), "valid 7");
}

#[test]
fn metrics_parse_with_the_prometheus_reference_parser() {
    let Some(python) = support::python::venv_with(&[VALIDATOR, PROMETHEUS]) else {
        return;
    };
    let ix = scheduler_index();
    let server = Server::start(&ix.index, &["--quiet"]);
    let agent = client();
    for _ in 0..3 {
        assert_eq!(
            post_json(&agent, &server.url("/v1/rank"), &rank_body(GOAL)).status,
            200
        );
    }
    assert_eq!(
        post_json(&agent, &server.url("/v1/rank"), &rank_body(" ")).status,
        422
    );
    assert_eq!(get(&agent, &server.url("/no/such/route")).status, 404);
    let text = get(&agent, &server.url("/metrics")).text;

    // Prints, per family, its type; per sample, name, labels and value, one JSON per line.
    let program = r#"
import json, sys
from prometheus_client.parser import text_string_to_metric_families
for family in text_string_to_metric_families(sys.stdin.read()):
    print(json.dumps({"family": family.name, "type": family.type}))
    for s in family.samples:
        print(json.dumps({"sample": s.name, "labels": s.labels, "value": s.value}))
"#;
    let mut child = Command::new(&python)
        .args(["-c", program])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(text.as_bytes())
        .unwrap();
    let o = child.wait_with_output().unwrap();
    assert!(
        o.status.success(),
        "the reference parser refused /metrics: {}\n{text}",
        String::from_utf8_lossy(&o.stderr)
    );
    let lines: Vec<serde_json::Value> = String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let family_type = |name: &str| {
        lines
            .iter()
            .find(|l| l["family"] == name)
            .map(|l| l["type"].as_str().unwrap().to_string())
    };
    // prometheus_client names a counter family without its `_total` suffix.
    assert_eq!(
        family_type("quarry_http_requests").as_deref(),
        Some("counter")
    );
    assert_eq!(
        family_type("quarry_http_request_duration_seconds").as_deref(),
        Some("histogram")
    );
    assert_eq!(
        family_type("quarry_index_declarations").as_deref(),
        Some("gauge")
    );
    let sample = |name: &str, labels: &[(&str, &str)]| {
        lines
            .iter()
            .find(|l| {
                l["sample"] == name
                    && labels
                        .iter()
                        .all(|(k, v)| l["labels"][*k].as_str() == Some(*v))
            })
            .and_then(|l| l["value"].as_f64())
    };
    assert_eq!(
        sample(
            "quarry_http_requests_total",
            &[("route", "/v1/rank"), ("status", "200")]
        ),
        Some(3.0)
    );
    assert_eq!(
        sample(
            "quarry_http_requests_total",
            &[("route", "/v1/rank"), ("status", "422")]
        ),
        Some(1.0)
    );
    assert_eq!(
        sample(
            "quarry_http_requests_total",
            &[("route", "unmatched"), ("status", "404")]
        ),
        Some(1.0)
    );
    assert_eq!(
        sample(
            "quarry_http_request_duration_seconds_count",
            &[("route", "/v1/rank")]
        ),
        Some(4.0)
    );
    assert_eq!(
        sample(
            "quarry_http_request_duration_seconds_bucket",
            &[("route", "/v1/rank"), ("le", "+Inf")]
        ),
        Some(4.0)
    );
    let status = get(&agent, &server.url("/v1/status"));
    assert_eq!(
        sample("quarry_index_declarations", &[]),
        status.json["index"]["counts"]["declarations"].as_f64()
    );
}
