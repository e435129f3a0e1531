//! The index: the parts built from the library model that retrieval reads, and the opened
//! index that serves queries.
//!
//! Takes a [`Library`]; gives, inside a generation folder, the library model and the lexical
//! index (tantivy), and opens them again as an [`OpenIndex`] — the one value the command
//! line, the server and evaluation query. It reads no source files and ranks nothing.

pub mod lexical;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use crate::library::store::{self, Generation, GenerationWriter, StoreError};
use crate::library::{Library, NotationInfo};
use crate::retrieve::accessible::{accessible_premises, PremiseFilter};
use crate::tokens::Tokenizer;
use lexical::{LexicalError, LexicalIndex, TokenizeFn, LEXICAL_PART};

/// Why an index could not be built or opened.
#[derive(Debug, thiserror::Error)]
pub enum IndexError {
    #[error(transparent)]
    Store(#[from] StoreError),
    #[error(transparent)]
    Lexical(#[from] LexicalError),
}

/// The most words one library-defined symbol teaches.
const WORDS_PER_LEARNED_SYMBOL: usize = 1;

/// The shared tokenizer of a library: the built-in operator table extended by the
/// library's own notation declarations.
///
/// A symbol the built-in table already knows keeps its words: a large library declares
/// `+` once per number system (`Qplus`, `Rplus`, `Zplus`, ...), and teaching all of them
/// would turn every `+` of every goal into a dozen query terms. A symbol the built-in table
/// does not know (`⊕`, `+++`) learns the name most of its notations unfold to (ties: the
/// first in name order), so the result does not depend on declaration order.
pub fn library_tokenizer(library: &Library) -> Tokenizer {
    use crate::tokens::TokenKind;
    let standard = Tokenizer::standard();
    let mut targets: BTreeMap<&str, BTreeMap<&str, usize>> = BTreeMap::new();
    for n in library.declarations.iter().filter_map(|d| d.notation.as_ref()) {
        let Some(target) = n.unfolds_to.as_deref().or(n.unfolds_to_written.as_deref()) else {
            continue;
        };
        for sym in &n.symbols {
            let known = standard
                .tokenize(sym)
                .iter()
                .any(|t| t.kind == TokenKind::SymbolWord);
            if !known {
                *targets.entry(sym).or_default().entry(target).or_default() += 1;
            }
        }
    }
    let learned: Vec<NotationInfo> = targets
        .into_iter()
        .flat_map(|(sym, counts)| {
            let mut ranked: Vec<(&str, usize)> = counts.into_iter().collect();
            ranked.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
            ranked
                .into_iter()
                .take(WORDS_PER_LEARNED_SYMBOL)
                .map(move |(target, _)| NotationInfo {
                    symbols: vec![sym.to_string()],
                    unfolds_to: Some(target.to_string()),
                    unfolds_to_written: Some(target.to_string()),
                })
        })
        .collect();
    Tokenizer::with_notations(learned.iter())
}

/// The tokenizer as the lexical index calls it: every token's text.
pub fn tokenize_fn(tokenizer: Arc<Tokenizer>) -> TokenizeFn {
    Arc::new(move |text: &str, out: &mut Vec<String>| {
        out.extend(tokenizer.tokenize(text).texts().map(str::to_string));
    })
}

/// Time spent on each stage of a build, in seconds.
#[derive(Clone, Debug, Default, serde::Serialize)]
pub struct BuildTimings {
    pub lexical_seconds: f64,
    pub write_seconds: f64,
}

/// Writes a new generation of `index_dir` holding `library` and every index part, and makes
/// it live. `settings` are recorded in the manifest.
pub fn build_index(
    index_dir: &Path,
    library: &Library,
    settings: BTreeMap<String, serde_json::Value>,
) -> Result<(PathBuf, BuildTimings), IndexError> {
    let inputs: String = library.files.iter().map(|f| f.content_hash.as_str()).collect();
    let mut writer = GenerationWriter::create(index_dir, &inputs)?;
    let mut timings = BuildTimings::default();
    let started = Instant::now();
    let tokenizer = Arc::new(library_tokenizer(library));
    lexical::build(
        library,
        tokenize_fn(tokenizer),
        &writer.staging_dir().join(LEXICAL_PART),
    )?;
    writer.record_folder(LEXICAL_PART)?;
    timings.lexical_seconds = started.elapsed().as_secs_f64();
    let started = Instant::now();
    writer.write_library(library)?;
    let gen = writer.commit(library, settings)?;
    timings.write_seconds = started.elapsed().as_secs_f64();
    Ok((gen, timings))
}

/// An index opened for queries: the library model, its tokenizer and every signal's data.
pub struct OpenIndex {
    /// The index folder as given.
    pub dir: PathBuf,
    pub generation: Generation,
    pub library: Library,
    pub tokenizer: Arc<Tokenizer>,
    pub lexical: LexicalIndex,
    /// The declarations of the default kinds: the candidates of a request that names no
    /// place and no kinds.
    pub default_candidates: Arc<PremiseFilter>,
    /// Field boosts of the lexical query (evaluation's tuning changes them between runs).
    pub lexical_boosts: lexical::FieldBoosts,
}

impl OpenIndex {
    /// Opens the live generation of `index_dir`, checking every part it reads.
    pub fn open(index_dir: &Path) -> Result<OpenIndex, IndexError> {
        let generation = store::open_generation(index_dir)?;
        let library = generation.load_library()?;
        generation.verify_folder(LEXICAL_PART)?;
        let tokenizer = Arc::new(library_tokenizer(&library));
        let lexical = LexicalIndex::open(
            &generation.dir.join(LEXICAL_PART),
            tokenize_fn(tokenizer.clone()),
            library.declarations.len(),
        )?;
        let default_candidates = Arc::new(accessible_premises(
            &library,
            None,
            Some(&crate::retrieve::DEFAULT_KINDS),
        ));
        Ok(OpenIndex {
            dir: index_dir.to_path_buf(),
            generation,
            library,
            tokenizer,
            lexical,
            default_candidates,
            lexical_boosts: lexical::FieldBoosts::default(),
        })
    }

    /// The build id of the generation being served.
    pub fn build_id(&self) -> &str {
        &self.generation.manifest.build_id
    }

    /// When the generation was built (RFC 3339).
    pub fn created(&self) -> &str {
        &self.generation.manifest.created
    }
}
