//! Lean 4 name resolution through the shared resolver, on small in-memory libraries.
//! The rules are from memory of Lean 4's `resolveGlobalName`, except the suffix fallback,
//! which is quarry's own (said so where it is tested).

use super::{edges, library};
use crate::library::{Library, ModuleId};

const BASIC: &str = "namespace Ledger\n\
    def total : Nat := 0\n\
    def shared : Nat := 0\n\
    protected def Stock.count : Nat := 0\n\
    namespace Stock\n\
    def level : Nat := 0\n\
    end Stock\n\
    private def hidden : Nat := 0\n\
    theorem sees_hidden : hidden = 0 := rfl\n\
    end Ledger\n\
    def total : Nat := 1\n";

const USE: &str = "import Ledger.Basic\n\
    namespace Ledger\n\
    theorem inner_wins : total = 0 := rfl\n\
    theorem rooted : _root_.total = 1 := rfl\n\
    theorem partial_name : Stock.level = 0 := rfl\n\
    theorem generalized_field : total.succ = 1 := rfl\n\
    end Ledger\n\
    section\n\
    open Ledger.Stock\n\
    theorem protected_atomic : count = 0 := rfl\n\
    end\n\
    section\n\
    open Ledger\n\
    theorem protected_qualified : Stock.count = 0 := rfl\n\
    end\n\
    open Ledger (total) in\n\
    theorem only_ambiguous : total = total := rfl\n\
    open Ledger hiding total in\n\
    theorem hiding_root : total = 1 ∧ shared = 0 := ⟨rfl, rfl⟩\n\
    open Ledger renaming shared → common in\n\
    theorem renamed : common = 0 ∧ shared = 0 := ⟨rfl, rfl⟩\n\
    namespace Report\n\
    export Ledger (shared)\n\
    theorem exported : shared = 0 := rfl\n\
    end Report\n\
    theorem by_suffix : Stock.level = 0 := rfl\n\
    theorem private_elsewhere : Ledger.hidden = 0 := rfl\n\
    theorem early : later = 0 := rfl\n\
    def later : Nat := 0\n";

fn demo() -> Library {
    library(&[
        ("Ledger.Basic", BASIC),
        ("Ledger.Use", USE),
        (
            "Ledger.Unrelated",
            "theorem blind : Ledger.total = 0 := rfl\n",
        ),
        (
            "Ledger.Downstream",
            "import Ledger.Use\ntheorem transitive : Ledger.shared = 0 := rfl\n",
        ),
    ])
}

fn unresolved(lib: &Library, name: &str) -> Vec<String> {
    match lib.declarations.iter().find(|d| d.name == name) {
        Some(d) => d.unresolved_names.clone(),
        None => panic!("no `{name}`"),
    }
}

#[test]
fn enclosing_namespaces_innermost_first_then_root() {
    let lib = demo();
    assert_eq!(edges(&lib, "Ledger.inner_wins", true), ["Ledger.total"]);
    assert_eq!(edges(&lib, "Ledger.rooted", true), ["total"]);
    assert_eq!(
        edges(&lib, "Ledger.partial_name", true),
        ["Ledger.Stock.level"]
    );
    assert_eq!(edges(&lib, "Ledger.sees_hidden", true), ["Ledger.hidden"]);
}

#[test]
fn field_notation_on_a_constant_uses_the_constant() {
    // `total.succ` is `Nat.succ total`: the reference is to `Ledger.total`.
    assert_eq!(
        edges(&demo(), "Ledger.generalized_field", true),
        ["Ledger.total"]
    );
}

#[test]
fn protected_names_need_a_namespace_component() {
    let lib = demo();
    assert!(edges(&lib, "protected_atomic", true).is_empty());
    assert!(unresolved(&lib, "protected_atomic").contains(&"count".to_string()));
    assert_eq!(
        edges(&lib, "protected_qualified", true),
        ["Ledger.Stock.count"]
    );
}

#[test]
fn open_only_hiding_renaming_and_export() {
    let lib = demo();
    // `total` is both the root `total` and, through `open Ledger (total)`, `Ledger.total`.
    assert!(edges(&lib, "only_ambiguous", true).is_empty());
    let d = lib
        .declarations
        .iter()
        .find(|d| d.name == "only_ambiguous")
        .map(|d| d.references);
    assert_eq!(d.map(|r| r.ambiguous), Some(2));
    assert_eq!(edges(&lib, "hiding_root", true), ["Ledger.shared", "total"]);
    assert_eq!(edges(&lib, "renamed", true), ["Ledger.shared"]);
    assert!(unresolved(&lib, "renamed").contains(&"shared".to_string()));
    assert_eq!(edges(&lib, "Report.exported", true), ["Ledger.shared"]);
}

#[test]
fn suffix_fallback_privacy_order_and_imports() {
    let lib = demo();
    // quarry's fallback, not Lean's: an otherwise unresolved dotted name found by suffix.
    assert_eq!(edges(&lib, "by_suffix", true), ["Ledger.Stock.level"]);
    assert!(edges(&lib, "private_elsewhere", true).is_empty());
    assert!(unresolved(&lib, "private_elsewhere").contains(&"Ledger.hidden".to_string()));
    assert!(
        edges(&lib, "early", true).is_empty(),
        "declared later in the file"
    );
    assert!(edges(&lib, "blind", true).is_empty(), "not imported");
    assert_eq!(
        edges(&lib, "transitive", true),
        ["Ledger.shared"],
        "imports are transitive"
    );
}

#[test]
fn where_functions_and_mutual_siblings_may_come_later() {
    let lib = library(&[(
        "Ledger.Forward",
        "def total (xs : List Nat) : Nat := go 0 xs\n\
         where go (acc : Nat) : List Nat → Nat\n\
         \x20 | [] => acc\n\
         \x20 | x :: rest => go (acc + x) rest\n\
         mutual\n\
         def isEven : Nat → Bool\n  | 0 => true\n  | n + 1 => isOdd n\n\
         def isOdd : Nat → Bool\n  | 0 => false\n  | n + 1 => isEven n\n\
         end\n",
    )]);
    assert_eq!(edges(&lib, "total", false), ["total.go"]);
    assert!(
        edges(&lib, "total.go", false).is_empty(),
        "its own recursion is no edge"
    );
    assert_eq!(edges(&lib, "isEven", false), ["isOdd"]);
    assert_eq!(edges(&lib, "isOdd", false), ["isEven"]);
}

#[test]
fn three_files_with_imports_namespaces_and_opens() {
    let lib = library(&[
        (
            "Ledger.Core",
            "namespace Ledger\n\
             structure Item where\n  sku : Nat\n  qty : Nat\n\
             def Item.restock (i : Item) (n : Nat) : Item := { i with qty := i.qty + n }\n\
             @[simp] theorem Item.restock_qty (i : Item) (n : Nat) : (i.restock n).qty = i.qty + n := rfl\n\
             end Ledger\n",
        ),
        (
            "Ledger.Stock",
            "import Ledger.Core\n\
             namespace Ledger.Stock\n\
             open Ledger\n\
             def totalQty (xs : List Item) : Nat := (xs.map Item.qty).foldl (· + ·) 0\n\
             theorem restock_qty_le (i : Item) (n : Nat) : i.qty ≤ (i.restock n).qty := by\n\
             \x20 rw [Item.restock_qty]\n\
             \x20 exact Nat.le_add_right _ _\n\
             end Ledger.Stock\n",
        ),
        (
            "Ledger.Report",
            "import Ledger.Stock\n\
             open Ledger Ledger.Stock\n\
             def summary (xs : List Item) : String := toString (totalQty xs)\n\
             theorem summary_restock (i : Item) : i.qty ≤ (i.restock 1).qty := restock_qty_le i 1\n",
        ),
    ]);
    assert_eq!(lib.modules[1].imports[0].resolved, Some(ModuleId(0)));
    assert_eq!(lib.modules[2].imports[0].resolved, Some(ModuleId(1)));
    assert_eq!(edges(&lib, "Ledger.Item", false), Vec::<String>::new());
    assert_eq!(edges(&lib, "Ledger.Item.restock", true), ["Ledger.Item"]);
    assert_eq!(
        edges(&lib, "Ledger.Item.restock_qty", true),
        ["Ledger.Item"]
    );
    assert_eq!(edges(&lib, "Ledger.Stock.totalQty", true), ["Ledger.Item"]);
    assert_eq!(
        edges(&lib, "Ledger.Stock.totalQty", false),
        ["Ledger.Item.qty"]
    );
    assert_eq!(
        edges(&lib, "Ledger.Stock.restock_qty_le", false),
        ["Ledger.Item.restock_qty"]
    );
    assert_eq!(edges(&lib, "summary", true), ["Ledger.Item"]);
    assert_eq!(edges(&lib, "summary", false), ["Ledger.Stock.totalQty"]);
    assert_eq!(
        edges(&lib, "summary_restock", false),
        ["Ledger.Stock.restock_qty_le"]
    );
    let dots = lib
        .declarations
        .iter()
        .find(|d| d.name == "summary_restock")
        .map(|d| d.references.dot_on_local);
    assert_eq!(dots, Some(2));
}
