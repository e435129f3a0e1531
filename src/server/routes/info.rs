//! Read-only endpoints: one declaration, the server's status, health, readiness, metrics.
//!
//! Takes the shared state; gives wire types. Names are looked up in the served library only
//! (exact name first, then a unique partial name), never on disk.

use axum::extract::rejection::PathRejection;
use axum::extract::{Path, State};
use axum::http::{header, HeaderValue, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::Json;

use crate::library::{DeclId, DeclKind, Declaration, Library, Visibility};
use crate::server::errors::{ApiError, ErrorCode};
use crate::server::metrics::IndexGauges;
use crate::server::reload::Loaded;
use crate::server::wire::{
    CountsWire, DeclarationRef, DeclarationResponse, DeclarationWire, HealthResponse,
    HypothesisWire, IndexIdentity, IndexStatusWire, LimitsWire, ReloadStatusWire, StatusResponse,
    MAX_BATCH, MAX_LIMIT, MAX_LISTED,
};

use super::Shared;

/// The API version in paths (`/v1`) and in `GET /v1/status`.
pub const API_VERSION: &str = "v1";

/// The identity of a loaded generation.
pub fn identity(loaded: &Loaded) -> IndexIdentity {
    IndexIdentity {
        build_id: loaded.index.generation.manifest.build_id.clone(),
        created: loaded.index.generation.manifest.created.clone(),
    }
}

/// The wire form of a hypothesis of the library model.
pub fn hypothesis_wire(h: &crate::library::Hypothesis) -> HypothesisWire {
    HypothesisWire {
        names: h.names.clone(),
        ty: h.ty.clone(),
        value: None,
    }
}

fn visibility_name(v: Visibility) -> &'static str {
    match v {
        Visibility::Public => "public",
        Visibility::Private => "private",
        Visibility::Protected => "protected",
        Visibility::Local => "local",
    }
}

/// The file path of a declaration as indexed (relative to its library root).
pub fn file_of(library: &Library, d: &Declaration) -> String {
    library
        .files
        .get(d.file.0 as usize)
        .map(|f| f.path.clone())
        .unwrap_or_default()
}

/// The module name of a declaration.
pub fn module_of(library: &Library, d: &Declaration) -> String {
    library
        .modules
        .get(d.module.0 as usize)
        .map(|m| m.name.clone())
        .unwrap_or_default()
}

fn refs(library: &Library, ids: impl Iterator<Item = DeclId>) -> (Vec<DeclarationRef>, u64) {
    let mut listed = Vec::new();
    let mut total = 0u64;
    for id in ids {
        total += 1;
        if listed.len() < MAX_LISTED {
            if let Some(d) = library.declarations.get(id.0 as usize) {
                listed.push(DeclarationRef {
                    name: d.name.clone(),
                    kind: d.kind.as_str().to_string(),
                });
            }
        }
    }
    (listed, total)
}

/// `GET /v1/declarations/{name}`.
pub async fn declaration(
    State(state): State<Shared>,
    name: Result<Path<String>, PathRejection>,
) -> Result<Json<DeclarationResponse>, ApiError> {
    let Path(name) = name.map_err(|e| {
        ApiError::new(
            ErrorCode::InvalidField,
            format!("the declaration name in the path cannot be read: {e}"),
        )
    })?;
    let loaded = state.loaded()?;
    let library = &loaded.index.library;
    let mut hits = library.find_exact(&name);
    if hits.is_empty() {
        hits = library.find_by_suffix(&name);
    }
    let id = match hits.as_slice() {
        [] => {
            return Err(ApiError::new(
                ErrorCode::UnknownDeclaration,
                format!("no declaration named `{name}` in the index"),
            ))
        }
        [one] => *one,
        many => {
            let names = many
                .iter()
                .take(20)
                .filter_map(|id| library.declarations.get(id.0 as usize))
                .map(|d| d.name.clone())
                .collect();
            return Err(ApiError::new(
                ErrorCode::AmbiguousDeclaration,
                format!(
                    "`{name}` names {} declarations; give more of the name",
                    many.len()
                ),
            )
            .with_candidates(names));
        }
    };
    let Some(d) = library.declarations.get(id.0 as usize) else {
        return Err(ApiError::new(
            ErrorCode::Internal,
            "the index lists a missing declaration",
        ));
    };
    let graph = &library.graph;
    let (premises, premises_total) = refs(library, graph.premises(id));
    let (statement_references, statement_references_total) =
        refs(library, graph.statement_uses.neighbours(id));
    let (dependents, dependents_total) = refs(library, graph.dependents(id));
    Ok(Json(DeclarationResponse {
        index: identity(&loaded),
        declaration: DeclarationWire {
            name: d.name.clone(),
            kind: d.kind.as_str().to_string(),
            module: module_of(library, d),
            file: file_of(library, d),
            line: d.statement_span.start.line,
            column: d.statement_span.start.column,
            statement: d.statement.clone(),
            hypotheses: d.hypotheses.iter().map(hypothesis_wire).collect(),
            conclusion: d.conclusion.clone(),
            visibility: visibility_name(d.visibility).to_string(),
            attributes: d.attributes.clone(),
        },
        premises,
        premises_total,
        statement_references,
        statement_references_total,
        dependents,
        dependents_total,
    }))
}

/// `GET /v1/status`.
pub async fn status(State(state): State<Shared>) -> Result<Json<StatusResponse>, ApiError> {
    let loaded = state.loaded()?;
    let m = &loaded.index.generation.manifest;
    let c = &m.counts;
    Ok(Json(StatusResponse {
        quarry_version: env!("CARGO_PKG_VERSION").to_string(),
        api_version: API_VERSION.to_string(),
        uptime_seconds: state.uptime().as_secs(),
        started: humantime::format_rfc3339_seconds(state.started).to_string(),
        index: IndexStatusWire {
            build_id: m.build_id.clone(),
            created: m.created.clone(),
            built_by: m.quarry_version.clone(),
            format_version: m.format_version,
            bytes: loaded.bytes,
            counts: CountsWire {
                files: c.files,
                modules: c.modules,
                declarations: c.declarations,
                declarations_by_kind: c.declarations_by_kind.clone(),
                proof_edges: c.proof_edges,
                statement_edges: c.statement_edges,
            },
            loaded: humantime::format_rfc3339_seconds(loaded.loaded_at).to_string(),
        },
        reload: ReloadStatusWire {
            reloads: state.live.reloads(),
            failures: state.live.failures(),
            last_error: state.live.last_error(),
            watching: state.watching.load(std::sync::atomic::Ordering::Relaxed),
        },
        limits: LimitsWire {
            max_body_bytes: state.limits.max_body_bytes as u64,
            request_timeout_ms: state.limits.request_timeout.as_millis() as u64,
            body_timeout_ms: state.limits.body_timeout.as_millis() as u64,
            workers: state.limits.workers as u64,
            max_pending: state.limits.max_pending as u64,
            max_batch: MAX_BATCH as u64,
            max_limit: MAX_LIMIT as u64,
        },
        signals: super::rank::signal_names(),
        kinds: DeclKind::ALL
            .iter()
            .map(|k| k.as_str().to_string())
            .collect(),
    }))
}

/// `GET /healthz`: the process answers.
pub async fn healthz() -> Json<HealthResponse> {
    Json(HealthResponse {
        status: "alive".to_string(),
        build_id: None,
    })
}

/// `GET /readyz`: an index is loaded (503 `not_ready` before).
pub async fn readyz(State(state): State<Shared>) -> Result<Json<HealthResponse>, ApiError> {
    let loaded = state.loaded()?;
    Ok(Json(HealthResponse {
        status: "ready".to_string(),
        build_id: Some(loaded.index.generation.manifest.build_id.clone()),
    }))
}

/// `GET /metrics`: Prometheus text format.
pub async fn metrics(State(state): State<Shared>) -> Response {
    let mut gauges = IndexGauges {
        reloads: state.live.reloads(),
        reload_failures: state.live.failures(),
        uptime_seconds: state.uptime().as_secs_f64(),
        in_flight: state.in_flight.load(std::sync::atomic::Ordering::Relaxed),
        ..IndexGauges::default()
    };
    if let Some(loaded) = state.live.current() {
        let c = &loaded.index.generation.manifest.counts;
        gauges.declarations = c.declarations;
        gauges.files = c.files;
        gauges.modules = c.modules;
        gauges.bytes = loaded.bytes;
    }
    let text = state.metrics.render(&gauges);
    let mut response = (StatusCode::OK, text).into_response();
    response.headers_mut().insert(
        header::CONTENT_TYPE,
        HeaderValue::from_static("text/plain; version=0.0.4; charset=utf-8"),
    );
    response
}
