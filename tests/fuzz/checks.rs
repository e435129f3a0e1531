//! What each fuzz target checks, shared by the libFuzzer targets (`fuzz_targets/`) and the
//! regression test that replays the saved crashing inputs (`tests/fuzz_regressions.rs`).
//!
//! Takes raw bytes (text is read as UTF-8, invalid sequences replaced, the way a library's
//! files and a request body reach quarry); gives nothing, and panics when a function under
//! test panics or breaks a promise its documentation makes (offsets inside the text, scopes
//! that exist, a decoded request that encodes back to itself). It deliberately checks no
//! ranking quality: only that odd input is handled.

use std::path::Path;

use quarry::library::Library;
use quarry::query::{parse_goal, GoalSelection};
use quarry::server::body::decode_json;
use quarry::server::routes::rank_request as checked_rank_request;
use quarry::server::wire::{BatchBody, RankBody};
use quarry::tokens::Tokenizer;

/// The bytes as text, invalid UTF-8 replaced by U+FFFD.
fn text_of(data: &[u8]) -> std::borrow::Cow<'_, str> {
    String::from_utf8_lossy(data)
}

/// Every byte offset and scope a frontend reports lies inside the file it read.
fn check_extraction(text: &str, out: &quarry::extract::FileExtraction) {
    let len = text.len() as u64;
    assert!(
        !out.scopes.is_empty(),
        "a file always has its top-level scope"
    );
    for d in &out.declarations {
        let s = d.statement_span;
        assert!(
            u64::from(s.start.byte) <= u64::from(s.end.byte) && u64::from(s.end.byte) <= len,
            "statement span {s:?} of `{}` outside 0..{len}",
            d.name
        );
        if let Some(p) = d.proof_span {
            assert!(
                u64::from(p.start.byte) <= u64::from(p.end.byte) && u64::from(p.end.byte) <= len,
                "proof span {p:?} of `{}` outside 0..{len}",
                d.name
            );
        }
        assert!(
            d.scope < out.scopes.len(),
            "`{}` points at scope {} of {}",
            d.name,
            d.scope,
            out.scopes.len()
        );
        for r in d.statement_refs.iter().chain(&d.proof_refs) {
            assert!(
                u64::from(r.offset) <= len,
                "reference `{}` at {} past the end {len}",
                r.name,
                r.offset
            );
        }
    }
}

/// The Lean 4 frontend on one file.
pub fn lean_frontend(data: &[u8]) {
    let text = text_of(data);
    let out = quarry::extract::lean::extract("Fuzz.Input", &text);
    check_extraction(&text, &out);
}

/// The Coq frontend on one file, and its sentence splitter.
pub fn coq_frontend(data: &[u8]) {
    let text = text_of(data);
    let out = quarry::extract::coq::extract("Fuzz.Input", &text);
    check_extraction(&text, &out);
    let _ = quarry::extract::coq::sentence_spans(&text);
}

/// The goal-state parser, then the query terms every signal asks with.
pub fn goal_parser(data: &[u8]) {
    let text = text_of(data);
    if let Ok(state) = parse_goal(&text) {
        for which in [GoalSelection::First, GoalSelection::All] {
            for term in state.query_terms(Tokenizer::standard(), which) {
                assert!(
                    term.weight.is_finite(),
                    "term {term:?} has a weight that is not finite"
                );
            }
        }
    }
}

/// The shared tokenizer: lexemes and tokens point at real, whole characters of the text.
pub fn tokenizer(data: &[u8]) {
    let text = text_of(data);
    let tokenizer = Tokenizer::standard();
    let mut last = 0;
    for lexeme in tokenizer.lexemes(&text) {
        assert!(
            lexeme.start >= last,
            "lexemes go backwards at {}",
            lexeme.start
        );
        assert_eq!(
            text.get(lexeme.start..lexeme.end()),
            Some(lexeme.text),
            "lexeme {lexeme:?} is not the text at its offsets"
        );
        last = lexeme.end();
    }
    let tokens = tokenizer.tokenize(&text);
    for token in tokens.iter() {
        assert!(
            !token.text.is_empty(),
            "an empty token from {:?}",
            token.source
        );
        assert!(
            text.get(token.source.clone()).is_some(),
            "token {token:?} has a source range that is not in the text"
        );
    }
}

/// The library `/v1/rank` requests are checked against in the fuzz target and its test.
pub fn fixture_library(fixtures: &Path) -> Library {
    quarry::extract::build_library(&quarry::extract::BuildOptions {
        roots: vec![fixtures.to_path_buf()],
        coq_prefixes: Vec::new(),
        threads: Some(1),
        progress: false,
    })
    .unwrap_or_else(|e| panic!("the fixture library `{}` builds: {e}", fixtures.display()))
}

/// The `/v1/rank` and `/v1/rank/batch` body decoders, then the checks against a library
/// that turn a body into a ranking request.
pub fn rank_request(library: &Library, data: &[u8]) {
    if let Ok(body) = decode_json::<RankBody>(data) {
        let again = serde_json::to_vec(&body).expect("a decoded body encodes");
        let back: RankBody = decode_json(&again).expect("an encoded body decodes");
        assert_eq!(
            back, body,
            "a rank body changes when encoded and decoded again"
        );
        let _ = checked_rank_request(&body, library);
    }
    if let Ok(batch) = decode_json::<BatchBody>(data) {
        for item in batch.items.iter().take(64) {
            let _ = checked_rank_request(item, library);
        }
    }
}
