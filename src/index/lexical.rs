//! The lexical signal's index: one tantivy document per declaration, BM25 over quarry's
//! math-aware tokens.
//!
//! Takes the library model and a tokenizer function (the shared tokenizer, which the caller
//! builds with the library's own notations); gives a tantivy index in the generation folder
//! (`lexical/`) and, opened, BM25 search restricted to the premises a [`PremiseFilter`]
//! allows. The tokenizer is registered with tantivy under the name `quarry`, so indexing and
//! querying see the same tokens. It does not parse goals nor fuse signals.
//!
//! Fields: `name` (the declaration's name without its module prefix), `conclusion`,
//! `hypotheses`, `text` (name and whole statement: one plain BM25 field, used to check the
//! formula against reference implementations), `kind` (raw), and `id` (the declaration id,
//! a fast field).

use std::path::Path;
use std::sync::{Arc, RwLock};

use tantivy::schema::{
    Field, IndexRecordOption, Schema, TextFieldIndexing, TextOptions, Value, FAST, STORED, STRING,
};
use tantivy::tokenizer::{Token, TokenStream, Tokenizer};
use tantivy::{doc, Index, IndexReader, ReloadPolicy, TantivyDocument, Term};

use crate::library::{DeclId, Library};
use crate::query::QueryTerm;
use crate::retrieve::accessible::PremiseFilter;

mod impacts;
mod scoring;
mod top;

use top::TopPick;

pub use impacts::ImpactTable;

/// The name under which quarry's tokenizer is registered with tantivy.
pub const TOKENIZER_NAME: &str = "quarry";
/// The folder of the lexical index inside a generation.
pub const LEXICAL_PART: &str = "lexical";

/// Splits text into quarry's tokens (already lower-cased), appending to the vector.
pub type TokenizeFn = Arc<dyn Fn(&str, &mut Vec<String>) + Send + Sync>;

/// Why the lexical index could not be built, opened or searched.
#[derive(Debug, thiserror::Error)]
pub enum LexicalError {
    #[error("lexical index `{path}`: {source}")]
    Tantivy {
        path: String,
        #[source]
        source: tantivy::TantivyError,
    },
    #[error("lexical index `{path}`: {message}")]
    Invalid { path: String, message: String },
}

/// quarry's tokenizer as tantivy sees it.
#[derive(Clone)]
struct TantivyAdapter {
    tokenize: TokenizeFn,
}

struct AdapterStream {
    tokens: Vec<String>,
    next: usize,
    token: Token,
}

impl TokenStream for AdapterStream {
    fn advance(&mut self) -> bool {
        if self.next >= self.tokens.len() {
            return false;
        }
        self.token.text.clear();
        self.token.text.push_str(&self.tokens[self.next]);
        self.token.position = self.next;
        self.token.position_length = 1;
        self.next += 1;
        true
    }

    fn token(&self) -> &Token {
        &self.token
    }

    fn token_mut(&mut self) -> &mut Token {
        &mut self.token
    }
}

impl Tokenizer for TantivyAdapter {
    type TokenStream<'a> = AdapterStream;

    fn token_stream<'a>(&'a mut self, text: &'a str) -> AdapterStream {
        let mut tokens = Vec::new();
        (self.tokenize)(text, &mut tokens);
        AdapterStream {
            tokens,
            next: 0,
            token: Token::default(),
        }
    }
}

/// The fields of the schema.
#[derive(Clone, Copy, Debug)]
pub struct LexicalFields {
    pub id: Field,
    pub name: Field,
    pub conclusion: Field,
    pub hypotheses: Field,
    pub text: Field,
    pub kind: Field,
}

/// Which field a query term is matched in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LexicalField {
    Name,
    Conclusion,
    Hypotheses,
    Text,
}

/// Per-field boosts of the lexical query.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FieldBoosts {
    pub name: f32,
    pub conclusion: f32,
    pub hypotheses: f32,
    pub text: f32,
}

impl Default for FieldBoosts {
    /// Chosen by `quarry eval --tune-boosts` on the validation part (760 theorems, never the
    /// test part) of the Coq standard library, random split, seed 42: recall@10 36.3 %
    /// against 35.4 % for the `text` field alone and 33.8 % for our first guess
    /// (1, 1, 0.5, 0.5). The grid is in docs/evaluation.md.
    fn default() -> FieldBoosts {
        FieldBoosts {
            name: 1.0,
            conclusion: 0.5,
            hypotheses: 0.5,
            text: 2.0,
        }
    }
}

impl FieldBoosts {
    /// Only the plain `text` field: textbook single-field BM25.
    pub fn text_only() -> FieldBoosts {
        FieldBoosts {
            name: 0.0,
            conclusion: 0.0,
            hypotheses: 0.0,
            text: 1.0,
        }
    }
}

fn schema() -> (Schema, LexicalFields) {
    let mut b = Schema::builder();
    let indexed = TextOptions::default().set_indexing_options(
        TextFieldIndexing::default()
            .set_tokenizer(TOKENIZER_NAME)
            .set_index_option(IndexRecordOption::WithFreqs),
    );
    let fields = LexicalFields {
        id: b.add_u64_field("id", FAST | STORED),
        name: b.add_text_field("name", indexed.clone()),
        conclusion: b.add_text_field("conclusion", indexed.clone()),
        hypotheses: b.add_text_field("hypotheses", indexed.clone()),
        text: b.add_text_field("text", indexed),
        kind: b.add_text_field("kind", STRING),
    };
    (b.build(), fields)
}

/// The name of a declaration without its module prefix (Coq names carry it; Lean's do not).
pub fn local_name(library: &Library, id: DeclId) -> &str {
    let d = library.declaration(id);
    let module = &library.module(d.module).name;
    d.name
        .strip_prefix(module.as_str())
        .and_then(|rest| rest.strip_prefix('.'))
        .unwrap_or(&d.name)
}

/// The hypotheses of a declaration as one text.
pub fn hypotheses_text(library: &Library, id: DeclId) -> String {
    let d = library.declaration(id);
    let mut out = String::new();
    for h in &d.hypotheses {
        out.push_str(&h.ty);
        out.push('\n');
    }
    out
}

/// The conclusion of a declaration, or its statement when the syntax gave none.
pub fn conclusion_text(library: &Library, id: DeclId) -> &str {
    let d = library.declaration(id);
    d.conclusion.as_deref().unwrap_or(&d.statement)
}

fn tantivy_err(path: &Path) -> impl FnOnce(tantivy::TantivyError) -> LexicalError + '_ {
    move |source| LexicalError::Tantivy {
        path: path.display().to_string(),
        source,
    }
}

/// Documents handed to tantivy's indexing threads at a time: one channel message per batch
/// instead of one per document (`cargo bench --bench lexical -- lexical/build`: 364 → 330 ms
/// on the Coq standard library).
const BATCH: usize = 1024;
/// tantivy's indexing threads (each writes its own segments; scores take document
/// frequencies and lengths over every segment, and ties go to the lower declaration id, so
/// rankings do not depend on how documents fell into segments). Two: 330 → 222 ms on the
/// standard library, the same TREC run files from `quarry eval` as with one.
const WRITER_THREADS: usize = 2;
/// The memory tantivy's writer may use, shared by its threads, before it writes a segment.
const WRITER_BUDGET: usize = 128 << 20;

/// Builds the lexical index of `library` into the folder `dir` (created, must be empty).
pub fn build(library: &Library, tokenize: TokenizeFn, dir: &Path) -> Result<(), LexicalError> {
    std::fs::create_dir_all(dir).map_err(|e| LexicalError::Invalid {
        path: dir.display().to_string(),
        message: format!("cannot create: {e}"),
    })?;
    let (schema, f) = schema();
    let index = Index::create_in_dir(dir, schema).map_err(tantivy_err(dir))?;
    index
        .tokenizers()
        .register(TOKENIZER_NAME, TantivyAdapter { tokenize });
    let mut writer: tantivy::IndexWriter = index
        .writer_with_num_threads(WRITER_THREADS, WRITER_BUDGET)
        .map_err(tantivy_err(dir))?;
    let mut batch = Vec::with_capacity(BATCH);
    for d in &library.declarations {
        let name = local_name(library, d.id);
        let text = format!("{name}\n{}", d.statement);
        batch.push(tantivy::indexer::UserOperation::Add(doc!(
            f.id => d.id.0 as u64,
            f.name => name,
            f.conclusion => conclusion_text(library, d.id),
            f.hypotheses => hypotheses_text(library, d.id),
            f.text => text,
            f.kind => d.kind.as_str(),
        )));
        if batch.len() == BATCH {
            writer
                .run(std::mem::take(&mut batch))
                .map_err(tantivy_err(dir))?;
        }
    }
    if !batch.is_empty() {
        writer.run(batch).map_err(tantivy_err(dir))?;
    }
    writer.commit().map_err(tantivy_err(dir))?;
    writer.wait_merging_threads().map_err(tantivy_err(dir))?;
    Ok(())
}

/// An opened lexical index, ready to search.
pub struct LexicalIndex {
    reader: IndexReader,
    fields: LexicalFields,
    /// Per segment: tantivy doc id → declaration id.
    doc_to_decl: Vec<Vec<u32>>,
    path: String,
    /// The impact table of the boosts last asked for ([`LexicalIndex::prepare`]).
    impacts: RwLock<Option<Arc<ImpactTable>>>,
}

impl LexicalIndex {
    /// Opens the lexical index in `dir`, registering `tokenize` as its tokenizer.
    pub fn open(
        dir: &Path,
        tokenize: TokenizeFn,
        declarations: usize,
    ) -> Result<Self, LexicalError> {
        let index = Index::open_in_dir(dir).map_err(tantivy_err(dir))?;
        index
            .tokenizers()
            .register(TOKENIZER_NAME, TantivyAdapter { tokenize });
        let (_, fields) = schema();
        let reader = index
            .reader_builder()
            .reload_policy(ReloadPolicy::Manual)
            .try_into()
            .map_err(tantivy_err(dir))?;
        let searcher = reader.searcher();
        let mut doc_to_decl = Vec::new();
        let mut total = 0usize;
        for seg in searcher.segment_readers() {
            let col = seg.fast_fields().u64("id").map_err(tantivy_err(dir))?;
            let mut ids = Vec::with_capacity(seg.max_doc() as usize);
            for doc in 0..seg.max_doc() {
                let id = col.first(doc).unwrap_or(u64::MAX);
                if id >= declarations as u64 {
                    return Err(LexicalError::Invalid {
                        path: dir.display().to_string(),
                        message: format!(
                            "document {doc} names declaration {id}, the library has {declarations}"
                        ),
                    });
                }
                ids.push(id as u32);
            }
            total += ids.len();
            doc_to_decl.push(ids);
        }
        if total != declarations {
            return Err(LexicalError::Invalid {
                path: dir.display().to_string(),
                message: format!(
                    "holds {total} documents, the library has {declarations} declarations"
                ),
            });
        }
        Ok(LexicalIndex {
            reader,
            fields,
            doc_to_decl,
            path: dir.display().to_string(),
            impacts: RwLock::new(None),
        })
    }

    fn field(&self, f: LexicalField) -> Field {
        match f {
            LexicalField::Name => self.fields.name,
            LexicalField::Conclusion => self.fields.conclusion,
            LexicalField::Hypotheses => self.fields.hypotheses,
            LexicalField::Text => self.fields.text,
        }
    }

    /// The BM25 top `limit` declarations for `terms`, among those `filter` allows, best
    /// first, with their scores. Terms are matched in every field with a non-zero boost.
    ///
    /// One list of [`LexicalIndex::top_lists`], so the lightest terms may be pruned: the
    /// list is the one [`LexicalScores::top`] picks from all the scores, without keeping
    /// them.
    pub fn search(
        &self,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
        filter: Option<&PremiseFilter>,
        limit: usize,
    ) -> Result<Vec<(DeclId, f32)>, LexicalError> {
        if limit == 0 {
            return Ok(Vec::new());
        }
        let mut lists = self.top_lists(terms, boosts, &[(filter, limit)])?;
        Ok(lists.pop().unwrap_or_default())
    }

    /// The at most `keep` terms of `terms` that weigh most in BM25's sum: each term's
    /// weight times its inverse document frequency in the `text` field, idf = ln(1 + (N −
    /// df + 0.5) / (df + 0.5)) (Robertson and Spärck Jones's idf as BM25 uses it; tantivy's
    /// Bm25Weight uses the same). Ties go to the term text, so the choice is deterministic.
    ///
    /// A query of a whole goal's terms costs about the summed length of their posting
    /// lists, and the most common terms (`forall`, a library's base type) have posting
    /// lists as long as the library while adding almost nothing to the scores; hard-negative
    /// mining queries with these terms only, so its cost does not grow with the library.
    pub fn most_selective(
        &self,
        terms: &[QueryTerm],
        keep: usize,
    ) -> Result<Vec<QueryTerm>, LexicalError> {
        if terms.len() <= keep {
            return Ok(terms.to_vec());
        }
        let searcher = self.reader.searcher();
        let n = searcher.num_docs() as f64;
        let mut scored = Vec::with_capacity(terms.len());
        for t in terms {
            let df = searcher
                .doc_freq(&Term::from_field_text(self.fields.text, &t.text))
                .map_err(|source| LexicalError::Tantivy {
                    path: self.path.clone(),
                    source,
                })? as f64;
            let idf = (1.0 + (n - df + 0.5) / (df + 0.5)).ln();
            scored.push((f64::from(t.weight) * idf, t));
        }
        scored.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.text.cmp(&b.1.text)));
        Ok(scored
            .into_iter()
            .take(keep)
            .map(|(_, t)| t.clone())
            .collect())
    }

    /// The stored declaration id of every document (for checks).
    pub fn document_count(&self) -> usize {
        self.doc_to_decl.iter().map(Vec::len).sum()
    }

    /// Reads the stored `id` of the first document, proving the store is readable.
    pub fn check_store(&self) -> Result<(), LexicalError> {
        let searcher = self.reader.searcher();
        if self.document_count() == 0 {
            return Ok(());
        }
        let doc: TantivyDocument =
            searcher
                .doc(tantivy::DocAddress::new(0, 0))
                .map_err(|source| LexicalError::Tantivy {
                    path: self.path.clone(),
                    source,
                })?;
        match doc.get_first(self.fields.id).and_then(|v| v.as_u64()) {
            Some(_) => Ok(()),
            None => Err(LexicalError::Invalid {
                path: self.path.clone(),
                message: "first document has no stored id".into(),
            }),
        }
    }
}

/// Every matching declaration's BM25 score for one query, in no particular order.
#[derive(Clone, Debug, Default)]
pub struct LexicalScores {
    hits: Vec<(DeclId, f32)>,
}

impl LexicalScores {
    /// The best `limit` among those `filter` allows (all when `None`), best first; equal
    /// scores go to the smaller declaration id, so the order is the same on every run.
    ///
    /// One pass with a heap of the `limit` best so far: a ranking picks two short lists
    /// from thousands of matches, and copying the matches to sort them cost more than
    /// the scoring. A ranking picks both lists while scoring, with
    /// [`LexicalIndex::top_lists`]; this is for one list, or for scores kept.
    pub fn top(&self, filter: Option<&PremiseFilter>, limit: usize) -> Vec<(DeclId, f32)> {
        let mut pick = TopPick::new(filter, limit);
        for &(id, score) in &self.hits {
            pick.offer(id, score);
        }
        pick.into_sorted()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::{
        DeclKind, Declaration, FileId, Language, Module, ModuleId, ReferenceCounts, SourceFile,
        Span, Visibility,
    };

    /// A one-module library whose declarations are `M.<name>` with the given statements.
    fn library(decls: &[(&str, &str)]) -> Library {
        let declarations = decls
            .iter()
            .enumerate()
            .map(|(i, (name, statement))| Declaration {
                id: DeclId(i as u32),
                name: format!("M.{name}"),
                kind: DeclKind::Theorem,
                statement: statement.to_string(),
                hypotheses: Vec::new(),
                conclusion: None,
                module: ModuleId(0),
                file: FileId(0),
                statement_span: Span::default(),
                proof_span: None,
                proof_ending: None,
                visibility: Visibility::Public,
                attributes: Vec::new(),
                notation: None,
                references: ReferenceCounts::default(),
                unresolved_names: Vec::new(),
            })
            .collect();
        Library {
            roots: vec!["/lib".into()],
            files: vec![SourceFile {
                id: FileId(0),
                path: "M.v".into(),
                root: 0,
                language: Language::Coq,
                module: Some(ModuleId(0)),
                content_hash: String::new(),
                bytes: 0,
                diagnostics: Vec::new(),
                references: ReferenceCounts::default(),
            }],
            modules: vec![Module {
                id: ModuleId(0),
                name: "M".into(),
                file: FileId(0),
                imports: Vec::new(),
            }],
            declarations,
            graph: Default::default(),
        }
    }

    fn whitespace() -> TokenizeFn {
        Arc::new(|text: &str, out: &mut Vec<String>| {
            out.extend(text.split_whitespace().map(str::to_lowercase))
        })
    }

    fn term(t: &str) -> QueryTerm {
        QueryTerm {
            text: t.into(),
            weight: 1.0,
        }
    }

    /// BM25 as in Robertson & Zaragoza, "The Probabilistic Relevance Framework: BM25 and
    /// Beyond" (2009), eq. 3.15 with the idf of eq. 3.3 in its non-negative form
    /// ln(1 + (N - n + 0.5)/(n + 0.5)) (the form Lucene and tantivy use), k1 = 1.2, b = 0.75:
    ///   score(q, d) = Σ_t idf(t) · (k1 + 1) · tf / (tf + k1 · (1 - b + b · dl / avgdl)).
    /// Worked by hand on three documents (the `text` field holds the name, then the
    /// statement, split on white space):
    ///   d1: [d1 push slot full]   dl 4
    ///   d2: [d2 push push empty]  dl 4
    ///   d3: [d3 pop slot]         dl 3        N = 3, avgdl = 11/3 = 3.6667
    /// `push` and `slot` each occur in 2 documents: idf = ln(1 + 1.5/2.5) = ln 1.6 = 0.470004.
    ///   dl 4: K = 1.2 · (0.25 + 0.75 · 4/3.6667) = 1.281818
    ///   dl 3: K = 1.2 · (0.25 + 0.75 · 3/3.6667) = 1.036364
    ///   push in d1 (tf 1): 0.470004 · 2.2 · 1/2.281818 = 0.453147
    ///   push in d2 (tf 2): 0.470004 · 2.2 · 2/3.281818 = 0.630140
    ///   slot in d3 (tf 1): 0.470004 · 2.2 · 1/2.036364 = 0.507767
    /// so for the query `push slot`: d1 = 0.906294, d2 = 0.630140, d3 = 0.507767.
    #[test]
    fn bm25_matches_the_hand_worked_example() {
        let lib = library(&[
            ("d1", "push slot full"),
            ("d2", "push push empty"),
            ("d3", "pop slot"),
        ]);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), 3).unwrap();
        let boosts = FieldBoosts::text_only();

        let hits = idx
            .search(&[term("push"), term("slot")], &boosts, None, 10)
            .unwrap();
        let expected = [(0u32, 0.906294f32), (1, 0.630140), (2, 0.507767)];
        assert_eq!(hits.len(), 3);
        for ((id, score), (eid, escore)) in hits.iter().zip(expected) {
            assert_eq!(id.0, eid);
            assert!(
                (score - escore).abs() < 1e-4,
                "doc {eid}: {score} vs {escore}"
            );
        }
        // A shorter document wins at equal term frequency (length normalisation).
        let slot = idx.search(&[term("slot")], &boosts, None, 10).unwrap();
        assert_eq!(slot[0].0, DeclId(2));
        assert!((slot[0].1 - 0.507767).abs() < 1e-4);
        assert!((slot[1].1 - 0.453147).abs() < 1e-4);
    }

    /// The term-at-a-time scores are tantivy's own: the same query as a tantivy
    /// `BooleanQuery` of boosted `TermQuery`s over every field (tantivy 0.27's BM25 scorer,
    /// the reference here) gives every document the same score, to float rounding.
    #[test]
    fn scores_match_tantivys_own_scorer() {
        let lib = library(&[
            ("slot_push", "forall r, push r slot = slot push r"),
            ("wrap", "wrap wrap wrap slot"),
            (
                "drain",
                "forall q : queue , drain ( push q slot ) = drain q",
            ),
            ("pop", "pop"),
            (
                "long",
                "slot slot push pop wrap drain queue ring buffer head tail size",
            ),
        ]);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), 5).unwrap();
        let boosts = FieldBoosts {
            name: 1.5,
            conclusion: 0.5,
            hypotheses: 0.25,
            text: 2.0,
        };
        let terms = [
            QueryTerm {
                text: "slot".into(),
                weight: 1.0,
            },
            QueryTerm {
                text: "push".into(),
                weight: 0.5,
            },
            term("wrap"),
            term("absent"),
        ];
        let mut ours = idx.scores(&terms, &boosts).unwrap().top(None, 10);
        ours.sort_by_key(|h| h.0);
        let mut theirs = tantivy_ranking(&idx, &terms, &boosts, 10);
        theirs.sort_by_key(|h| h.0);
        assert_eq!(ours.len(), 4, "every document but `pop` matches");
        assert_eq!(
            ours.iter().map(|h| h.0).collect::<Vec<_>>(),
            theirs.iter().map(|h| h.0).collect::<Vec<_>>()
        );
        for (a, b) in ours.iter().zip(&theirs) {
            assert!(
                (a.1 - b.1).abs() <= 1e-5 * b.1.abs().max(1.0),
                "{:?}: ours {} tantivy {}",
                a.0,
                a.1,
                b.1
            );
        }
    }

    /// The best `limit` documents of tantivy's own `BooleanQuery` of one boosted `TermQuery`
    /// per term and field (the reference the lexical tests compare with), best first, with
    /// the declaration each holds.
    fn tantivy_ranking(
        idx: &LexicalIndex,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
        limit: usize,
    ) -> Vec<(DeclId, f32)> {
        use tantivy::collector::TopDocs;
        use tantivy::query::{BooleanQuery, BoostQuery, Occur, Query, TermQuery};
        let mut clauses: Vec<(Occur, Box<dyn Query>)> = Vec::new();
        for (field, boost) in [
            (idx.fields.name, boosts.name),
            (idx.fields.conclusion, boosts.conclusion),
            (idx.fields.hypotheses, boosts.hypotheses),
            (idx.fields.text, boosts.text),
        ] {
            for t in terms.iter().filter(|_| boost > 0.0) {
                let q = TermQuery::new(
                    Term::from_field_text(field, &t.text),
                    IndexRecordOption::WithFreqs,
                );
                clauses.push((
                    Occur::Should,
                    Box::new(BoostQuery::new(Box::new(q), boost * t.weight)),
                ));
            }
        }
        idx.reader
            .searcher()
            .search(
                &BooleanQuery::new(clauses),
                &TopDocs::with_limit(limit).order_by_score(),
            )
            .unwrap()
            .into_iter()
            .map(|(score, at)| {
                let id = idx.doc_to_decl[at.segment_ord as usize][at.doc_id as usize];
                (DeclId(id), score)
            })
            .collect()
    }

    /// Two lists picked from one scoring, each as tantivy ranks it: on a library whose statements
    /// draw their words from a Zipf-like vocabulary (a few words in nearly every statement,
    /// as `forall` is), queried as goals are (a few rare symbols among common ones), each
    /// list's scores are those of tantivy's own `BooleanQuery` of boosted `TermQuery`s
    /// (tantivy 0.27, the reference), ranked by its `TopDocs` and then restricted to the
    /// list's filter. Its 3,000 documents are three of the build's batches, which the two
    /// indexing threads share between their segments: the scores read across segments are
    /// checked here too (segment counts are tantivy's choice, so the test does not fix one).
    /// The lists are picked twice: as a ranking asks (the default pruning) and with the
    /// common terms' pruning tried before every term; both must be tantivy's, and the second
    /// must have left postings unread on some queries, or it tested nothing.
    #[test]
    fn picks_are_tantivys_boolean_query_ranking_under_each_filter() {
        let mut words: Vec<String> = [
            "forall", "task", "=", "->", "queue", "tick", "slot", "run", "deadline",
        ]
        .iter()
        .map(|w| w.to_string())
        .collect();
        words.extend((0..400).map(|i| format!("job{i}")));
        // A linear congruential generator (Knuth's MMIX constants) and Zipf-like picks:
        // word i with weight 1 / (i + 1).
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut next = move || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) as f64 / (1u64 << 31) as f64
        };
        let harmonic: f64 = (0..words.len()).map(|i| 1.0 / (i + 1) as f64).sum();
        let pick = |next: &mut dyn FnMut() -> f64| {
            let mut x = next() * harmonic;
            for (i, w) in words.iter().enumerate() {
                x -= 1.0 / (i + 1) as f64;
                if x <= 0.0 {
                    return w.clone();
                }
            }
            words[0].clone()
        };
        let statements: Vec<(String, String)> = (0..3000)
            .map(|i| {
                let len = 4 + (next() * 14.0) as usize;
                let s: Vec<String> = (0..len).map(|_| pick(&mut next)).collect();
                (format!("d{i}"), s.join(" "))
            })
            .collect();
        let decls: Vec<(&str, &str)> = statements
            .iter()
            .map(|(n, s)| (n.as_str(), s.as_str()))
            .collect();
        let lib = library(&decls);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), decls.len()).unwrap();
        let boosts = FieldBoosts::default();
        let mut every_third = PremiseFilter::none(decls.len());
        for i in (0..decls.len()).step_by(3) {
            every_third.insert(DeclId(i as u32));
        }
        let mut pruned_queries = 0;
        for _ in 0..30 {
            // As a goal is: a few rare symbols among common ones.
            let rare = 2 + (next() * 3.0) as usize;
            let common = 3 + (next() * 6.0) as usize;
            let mut texts: Vec<String> = (0..rare)
                .map(|_| words[100 + (next() * 300.0) as usize].clone())
                .collect();
            texts.extend((0..common).map(|_| pick(&mut next)));
            let terms: Vec<QueryTerm> = texts
                .into_iter()
                .map(|text| QueryTerm {
                    text,
                    weight: 0.3 + 0.7 * next() as f32,
                })
                .collect();
            // One scoring, two picks, as a ranking makes them.
            let scores = idx.scores(&terms, &boosts).unwrap();
            let wanted: [(Option<&PremiseFilter>, usize); 2] =
                [(Some(&every_third), 30), (None, 10)];
            // Every matching document in tantivy's order.
            let theirs = tantivy_ranking(&idx, &terms, &boosts, decls.len());
            // Both lists picked while scoring, as a ranking asks for them, are the same.
            let together = idx.top_lists(&terms, &boosts, &wanted).unwrap();
            let (pruned, work) = idx
                .top_lists_with(&terms, &boosts, &wanted, scoring::Pruning::EVERY_TERM)
                .unwrap();
            if work.pruned {
                assert!(work.postings_skipped > 0, "{work:?}");
                pruned_queries += 1;
            }
            assert_eq!(together.len(), 2);
            assert_eq!(pruned, together, "pruned at every term, {terms:?}");
            for ((filter, limit), picked) in wanted.into_iter().zip(together) {
                let ours = scores.top(filter, limit);
                assert_eq!(picked, ours, "picked while scoring, {terms:?}");
                let expected: Vec<f32> = theirs
                    .iter()
                    .filter(|(id, _)| filter.is_none_or(|f| f.contains(*id)))
                    .take(limit)
                    .map(|h| h.1)
                    .collect();
                assert_eq!(ours.len(), expected.len(), "{terms:?}");
                for ((id, a), b) in ours.iter().zip(&expected) {
                    assert!(
                        filter.is_none_or(|f| f.contains(*id)),
                        "{id:?} is filtered out"
                    );
                    assert!(
                        (a - b).abs() <= 1e-4 * b.abs().max(1.0),
                        "ours {a} tantivy {b}"
                    );
                }
            }
        }
        assert!(
            pruned_queries >= 5,
            "the pruning cut the common terms on {pruned_queries} of 30 queries"
        );
    }

    /// Scores are the same whatever the thread scored before: the accumulator a thread
    /// keeps between queries is left all zero, and a table computed for other boosts is
    /// replaced, not mixed in (the reference is each query scored by tantivy).
    #[test]
    fn scores_do_not_depend_on_the_queries_before() {
        let lib = library(&[
            ("tick", "tick slot deadline"),
            ("run", "run task slot"),
            ("drop", "drop task"),
            ("idle", "idle"),
        ]);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), 4).unwrap();
        let queries = [
            vec![term("slot"), term("task")],
            vec![term("deadline")],
            vec![term("idle"), term("slot")],
        ];
        for boosts in [FieldBoosts::default(), FieldBoosts::text_only()] {
            for _round in 0..2 {
                for q in &queries {
                    let mut ours = idx.scores(q, &boosts).unwrap().top(None, 10);
                    ours.sort_by_key(|h| h.0);
                    let mut theirs = tantivy_ranking(&idx, q, &boosts, 10);
                    theirs.sort_by_key(|h| h.0);
                    assert_eq!(ours.len(), theirs.len(), "{q:?}");
                    for (a, b) in ours.iter().zip(&theirs) {
                        assert_eq!(a.0, b.0);
                        assert!((a.1 - b.1).abs() <= 1e-5 * b.1.abs().max(1.0));
                    }
                }
            }
        }
    }

    #[test]
    fn the_filter_limits_the_answers_and_empty_queries_return_nothing() {
        let lib = library(&[("d1", "push slot"), ("d2", "push"), ("d3", "pop")]);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), 3).unwrap();
        let mut only_d2 = PremiseFilter::none(3);
        only_d2.insert(DeclId(1));
        let hits = idx
            .search(&[term("push")], &FieldBoosts::default(), Some(&only_d2), 10)
            .unwrap();
        assert_eq!(
            hits.iter().map(|h| h.0).collect::<Vec<_>>(),
            vec![DeclId(1)]
        );
        assert!(idx
            .search(&[], &FieldBoosts::default(), None, 10)
            .unwrap()
            .is_empty());
        assert!(idx
            .search(&[term("absent")], &FieldBoosts::default(), None, 10)
            .unwrap()
            .is_empty());
        // Opening against a library of another size is refused.
        assert!(LexicalIndex::open(&path, whitespace(), 4).is_err());
    }

    #[test]
    fn the_most_selective_terms_are_the_rare_ones() {
        // idf = ln(1 + (N - df + 0.5) / (df + 0.5)) with N = 4 (BM25's idf, as above):
        // `slot` (df 4) ln(1 + 0.5/4.5) = 0.105, `push` (df 2) ln 2 = 0.693, `wrap` (df 1)
        // ln(1 + 3.5/1.5) = 1.204 (worked by hand).
        let lib = library(&[
            ("d1", "slot push wrap"),
            ("d2", "slot push"),
            ("d3", "slot"),
            ("d4", "slot"),
        ]);
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("lexical");
        build(&lib, whitespace(), &path).unwrap();
        let idx = LexicalIndex::open(&path, whitespace(), 4).unwrap();
        let terms = [term("slot"), term("push"), term("wrap")];
        let texts = |keep| -> Vec<String> {
            idx.most_selective(&terms, keep)
                .unwrap()
                .into_iter()
                .map(|t| t.text)
                .collect()
        };
        assert_eq!(texts(2), ["wrap", "push"]);
        assert_eq!(texts(3).len(), 3);
        // The weight counts too: `slot` at weight 5 scores 0.527 < 0.693 and stays out; at
        // weight 7 it scores 0.738 and takes `push`'s place.
        let heavy = |w| QueryTerm {
            text: "slot".into(),
            weight: w,
        };
        let picked = |w| -> Vec<String> {
            idx.most_selective(&[heavy(w), term("push"), term("wrap")], 2)
                .unwrap()
                .into_iter()
                .map(|t| t.text)
                .collect()
        };
        assert_eq!(picked(5.0), ["wrap", "push"]);
        assert_eq!(picked(7.0), ["wrap", "slot"]);
    }
}
