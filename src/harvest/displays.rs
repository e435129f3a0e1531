//! Reading the goal displays coqc printed for an instrumented file.
//!
//! Takes coqc's standard output for a file that `instrument` rewrote; gives, for each
//! marker number that printed, the text `Show.` displayed between the opening and the
//! closing marker of that number. Displays are found by their numbers, never by counting:
//! a marker that never ran, or output a tactic printed on its own, leaves the other
//! displays where they are. It does not know which sentence a number belongs to.

use std::collections::BTreeMap;

/// The text of the marker printed before a display (`idtac` prints it on a line of its own).
pub const OPEN_MARK: &str = "<<quarry-goal-open";
/// The text of the marker printed after a display.
pub const CLOSE_MARK: &str = "<<quarry-goal-close";

/// The line an opening (`open == true`) or closing marker number `n` prints.
pub fn marker_line(open: bool, n: usize) -> String {
    let mark = if open { OPEN_MARK } else { CLOSE_MARK };
    format!("{mark} {n}>>")
}

/// Reads the marker number of a marker line, if `line` is one of kind `mark`.
fn marker_number(line: &str, mark: &str) -> Option<usize> {
    line.trim()
        .strip_prefix(mark)?
        .strip_suffix(">>")?
        .trim()
        .parse()
        .ok()
}

/// The displays in `stdout`, by marker number. A display is kept only when its closing
/// marker of the same number follows; when a number prints twice (a proof replayed by
/// coqc, e.g. in a functor), the first display is kept.
///
/// ```
/// use quarry::harvest::displays::{displays, marker_line};
/// let out = format!("{}\n1 goal\n  ====\n  True\n{}\n", marker_line(true, 4), marker_line(false, 4));
/// assert_eq!(displays(&out)[&4], "1 goal\n  ====\n  True");
/// ```
pub fn displays(stdout: &str) -> BTreeMap<usize, String> {
    let mut out = BTreeMap::new();
    let mut open: Option<(usize, Vec<&str>)> = None;
    for line in stdout.lines() {
        if let Some(n) = marker_number(line, OPEN_MARK) {
            open = Some((n, Vec::new()));
            continue;
        }
        if let Some(n) = marker_number(line, CLOSE_MARK) {
            if let Some((m, lines)) = open.take() {
                if m == n {
                    let text = lines.join("\n");
                    out.entry(n)
                        .or_insert_with(|| text.trim_matches('\n').to_string());
                }
            }
            continue;
        }
        if let Some((_, lines)) = open.as_mut() {
            lines.push(line);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn display(n: usize, body: &str) -> String {
        format!(
            "{}\n{body}\n{}\n",
            marker_line(true, n),
            marker_line(false, n)
        )
    }

    #[test]
    fn a_missing_display_does_not_shift_the_others() {
        let out = format!(
            "{}{}extra output of a tactic\n{}",
            display(1, "1 goal\n  A"),
            display(3, "1 goal\n  C"),
            display(4, "No more goals.")
        );
        let d = displays(&out);
        assert_eq!(d.len(), 3);
        assert_eq!(d[&1], "1 goal\n  A");
        assert!(!d.contains_key(&2));
        assert_eq!(d[&3], "1 goal\n  C");
        assert_eq!(d[&4], "No more goals.");
    }

    #[test]
    fn an_unclosed_display_is_dropped() {
        let out = format!(
            "{}\n1 goal\n{}",
            marker_line(true, 7),
            display(8, "1 goal\n  B")
        );
        let d = displays(&out);
        assert_eq!(d.keys().copied().collect::<Vec<_>>(), [8]);
    }
}
