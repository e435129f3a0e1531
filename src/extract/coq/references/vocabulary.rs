//! The words of Gallina and of the tactic language that decide how the scanner reads
//! a name: keywords, tacticals, and what the arguments of some tactics are.

/// Words of Gallina and of the tactic language that never name a declaration.
pub fn is_keyword(word: &str) -> bool {
    matches!(
        word,
        "_" | "forall"
            | "fun"
            | "match"
            | "lazymatch"
            | "multimatch"
            | "with"
            | "end"
            | "as"
            | "in"
            | "return"
            | "let"
            | "if"
            | "then"
            | "else"
            | "is"
            | "isn't"
            | "fix"
            | "cofix"
            | "struct"
            | "measure"
            | "wf"
            | "for"
            | "Type"
            | "Prop"
            | "Set"
            | "SProp"
            | "exists"
            | "exists2"
            | "where"
            | "at"
            | "using"
            | "by"
            | "eqn"
            | "into"
            | "until"
            | "goal"
            | "context"
            | "reverse"
            | "fresh"
            | "ltac"
            | "constr"
            | "uconstr"
            | "open_constr"
            | "type"
            | "of"
            | "eval"
            | "beta"
            | "delta"
            | "iota"
            | "zeta"
            | "after"
            | "before"
            | "top"
            | "bottom"
            | "only"
            | "all"
            | "parsing"
            | "printing"
            | "level"
    )
}

/// Tactics whose argument is another tactic: the word after them is again a tactic name.
pub(super) fn is_tactical(word: &str) -> bool {
    matches!(
        word,
        "try"
            | "repeat"
            | "do"
            | "progress"
            | "now"
            | "by"
            | "solve"
            | "first"
            | "abstract"
            | "time"
            | "timeout"
            | "once"
            | "exactly_once"
            | "unshelve"
            | "intuition"
            | "dintuition"
            | "assert_succeeds"
            | "assert_fails"
            | "infoH"
            | "Time"
            | "Fail"
            | "Succeed"
            | "Info"
            | "all"
            | "only"
            | "par"
            | "tryif"
            | "then"
            | "else"
            | "idtac"
            | "with_strategy"
    )
}

/// Tactics whose `with` is followed by hint database names.
pub(super) fn takes_hint_databases(tactic: &str) -> bool {
    matches!(
        tactic,
        "auto"
            | "eauto"
            | "trivial"
            | "info_auto"
            | "info_eauto"
            | "debug"
            | "autorewrite"
            | "autounfold"
            | "typeclasses"
            | "firstorder"
            | "intuition"
            | "dintuition"
            | "tauto"
            | "new"
            | "autoapply"
            | "easy"
            | "eauto_with"
            | "auto_with"
    )
}

/// Tactics whose arguments are hypothesis names (never globals).
pub(super) fn takes_hypotheses(tactic: &str) -> bool {
    matches!(
        tactic,
        "clear"
            | "clearbody"
            | "revert"
            | "subst"
            | "dependent"
            | "rename"
            | "intro"
            | "intros"
            | "move_hyp"
    )
}

/// Tactics whose parenthesised `(H : P)` or plain `x :=` names a new hypothesis.
pub(super) fn binds_parenthesised(tactic: &str) -> bool {
    matches!(
        tactic,
        "assert"
            | "eassert"
            | "enough"
            | "eenough"
            | "evar"
            | "set"
            | "eset"
            | "pose"
            | "epose"
            | "remember"
            | "cut"
            | "specialize"
            | "have"
            | "suff"
            | "suffices"
            | "wlog"
            | "gen"
            | "without"
    )
}

/// ssreflect tactics that name what they introduce right after their name
/// (`have H : P`, `set x := e`, `case E : x`).
pub(super) fn names_after_head(tactic: &str) -> bool {
    matches!(
        tactic,
        "have"
            | "suff"
            | "suffices"
            | "set"
            | "pose"
            | "wlog"
            | "gen"
            | "case"
            | "elim"
            | "without"
            | "remember"
    )
}
