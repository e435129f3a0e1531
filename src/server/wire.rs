//! The HTTP API's JSON shapes: request bodies and responses, versioned under `/v1`.
//!
//! Takes nothing from the rest of the crate: these are plain serde types, written down once
//! here and in `docs/openapi.yaml`, so the library's internal types can change without
//! breaking clients. Requests reject unknown fields by name. It holds no conversion logic
//! (that is in `routes/`) and no defaults policy beyond the documented field defaults.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

/// The most premises one ranking may return.
pub const MAX_LIMIT: u32 = 200;
/// Premises returned when the request gives no `limit`.
pub const DEFAULT_LIMIT: u32 = 20;
/// The most goals one batch may hold.
pub const MAX_BATCH: usize = 64;
/// The most names listed for a declaration's premises or dependents.
pub const MAX_LISTED: usize = 500;

// The wire's limits stay within what ranking accepts (checked when compiling).
const _: () = assert!(
    MAX_LIMIT as usize <= crate::retrieve::MAX_LIMIT
        && DEFAULT_LIMIT >= 1
        && DEFAULT_LIMIT <= MAX_LIMIT
);

fn default_limit() -> u32 {
    DEFAULT_LIMIT
}

/// Reads an optional field that, when present, must hold a value: `null` is refused with
/// the field's own type error rather than taken as absent, as the schema says.
fn present<'de, D, T>(d: D) -> Result<Option<T>, D::Error>
where
    D: serde::Deserializer<'de>,
    T: Deserialize<'de>,
{
    T::deserialize(d).map(Some)
}

/// A whole number that fits `u32`, written as an integer or as a number with no fraction
/// (`141.0`): JSON Schema counts both as integers (JSON Schema 2020-12, validation §6.1.1),
/// and clients in languages without an integer type send the second.
fn whole_u32<'de, D: serde::Deserializer<'de>>(d: D) -> Result<u32, D::Error> {
    struct Whole;
    impl serde::de::Visitor<'_> for Whole {
        type Value = u32;
        fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.write_str("a whole number from 0 to 4294967295")
        }
        fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<u32, E> {
            u32::try_from(v)
                .map_err(|_| E::invalid_value(serde::de::Unexpected::Unsigned(v), &self))
        }
        fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<u32, E> {
            u32::try_from(v).map_err(|_| E::invalid_value(serde::de::Unexpected::Signed(v), &self))
        }
        fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<u32, E> {
            if v.fract() == 0.0 && (0.0..=f64::from(u32::MAX)).contains(&v) {
                Ok(v as u32)
            } else {
                Err(E::invalid_value(serde::de::Unexpected::Float(v), &self))
            }
        }
    }
    d.deserialize_any(Whole)
}

fn present_whole_u32<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Option<u32>, D::Error> {
    whole_u32(d).map(Some)
}

/// `POST /v1/rank`: one goal to rank premises for.
#[derive(Clone, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RankBody {
    /// The goal as an editor shows it: hypotheses, a turnstile line, the conclusion.
    pub goal: String,
    /// How many premises to return, 1 to [`MAX_LIMIT`].
    #[serde(default = "default_limit", deserialize_with = "whole_u32")]
    pub limit: u32,
    /// The file the cursor is in, as indexed (or a unique ending of that path).
    #[serde(
        default,
        deserialize_with = "present",
        skip_serializing_if = "Option::is_none"
    )]
    pub file: Option<String>,
    /// The module the cursor is in (instead of `file`), by its full name.
    #[serde(
        default,
        deserialize_with = "present",
        skip_serializing_if = "Option::is_none"
    )]
    pub module: Option<String>,
    /// The cursor's 1-based line in `file` (or in `module`'s file).
    #[serde(
        default,
        deserialize_with = "present_whole_u32",
        skip_serializing_if = "Option::is_none"
    )]
    pub line: Option<u32>,
    /// Only premises of these kinds (`theorem`, `definition`, ...).
    #[serde(
        default,
        deserialize_with = "present",
        skip_serializing_if = "Option::is_none"
    )]
    pub kinds: Option<Vec<String>>,
    /// Only these signals (`lexical`, ...); all of the index's signals when absent.
    #[serde(
        default,
        deserialize_with = "present",
        skip_serializing_if = "Option::is_none"
    )]
    pub signals: Option<Vec<String>>,
    /// Also return each premise's matched terms and voting neighbours.
    #[serde(default)]
    pub explain: bool,
    /// Rank for every goal of a multi-goal state, not just the first.
    #[serde(default)]
    pub all_goals: bool,
}

/// `POST /v1/rank/batch`: several goals at once, each an independent [`RankBody`].
#[derive(Clone, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct BatchBody {
    /// 1 to [`MAX_BATCH`] rank requests.
    pub items: Vec<RankBody>,
}

/// Which index answered: the same build id means the same ranking for the same request.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct IndexIdentity {
    pub build_id: String,
    /// When the index was built, RFC 3339 UTC.
    pub created: String,
}

/// One hypothesis of a goal or a statement.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct HypothesisWire {
    /// The bound names; empty for an anonymous hypothesis.
    pub names: Vec<String>,
    /// Its type, as written.
    #[serde(rename = "type")]
    pub ty: String,
    /// The value of a let-bound hypothesis (`x := 3`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub value: Option<String>,
}

/// One goal as the server understood it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct GoalWire {
    /// Lean's `case` tag, when the display gives one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub case: Option<String>,
    pub hypotheses: Vec<HypothesisWire>,
    /// What is to be proved.
    pub conclusion: String,
}

/// A weighted term the ranking searched for.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct QueryTermWire {
    pub text: String,
    pub weight: f64,
}

/// The pasted text as the server understood it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ParsedGoalWire {
    /// The format detected: `lean`, `coq`, `isabelle`, `statement`, `declaration_header`.
    pub format: String,
    /// Every goal of the text, in display order.
    pub goals: Vec<GoalWire>,
    /// How many of them were ranked for (1 unless `all_goals`).
    pub ranked_goals: usize,
    /// The weighted terms drawn from the ranked goals.
    pub terms: Vec<QueryTermWire>,
}

/// How one signal ranked a premise.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SignalRankWire {
    /// The signal's name (`lexical`, ...).
    pub signal: String,
    /// 1-based rank of the premise in that signal's own list.
    pub rank: u32,
    /// That signal's score (its scale is the signal's own).
    pub score: f64,
}

/// One ranked premise.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RankedPremiseWire {
    /// 1-based position in the answer.
    pub rank: u32,
    /// Fully qualified name.
    pub name: String,
    pub kind: String,
    pub statement: String,
    pub module: String,
    /// The file's path as indexed (relative to its library root).
    pub file: String,
    pub line: u32,
    pub column: u32,
    /// The fused score; higher is better.
    pub score: f64,
    /// Every signal that found the premise.
    pub signals: Vec<SignalRankWire>,
    /// With `explain`: the query's terms found in the premise's name or statement.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub matched_terms: Option<Vec<String>>,
    /// With `explain`: the neighbour theorems whose proofs voted for it, strongest first.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub voters: Option<Vec<String>>,
}

/// The answer of `POST /v1/rank`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RankResponse {
    pub index: IndexIdentity,
    pub goal: ParsedGoalWire,
    pub premises: Vec<RankedPremiseWire>,
    /// How many premises were allowed to answer (after the place and kind filters).
    pub candidates: u64,
    /// Time spent ranking, in milliseconds (without network and queueing).
    pub elapsed_ms: f64,
}

/// One item of a batch answer: a ranking or an error, with the status it would have had.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BatchItemWire {
    pub status: u16,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ranking: Option<RankResponse>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub error: Option<serde_json::Value>,
}

/// The answer of `POST /v1/rank/batch`: one item per request item, in order.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BatchResponse {
    pub index: IndexIdentity,
    pub results: Vec<BatchItemWire>,
    /// Wall time for the whole batch, in milliseconds.
    pub elapsed_ms: f64,
}

/// A declaration named in a list (premises, dependents).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct DeclarationRef {
    pub name: String,
    pub kind: String,
}

/// One declaration in full.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct DeclarationWire {
    pub name: String,
    pub kind: String,
    pub module: String,
    /// The file's path as indexed.
    pub file: String,
    pub line: u32,
    pub column: u32,
    pub statement: String,
    pub hypotheses: Vec<HypothesisWire>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub conclusion: Option<String>,
    /// `public`, `private`, `protected` or `local`.
    pub visibility: String,
    pub attributes: Vec<String>,
}

/// The answer of `GET /v1/declarations/{name}`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct DeclarationResponse {
    pub index: IndexIdentity,
    pub declaration: DeclarationWire,
    /// What its proof (or body) uses, at most [`MAX_LISTED`].
    pub premises: Vec<DeclarationRef>,
    pub premises_total: u64,
    /// What its statement refers to, at most [`MAX_LISTED`].
    pub statement_references: Vec<DeclarationRef>,
    pub statement_references_total: u64,
    /// The declarations whose proofs use it, at most [`MAX_LISTED`].
    pub dependents: Vec<DeclarationRef>,
    pub dependents_total: u64,
}

/// Counts of the served index.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct CountsWire {
    pub files: u64,
    pub modules: u64,
    pub declarations: u64,
    pub declarations_by_kind: BTreeMap<String, u64>,
    pub proof_edges: u64,
    pub statement_edges: u64,
}

/// The served index in `GET /v1/status`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct IndexStatusWire {
    pub build_id: String,
    pub created: String,
    /// The quarry version that built it.
    pub built_by: String,
    pub format_version: u32,
    /// Bytes of every part of the generation on disk.
    pub bytes: u64,
    pub counts: CountsWire,
    /// When this server loaded it, RFC 3339 UTC.
    pub loaded: String,
}

/// Reload history in `GET /v1/status`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ReloadStatusWire {
    /// Generations loaded and swapped in after the first.
    pub reloads: u64,
    /// Attempts refused because the new generation could not be opened.
    pub failures: u64,
    /// Why the last refused attempt failed, if the last attempt failed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub last_error: Option<String>,
    /// Whether the server watches the index folder for new builds.
    pub watching: bool,
}

/// The server's limits in `GET /v1/status`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LimitsWire {
    pub max_body_bytes: u64,
    pub request_timeout_ms: u64,
    pub body_timeout_ms: u64,
    pub workers: u64,
    pub max_pending: u64,
    pub max_batch: u64,
    pub max_limit: u64,
}

/// The answer of `GET /v1/status`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct StatusResponse {
    pub quarry_version: String,
    pub api_version: String,
    pub uptime_seconds: u64,
    /// When the server started, RFC 3339 UTC.
    pub started: String,
    pub index: IndexStatusWire,
    pub reload: ReloadStatusWire,
    pub limits: LimitsWire,
    /// The signal names a request may list in `signals`.
    pub signals: Vec<String>,
    /// The kind names a request may list in `kinds`.
    pub kinds: Vec<String>,
}

/// The answer of `GET /healthz` and `GET /readyz`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct HealthResponse {
    /// `alive` or `ready`.
    pub status: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub build_id: Option<String>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_minimal_rank_body_takes_the_documented_defaults() {
        let b: RankBody =
            serde_json::from_str(r#"{"goal": "q : Queue ⊢ size (push q x) = size q + 1"}"#)
                .unwrap();
        assert_eq!(b.limit, DEFAULT_LIMIT);
        assert!(!b.explain && !b.all_goals);
        assert!(b.file.is_none() && b.module.is_none() && b.line.is_none());
        assert!(b.kinds.is_none() && b.signals.is_none());
    }

    #[test]
    fn whole_numbers_may_be_written_with_a_zero_fraction_and_null_is_not_absence() {
        // JSON Schema 2020-12 (validation, "type"): 141.0 is an integer; 141.5 is not.
        let b: RankBody =
            serde_json::from_str(r#"{"goal": "x", "limit": 141.0, "line": 7.0}"#).unwrap();
        assert_eq!((b.limit, b.line), (141, Some(7)));
        for bad in [
            r#"{"goal": "x", "limit": 141.5}"#,
            r#"{"goal": "x", "limit": -1}"#,
            r#"{"goal": "x", "limit": 1e12}"#,
            r#"{"goal": "x", "limit": "20"}"#,
            r#"{"goal": "x", "line": 0.25}"#,
        ] {
            assert!(serde_json::from_str::<RankBody>(bad).is_err(), "{bad}");
        }
        for field in ["file", "module", "line", "kinds", "signals"] {
            let body = format!(r#"{{"goal": "x", "{field}": null}}"#);
            let e = serde_json::from_str::<RankBody>(&body).unwrap_err();
            assert!(e.to_string().contains("null"), "{field}: {e}");
        }
    }

    #[test]
    fn unknown_fields_are_refused_by_name_at_every_level() {
        let e = serde_json::from_str::<RankBody>(r#"{"goal": "x", "limits": 3}"#).unwrap_err();
        assert!(e.to_string().contains("`limits`"), "{e}");
        let e = serde_json::from_str::<BatchBody>(r#"{"items": [{"goal": "x", "explan": true}]}"#)
            .unwrap_err();
        assert!(e.to_string().contains("`explan`"), "{e}");
    }

    #[test]
    fn a_hypothesis_type_is_called_type_on_the_wire() {
        let h = HypothesisWire {
            names: vec!["q".into()],
            ty: "Queue".into(),
            value: None,
        };
        let v = serde_json::to_value(&h).unwrap();
        assert_eq!(v["type"], "Queue");
        assert!(v.get("value").is_none());
    }
}
