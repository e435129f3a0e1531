//! `POST /v1/rank` and `POST /v1/rank/batch`: wire request → `RankRequest` → wire ranking.
//!
//! Takes a [`RankBody`] (or a batch of them) and the generation live when the request
//! started; gives the ranked premises in wire form. The `file` field is matched only against
//! the index's own file list (`place_of_file` never touches the disk). Ranking runs on a
//! blocking worker; a batch runs on one worker, item after item, against one generation, and
//! reports each item's error in place. It holds no ranking logic of its own.

use std::sync::Arc;
use std::time::Instant;

use axum::body::Body;
use axum::extract::State;
use axum::http::HeaderMap;
use axum::Json;

use crate::library::{DeclKind, Library};
use crate::query::GoalError;
use crate::retrieve::accessible::{module_by_name, place_of_file, PlaceError, QueryPlace};
use crate::retrieve::{rank, PremiseRanking, RankError, RankRequest, Signal};
use crate::server::body::json_body;
use crate::server::errors::{ApiError, ErrorCode};
use crate::server::reload::Loaded;
use crate::server::wire::{
    BatchBody, BatchItemWire, BatchResponse, GoalWire, HypothesisWire, ParsedGoalWire,
    QueryTermWire, RankBody, RankResponse, RankedPremiseWire, SignalRankWire, MAX_BATCH, MAX_LIMIT,
};

use super::info::{file_of, identity, module_of};
use super::{on_worker, Shared};

/// Goals up to this size are ranked on the thread that read the request (see
/// `on_worker`); longer ones on a blocking thread. 500 goal states drawn from the Coq
/// standard library's proofs were all under 3.5 KB (p99 2.75 KB); ten goals of 8 KiB (its
/// hypotheses stacked) took 2.1–2.9 ms to rank on its index, five of 16 KiB 5.5–6.4 ms and
/// five of 64 KiB 11–15 ms (server's `elapsed_ms`, release build, 3 December 2026).
const SHORT_GOAL_BYTES: usize = 8 * 1024;

/// The signal names a request may give in `signals`.
pub fn signal_names() -> Vec<String> {
    Signal::ALL.iter().map(|s| s.as_str().to_string()).collect()
}

fn invalid(message: String) -> ApiError {
    ApiError::new(ErrorCode::InvalidField, message)
}

fn place_error(e: PlaceError) -> ApiError {
    let code = match e {
        PlaceError::AmbiguousFile { .. } => ErrorCode::AmbiguousFile,
        PlaceError::BadLine(_) => ErrorCode::InvalidField,
        PlaceError::UnknownFile(_) => ErrorCode::UnknownFile,
        PlaceError::UnknownModule(_) => ErrorCode::UnknownModule,
    };
    ApiError::new(code, e.to_string())
}

/// Checks a rank body against the served library and turns it into a ranking request.
pub fn rank_request(body: &RankBody, library: &Library) -> Result<RankRequest, ApiError> {
    if body.limit == 0 || body.limit > MAX_LIMIT {
        return Err(invalid(format!(
            "field `limit`: must be between 1 and {MAX_LIMIT}, got {}",
            body.limit
        )));
    }
    if body.line == Some(0) {
        return Err(invalid("field `line`: lines start at 1, got 0".to_string()));
    }
    let place = match (&body.file, &body.module, body.line) {
        (Some(_), Some(_), _) => {
            return Err(invalid(
                "fields `file` and `module`: give one place, not both".to_string(),
            ))
        }
        (Some(file), None, line) => Some(place_of_file(library, file, line).map_err(place_error)?),
        (None, Some(module), line) => Some(QueryPlace {
            module: module_by_name(library, module).map_err(place_error)?,
            line,
        }),
        (None, None, Some(_)) => {
            return Err(invalid(
                "field `line`: a line needs the `file` (or `module`) it is in".to_string(),
            ))
        }
        (None, None, None) => None,
    };
    let kinds = match &body.kinds {
        None => None,
        Some(names) => Some(
            names
                .iter()
                .map(|n| {
                    DeclKind::parse(n).ok_or_else(|| {
                        let all: Vec<&str> = DeclKind::ALL.iter().map(|k| k.as_str()).collect();
                        invalid(format!(
                            "field `kinds`: unknown kind `{n}`; the kinds are {}",
                            all.join(", ")
                        ))
                    })
                })
                .collect::<Result<Vec<_>, _>>()?,
        ),
    };
    let signals = match &body.signals {
        None => None,
        Some(names) => Some(
            names
                .iter()
                .map(|n| {
                    Signal::parse(n).ok_or_else(|| {
                        invalid(format!(
                            "field `signals`: unknown signal `{n}`; the signals are {}",
                            signal_names().join(", ")
                        ))
                    })
                })
                .collect::<Result<Vec<_>, _>>()?,
        ),
    };
    Ok(RankRequest {
        goal: body.goal.clone(),
        limit: body.limit as usize,
        place,
        kinds,
        signals,
        all_goals: body.all_goals,
        explain: body.explain,
    })
}

/// The API error for a ranking that failed.
fn rank_error(e: RankError) -> ApiError {
    let code = match &e {
        RankError::Goal(GoalError::Empty) => ErrorCode::GoalEmpty,
        RankError::Goal(GoalError::TooLarge { .. }) => ErrorCode::GoalTooLarge,
        RankError::Goal(GoalError::NothingToRank) | RankError::NoTerms => ErrorCode::GoalUnparsable,
        RankError::Goal(GoalError::NoGoals { .. }) => ErrorCode::NoGoals,
        RankError::Limit(_) | RankError::NoSignals => ErrorCode::InvalidField,
        RankError::Lexical(_) => ErrorCode::Internal,
    };
    if code == ErrorCode::Internal {
        eprintln!("quarry: ranking failed: {e}");
    }
    ApiError::new(code, e.to_string())
}

/// An `f32` as the `f64` with the same shortest decimal form, so JSON shows `16.440544`
/// rather than the binary expansion `16.44054412841797`.
fn widen(x: f32) -> f64 {
    if !x.is_finite() {
        return 0.0;
    }
    x.to_string().parse().unwrap_or(f64::from(x))
}

/// A ranking in wire form.
pub fn rank_response(loaded: &Loaded, ranking: &PremiseRanking, body: &RankBody) -> RankResponse {
    let library = &loaded.index.library;
    let premises = ranking
        .premises
        .iter()
        .filter_map(|p| {
            let d = library.declarations.get(p.id.0 as usize)?;
            Some((p, d))
        })
        .enumerate()
        .map(|(i, (p, d))| RankedPremiseWire {
            rank: i as u32 + 1,
            name: d.name.clone(),
            kind: d.kind.as_str().to_string(),
            statement: d.statement.clone(),
            module: module_of(library, d),
            file: file_of(library, d),
            line: d.statement_span.start.line,
            column: d.statement_span.start.column,
            score: widen(p.score),
            signals: p
                .evidence
                .iter()
                .map(|e| SignalRankWire {
                    signal: e.signal.as_str().to_string(),
                    rank: e.rank,
                    score: widen(e.score),
                })
                .collect(),
            matched_terms: body.explain.then(|| p.matched_terms.clone()),
            voters: body.explain.then(|| {
                p.voters
                    .iter()
                    .filter_map(|v| library.declarations.get(v.0 as usize))
                    .map(|v| v.name.clone())
                    .collect()
            }),
        })
        .collect();
    let state = &ranking.goal;
    let goals: Vec<GoalWire> = state
        .goals
        .iter()
        .map(|g| GoalWire {
            case: g.case.clone(),
            hypotheses: g
                .hypotheses
                .iter()
                .map(|h| HypothesisWire {
                    names: h.names.clone(),
                    ty: h.ty.clone(),
                    value: h.value.clone(),
                })
                .collect(),
            conclusion: g.conclusion.clone(),
        })
        .collect();
    let ranked_goals = if body.all_goals {
        goals.len()
    } else {
        goals.len().min(1)
    };
    RankResponse {
        index: identity(loaded),
        goal: ParsedGoalWire {
            format: state.format.as_str().to_string(),
            goals,
            ranked_goals,
            terms: ranking
                .terms
                .iter()
                .map(|t| QueryTermWire {
                    text: t.text.clone(),
                    weight: widen(t.weight),
                })
                .collect(),
        },
        premises,
        candidates: ranking.candidates as u64,
        elapsed_ms: ranking.elapsed.as_secs_f64() * 1000.0,
    }
}

/// Ranks one body against `loaded` (on the calling thread).
fn rank_body(loaded: &Loaded, body: &RankBody) -> Result<RankResponse, ApiError> {
    let request = rank_request(body, &loaded.index.library)?;
    let ranking = rank(&loaded.index, &request).map_err(rank_error)?;
    Ok(rank_response(loaded, &ranking, body))
}

/// `POST /v1/rank`.
pub async fn rank_one(
    State(state): State<Shared>,
    headers: HeaderMap,
    body: Body,
) -> Result<Json<RankResponse>, ApiError> {
    let body: RankBody = json_body(
        &headers,
        body,
        state.limits.max_body_bytes,
        state.limits.body_timeout,
    )
    .await?;
    let loaded = state.loaded()?;
    let short = body.goal.len() <= SHORT_GOAL_BYTES;
    let answer = on_worker(&state, short, move || rank_body(&loaded, &body)).await??;
    Ok(Json(answer))
}

/// `POST /v1/rank/batch`.
pub async fn rank_batch(
    State(state): State<Shared>,
    headers: HeaderMap,
    body: Body,
) -> Result<Json<BatchResponse>, ApiError> {
    let batch: BatchBody = json_body(
        &headers,
        body,
        state.limits.max_body_bytes,
        state.limits.body_timeout,
    )
    .await?;
    if batch.items.is_empty() || batch.items.len() > MAX_BATCH {
        return Err(ApiError::new(
            ErrorCode::BatchSize,
            format!(
                "field `items`: a batch holds 1 to {MAX_BATCH} goals, got {}",
                batch.items.len()
            ),
        ));
    }
    let loaded: Arc<Loaded> = state.loaded()?;
    let started = Instant::now();
    let index = identity(&loaded);
    let results = on_worker(&state, false, move || {
        batch
            .items
            .iter()
            .map(|item| match rank_body(&loaded, item) {
                Ok(ranking) => BatchItemWire {
                    status: 200,
                    ranking: Some(ranking),
                    error: None,
                },
                Err(e) => BatchItemWire {
                    status: e.code.status().as_u16(),
                    ranking: None,
                    error: serde_json::to_value(e.body().error).ok(),
                },
            })
            .collect::<Vec<_>>()
    })
    .await?;
    Ok(Json(BatchResponse {
        index,
        results,
        elapsed_ms: started.elapsed().as_secs_f64() * 1000.0,
    }))
}

#[cfg(test)]
mod tests {
    use super::widen;

    #[test]
    fn scores_keep_their_short_decimal_form() {
        assert_eq!(widen(16.440544).to_string(), "16.440544");
        assert_eq!(widen(0.5), 0.5);
        assert_eq!(widen(f32::NAN), 0.0);
    }
}
