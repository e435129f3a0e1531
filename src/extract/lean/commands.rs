//! Reading a Lean file command by command: where each command ends, and the commands that
//! change the naming context rather than declare anything (`open`, `export` and `variable`
//! are in `context.rs`).
//!
//! Takes the lexed file; gives the [`FileExtraction`] (declarations are read by
//! `declarations.rs`, `structures.rs` and `notation.rs`). Commands end where the next one
//! starts: at a command keyword (`theorem`, `namespace`, `@[`, a modifier, ...), or, for
//! words that also occur inside proofs (`open`, `set_option`, `instance`) and for
//! commands we do not know, at column 0 of a new line, which Lean requires of commands
//! that follow a proof. This file keeps the state those commands change: the namespace
//! and section stack, `open`/`export` directives, `variable`s, `universe`s, `include`s,
//! and the `... in` prefixes that change them for one command only. It ignores commands
//! that declare nothing (`#eval`, `set_option`, `deriving instance`, unknown commands).

use std::collections::{HashMap, HashSet};

use super::context::VariableBinder;
use super::lexer::Kind;
use super::names::{components, normalize_name};
use super::source::Source;
use crate::extract::{FileExtraction, OpenDirective, RawImport, Scope};
use crate::library::{Diagnostic, Severity, Visibility};

/// Command words that always start a command.
const STRONG_STARTS: &[&str] = &[
    "abbrev",
    "alias",
    "attribute",
    "axiom",
    "def",
    "elab",
    "elab_rules",
    "end",
    "example",
    "import",
    "inductive",
    "infix",
    "infixl",
    "infixr",
    "irreducible_def",
    "lemma",
    "macro",
    "macro_rules",
    "mutual",
    "namespace",
    "noncomputable",
    "nonrec",
    "notation",
    "opaque",
    "partial",
    "postfix",
    "prefix",
    "private",
    "protected",
    "section",
    "structure",
    "syntax",
    "theorem",
    "universe",
    "unsafe",
    "variable",
];

/// Command words that also occur inside proofs: a command only at column 0.
const COLUMN_ZERO_STARTS: &[&str] = &[
    "export",
    "include",
    "local",
    "omit",
    "open",
    "scoped",
    "set_option",
];

/// What an open block is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum BlockKind {
    Namespace,
    Section,
    /// `mutual ... end`, with the index of its first declaration.
    Mutual(usize),
}

/// One open `namespace`, `section` or `mutual`, with the lengths of the scoped lists when
/// it opened (restored at its `end`).
#[derive(Clone, Debug)]
struct Block {
    kind: BlockKind,
    name: String,
    opened: usize,
    variables: usize,
    universes: usize,
    included: usize,
}

/// The prefix of a declaration command: attributes and modifiers before its keyword.
#[derive(Clone, Debug)]
pub(super) struct Header {
    pub attributes: Vec<String>,
    pub visibility: Visibility,
    /// Token index of the keyword (`theorem`, `structure`, `notation`, ...).
    pub keyword: usize,
    /// Token index where the command ends.
    pub end: usize,
}

/// Reads one file; `declarations.rs` and `notation.rs` add the declaration commands.
pub(super) struct FileReader<'s, 'a> {
    pub(super) src: &'s Source<'a>,
    blocks: Vec<Block>,
    pub(super) namespaces: Vec<String>,
    pub(super) opened: Vec<OpenDirective>,
    pub(super) variables: Vec<VariableBinder>,
    pub(super) universes: Vec<String>,
    pub(super) included: Vec<String>,
    pub(super) pending_opens: Vec<OpenDirective>,
    pub(super) pending_variables: Vec<VariableBinder>,
    pub(super) pending_included: Vec<String>,
    /// Set by a command ending in `in`: its changes last for the next command only.
    pub(super) prefix: bool,
    /// Names declared so far (up to declaration `taken_upto`), and the last `_n` given to
    /// each generated name, for [`FileReader::unused_name`].
    pub(super) taken: HashSet<String>,
    pub(super) taken_upto: usize,
    pub(super) suffixes: HashMap<String, u32>,
    /// `syntax` rules of this file: declaration index, category, first atom.
    pub(super) syntax_rules: Vec<(usize, String, String)>,
    pub(super) out: FileExtraction,
}

impl<'s, 'a> FileReader<'s, 'a> {
    /// A reader at the top of the file.
    pub fn new(src: &'s Source<'a>) -> Self {
        let out = FileExtraction {
            scopes: vec![Scope::default()],
            ..FileExtraction::default()
        };
        FileReader {
            src,
            blocks: Vec::new(),
            namespaces: Vec::new(),
            opened: Vec::new(),
            variables: Vec::new(),
            universes: Vec::new(),
            included: Vec::new(),
            pending_opens: Vec::new(),
            pending_variables: Vec::new(),
            pending_included: Vec::new(),
            prefix: false,
            taken: HashSet::new(),
            taken_upto: 0,
            suffixes: HashMap::new(),
            syntax_rules: Vec::new(),
            out,
        }
    }

    /// Reads every command.
    pub fn read(mut self) -> FileExtraction {
        let mut i = 0;
        while i < self.src.len() {
            self.prefix = false;
            let next = if self.is_start(i, 0, true) {
                self.command(i)
            } else {
                self.next_command(i + 1, true)
            };
            if !self.prefix {
                self.pending_opens.clear();
                self.pending_variables.clear();
                self.pending_included.clear();
            }
            i = next.max(i + 1);
        }
        while let Some(block) = self.blocks.pop() {
            if let BlockKind::Mutual(first) = block.kind {
                self.rewrite_forward_references(first, None);
            }
        }
        self.out
    }

    /// Whether token `k` starts a command; `depth` is the bracket depth since the current
    /// command's keyword; `unknown` lets a name at column 0 start an unknown command.
    fn is_start(&self, k: usize, depth: u32, unknown: bool) -> bool {
        let Some(t) = self.src.tok(k) else {
            return false;
        };
        let s = self.src.text_of(k);
        let column_zero = t.first_on_line && t.col == 0;
        match t.kind {
            Kind::HashCommand => true,
            Kind::Symbol => s == "@[",
            Kind::Keyword => {
                STRONG_STARTS.contains(&s)
                    || (COLUMN_ZERO_STARTS.contains(&s) && column_zero)
                    || (matches!(s, "instance" | "class")
                        && depth == 0
                        && !(k > 0
                            && matches!(self.src.text_of(k - 1), "deriving" | "local" | "scoped")))
                    || (s == "deriving" && self.src.is(k + 1, "instance"))
            }
            Kind::Ident => {
                column_zero && (unknown || matches!(s, "public" | "meta" | "module" | "prelude"))
            }
            _ => false,
        }
    }

    /// The index of the first command start at or after `from`.
    pub fn next_command(&self, from: usize, unknown: bool) -> usize {
        let mut depth = 0u32;
        let mut k = from;
        while k < self.src.len() {
            if self.is_start(k, depth, unknown) {
                return k;
            }
            if self.src.kind(k) == Some(Kind::Symbol) {
                match self.src.text_of(k) {
                    "(" | "[" | "{" | "⟨" | "⦃" | "#[" | "%[" | "`(" | "‹" => depth += 1,
                    ")" | "]" | "}" | "⟩" | "⦄" | "›" => depth = depth.saturating_sub(1),
                    _ => {}
                }
            }
            k += 1;
        }
        self.src.len()
    }

    /// Marks the command ending at `end` as an `... in` prefix when its last token is `in`.
    pub(super) fn prefix_if_in(&mut self, end: usize) -> bool {
        let is_in = end > 0 && self.src.is(end - 1, "in");
        self.prefix |= is_in;
        is_in
    }

    fn command(&mut self, i: usize) -> usize {
        let src = self.src;
        let s = src.text_of(i);
        if src.kind(i) == Some(Kind::HashCommand) {
            let end = self.next_command(i + 1, true);
            self.prefix_if_in(end);
            return end;
        }
        match s {
            "import" => self.import(i, false),
            "public" | "meta" => {
                let mut j = i;
                let mut public = false;
                while matches!(src.text_of(j), "public" | "meta") {
                    public |= src.is(j, "public");
                    j += 1;
                }
                if src.is(j, "import") {
                    self.import(j, public)
                } else {
                    self.declaration(i)
                }
            }
            "module" | "prelude" | "deriving" | "elab" | "elab_rules" => {
                self.next_command(i + 1, true)
            }
            "namespace" => {
                let end = self.next_command(i + 1, true);
                if src.is_ident(i + 1) {
                    let name = normalize_name(src.text_of(i + 1));
                    for c in components(&name) {
                        self.open_block(BlockKind::Namespace, c);
                    }
                }
                end
            }
            "section" => self.section(i),
            "end" => self.end(i),
            "open" | "export" => self.open(i),
            "variable" => self.variable(i),
            "universe" => {
                let end = self.next_command(i + 1, true);
                for k in i + 1..end {
                    if src.is_ident(k) {
                        self.universes.push(src.text_of(k).to_string());
                    }
                }
                end
            }
            "include" | "omit" => {
                let end = self.next_command(i + 1, true);
                let is_in = self.prefix_if_in(end);
                let names: Vec<String> = (i + 1..end)
                    .filter(|&k| src.is_ident(k))
                    .map(|k| normalize_name(src.text_of(k)))
                    .collect();
                if s == "include" {
                    let list = if is_in {
                        &mut self.pending_included
                    } else {
                        &mut self.included
                    };
                    list.extend(names);
                } else if !is_in {
                    self.included.retain(|n| !names.contains(n));
                }
                end
            }
            "attribute" => self.attribute(i),
            "set_option" => {
                let end = self.next_command(i + 1, true);
                self.prefix_if_in(end);
                end
            }
            "mutual" => {
                let first = self.out.declarations.len();
                self.open_block(BlockKind::Mutual(first), "");
                i + 1
            }
            "macro_rules" => self.macro_rules(i),
            _ => self.declaration(i),
        }
    }

    fn import(&mut self, i: usize, export: bool) -> usize {
        let end = self.next_command(i + 1, false);
        let line = self.src.tok(i).map_or(1, |t| t.line);
        for k in i + 1..end {
            let m = self.src.text_of(k);
            if self.src.is_ident(k) && !matches!(m, "all" | "runtime") {
                self.out.imports.push(RawImport {
                    module: normalize_name(m),
                    from: None,
                    export,
                    opens: true,
                    line,
                });
            }
        }
        end
    }

    fn open_block(&mut self, kind: BlockKind, name: &str) {
        self.blocks.push(Block {
            kind,
            name: name.to_string(),
            opened: self.opened.len(),
            variables: self.variables.len(),
            universes: self.universes.len(),
            included: self.included.len(),
        });
        if kind == BlockKind::Namespace {
            let full = match self.namespaces.last() {
                Some(outer) => format!("{outer}.{name}"),
                None => name.to_string(),
            };
            self.namespaces.push(full);
        }
    }

    /// `section`, `section Name`, `noncomputable section` (at its `section` keyword).
    pub(super) fn section(&mut self, i: usize) -> usize {
        let end = self.next_command(i + 1, true);
        let named = self.src.is_ident(i + 1) && self.same_line(i, i + 1);
        if named {
            let name = normalize_name(self.src.text_of(i + 1));
            for c in components(&name) {
                self.open_block(BlockKind::Section, c);
            }
        } else {
            self.open_block(BlockKind::Section, "");
        }
        end
    }

    fn same_line(&self, a: usize, b: usize) -> bool {
        matches!((self.src.tok(a), self.src.tok(b)), (Some(x), Some(y)) if x.line == y.line)
    }

    /// `end`, `end Name`, `end A.B`: closes one block per component.
    fn end(&mut self, i: usize) -> usize {
        let end = self.next_command(i + 1, true);
        let name = (self.src.is_ident(i + 1) && self.same_line(i, i + 1))
            .then(|| normalize_name(self.src.text_of(i + 1)));
        let names: Vec<String> = match &name {
            Some(n) => components(n).iter().rev().map(|c| c.to_string()).collect(),
            None => vec![String::new()],
        };
        for expected in names {
            let Some(block) = self.blocks.pop() else {
                self.warn(
                    i,
                    "`end` with no open namespace, section or mutual block".into(),
                );
                break;
            };
            if block.name != expected {
                let closing = if block.name.is_empty() {
                    "an anonymous block".to_string()
                } else {
                    format!("`{}`", block.name)
                };
                self.warn(i, format!("`end {expected}` closes {closing}"));
            }
            self.opened.truncate(block.opened);
            self.variables.truncate(block.variables);
            self.universes.truncate(block.universes);
            self.included.truncate(block.included);
            match block.kind {
                BlockKind::Namespace => {
                    self.namespaces.pop();
                }
                BlockKind::Mutual(first) => self.rewrite_forward_references(first, None),
                BlockKind::Section => {}
            }
        }
        end
    }

    fn warn(&mut self, i: usize, message: String) {
        let (line, column) = self.src.tok(i).map_or((1, 1), |t| (t.line, t.col + 1));
        self.out.diagnostics.push(Diagnostic {
            severity: Severity::Warning,
            line,
            column,
            message,
        });
    }

    /// `attribute [simp, -grind] foo bar`: adds (or with `-`, removes) attributes of
    /// declarations of this file. With `in`, it lasts one command and changes nothing here.
    fn attribute(&mut self, i: usize) -> usize {
        let src = self.src;
        let end = self.next_command(i + 1, true);
        if self.prefix_if_in(end) || !src.is(i + 1, "[") {
            return end;
        }
        let Some(c) = src.closing(i + 1, end) else {
            return end;
        };
        let attributes = self.attribute_list(i + 2, c);
        for k in c + 1..end {
            if !src.is_ident(k) {
                continue;
            }
            let Some(d) = self.find_own(src.text_of(k)) else {
                continue;
            };
            let attrs = &mut self.out.declarations[d].attributes;
            for a in &attributes {
                match a.strip_prefix('-') {
                    Some(removed) => attrs.retain(|x| x != removed.trim()),
                    None if !attrs.contains(a) => attrs.push(a.clone()),
                    None => {}
                }
            }
        }
        end
    }

    /// The attributes between `@[` (or `attribute [`) and `]`, whitespace normalised.
    pub fn attribute_list(&self, lo: usize, hi: usize) -> Vec<String> {
        let mut out = Vec::new();
        let mut start = lo;
        while start < hi {
            let end = self.src.find_at_depth0(start, hi, &[","]).unwrap_or(hi);
            let a = self.src.normalized(start, end);
            if !a.is_empty() {
                out.push(a);
            }
            start = end + 1;
        }
        out
    }

    /// The declaration of this file a written name refers to, by the enclosing namespaces.
    fn find_own(&self, written: &str) -> Option<usize> {
        let w = normalize_name(written);
        let w = w.strip_prefix("_root_.").map(str::to_string).unwrap_or(w);
        let mut candidates: Vec<String> = self
            .namespaces
            .iter()
            .rev()
            .map(|ns| format!("{ns}.{w}"))
            .collect();
        candidates.push(w);
        candidates
            .iter()
            .find_map(|c| self.out.declarations.iter().rposition(|d| &d.name == c))
    }
}
