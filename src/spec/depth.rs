//! A bound on how deeply a file nests lists and mappings, checked on the text before the YAML
//! reader sees it. The parser and the serde types recurse once per level: a file nesting
//! brackets forty thousand deep would overflow the stack. The scan is linear, independent of the
//! reader, and errs on the side of counting a level too many (a design file needs about a
//! dozen). The same scan finds a flow bracket that does not match, for the words of a syntax
//! error ([`unmatched_bracket`]).

use crate::error::{Diagnostic, Location};

/// The deepest nesting accepted: lists and mappings, block indentation and flow brackets
/// together. A design with `repeat` blocks nested as deep as the checker allows (16) uses about
/// 40; common practice, no source, for the margin above that.
pub(crate) const MAX_DEPTH: usize = 100;

/// A flow bracket: itself, its line (from 0) and byte offset in the line.
type Bracket = (u8, usize, usize);

/// The scanner's state between lines.
#[derive(Default)]
struct Scan {
    /// Columns (bytes) of the open block levels, and whether each is a list.
    indents: Vec<(usize, bool)>,
    /// Open flow brackets: the bracket, its line (from 0) and byte offset in that line.
    flow: Vec<Bracket>,
    /// The line being scanned (from 0).
    line_no: usize,
    /// The first closing bracket of the other kind than the open one, and the open bracket.
    mismatch: Option<(Bracket, Bracket)>,
    /// An open quoted scalar (`'` or `"`), which may span lines.
    quote: Option<u8>,
    /// The indentation of a line that opened a block scalar (`|`, `>`): deeper lines are text.
    block_scalar: Option<usize>,
}

/// The first place where `text` nests deeper than [`MAX_DEPTH`], as a diagnostic.
pub(crate) fn check(text: &str) -> Option<Diagnostic> {
    let mut s = Scan::default();
    for (n, raw) in text.split('\n').enumerate() {
        let line = raw.strip_suffix('\r').unwrap_or(raw);
        s.line_no = n;
        if let Some(at) = s.line(line.as_bytes()) {
            let col = line[..at].chars().count() + 1;
            return Some(too_deep(Location { line: n + 1, col }));
        }
    }
    None
}

/// The message for a file nested too deep at `at`.
fn too_deep(at: Location) -> Diagnostic {
    Diagnostic::of(
        crate::error::DiagnosticKind::TooDeep,
        "",
        format!(
            "the file is nested too deep: more than {MAX_DEPTH} levels of lists and mappings"
        ),
    )
    .with_hint(
        "a design needs about a dozen levels; look for unclosed brackets or runaway indentation here",
    )
    .at(Some(at))
}

/// The first flow bracket of `text` that closes one of the other kind (`[1, 2}`), else the
/// innermost one never closed: its place, what is wrong, and the fix. For the words of a syntax
/// error, which the parser often notices only lines after the bracket.
pub(crate) fn unmatched_bracket(text: &str) -> Option<(Location, String, String)> {
    let lines: Vec<&str> = text
        .split('\n')
        .map(|l| l.strip_suffix('\r').unwrap_or(l))
        .collect();
    let mut s = Scan::default();
    for (n, line) in lines.iter().enumerate() {
        s.line_no = n;
        // Too deep: `check` has its own words for that.
        if s.line(line.as_bytes()).is_some() {
            return None;
        }
        if s.mismatch.is_some() {
            break;
        }
    }
    let place = |line: usize, at: usize| Location {
        line: line + 1,
        col: lines[line][..at].chars().count() + 1,
    };
    let fix = "close each `[` with `]` and each `{` with `}`".to_string();
    if let Some(((close, cl, ca), (open, ol, oa))) = s.mismatch {
        let o = place(ol, oa);
        return Some((
            place(cl, ca),
            format!(
                "this `{}` does not close the `{}` opened at line {}, column {}",
                close as char, open as char, o.line, o.col
            ),
            fix,
        ));
    }
    let &(open, ol, oa) = s.flow.last()?;
    let closing = if open == b'[' { ']' } else { '}' };
    Some((
        place(ol, oa),
        format!("this `{}` is never closed", open as char),
        format!("close it with `{closing}` where its items end"),
    ))
}

fn is_blank(c: u8) -> bool {
    c == b' ' || c == b'\t'
}

impl Scan {
    fn depth(&self) -> usize {
        self.indents.len() + self.flow.len()
    }

    /// Scan one line; the byte offset where the depth passes the limit, if it does.
    fn line(&mut self, b: &[u8]) -> Option<usize> {
        let indent = b.iter().take_while(|&&c| c == b' ').count();
        if let Some(parent) = self.block_scalar {
            if indent >= b.len() || indent > parent {
                return None;
            }
            self.block_scalar = None;
        }
        if self.quote.is_some() || !self.flow.is_empty() {
            return self.rest(b, 0, indent, false);
        }
        let content = &b[indent..];
        if content.is_empty() || content[0] == b'#' {
            return None;
        }
        if indent == 0 && (content.starts_with(b"---") || content.starts_with(b"...")) {
            self.indents.clear();
            return self.rest(b, 3, indent, true);
        }
        let dash = |at: usize| {
            matches!(b.get(at), Some(b'-' | b'?')) && b.get(at + 1).is_none_or(|&c| is_blank(c))
        };
        let is_seq = dash(indent);
        while let Some(&(col, seq)) = self.indents.last() {
            // A deeper level has ended; at the same column a list under a key goes on to the
            // next key, and a key's list written at the key's own column is one level deeper.
            if col > indent || (col == indent && seq && !is_seq) {
                self.indents.pop();
            } else {
                break;
            }
        }
        if self.indents.last() != Some(&(indent, is_seq)) {
            self.indents.push((indent, is_seq));
            if self.depth() > MAX_DEPTH {
                return Some(indent);
            }
        }
        // `- - x` and `? x` open a level per indicator on one line.
        let mut at = indent;
        while dash(at) {
            at += 1;
            while at < b.len() && is_blank(b[at]) {
                at += 1;
            }
            if at < b.len() && b[at] != b'#' {
                self.indents.push((at, dash(at)));
                if self.depth() > MAX_DEPTH {
                    return Some(at);
                }
            }
        }
        self.rest(b, at, indent, true)
    }

    /// Scan the line from `at`: quotes, comments, flow brackets, block scalar headers.
    fn rest(&mut self, b: &[u8], mut at: usize, indent: usize, mut start: bool) -> Option<usize> {
        while at < b.len() {
            let c = b[at];
            if let Some(q) = self.quote {
                if c == b'\\' && q == b'"' {
                    at += 1;
                } else if c == q {
                    if q == b'\'' && b.get(at + 1) == Some(&b'\'') {
                        at += 1;
                    } else {
                        self.quote = None;
                        start = false;
                    }
                }
                at += 1;
                continue;
            }
            match c {
                b'#' if at == 0 || is_blank(b[at - 1]) => return None,
                b'[' | b'{' if start || !self.flow.is_empty() => {
                    self.flow.push((c, self.line_no, at));
                    if self.depth() > MAX_DEPTH {
                        return Some(at);
                    }
                    start = true;
                }
                b']' | b'}' if !self.flow.is_empty() => {
                    let open = self.flow.pop().unwrap_or_default();
                    if (open.0 == b'[') != (c == b']') && self.mismatch.is_none() {
                        self.mismatch = Some(((c, self.line_no, at), open));
                    }
                    start = false;
                }
                b',' if !self.flow.is_empty() => start = true,
                b':' if !self.flow.is_empty() || b.get(at + 1).is_none_or(|&x| is_blank(x)) => {
                    start = true;
                }
                b'\'' | b'"' if start => self.quote = Some(c),
                b'|' | b'>' if start && self.flow.is_empty() => {
                    self.block_scalar = Some(indent);
                    return None;
                }
                // Anchors, tags and aliases before a value leave it at its start.
                b'&' | b'!' | b'*' if start => {
                    while at < b.len() && !is_blank(b[at]) {
                        at += 1;
                    }
                    continue;
                }
                _ if is_blank(c) => {}
                _ => start = false,
            }
            at += 1;
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn depth_error(text: &str) -> Option<Location> {
        check(text).and_then(|d| d.location())
    }

    #[test]
    fn ordinary_files_pass() {
        for text in [
            "a: [[1, 2], {b: [c]}]\n",
            "a:\n  - b: 1\n    c:\n      - - x\n",
            "a: 'it''s [' \nb: \"[\\\"[\"\n",
            "a: x[1\nb: [1]\n",
            "a: |\n    [[[[[\n      [[[[\nb: 1\n",
            "a: [1,\n  [2,\n   3]]\n",
        ] {
            assert_eq!(check(text), None, "{text}");
        }
        for dir in ["examples", "tests/data", "presets"] {
            let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(dir);
            for e in std::fs::read_dir(root).unwrap().flatten() {
                if let Ok(text) = std::fs::read_to_string(e.path()) {
                    assert_eq!(check(&text), None, "{}", e.path().display());
                }
            }
        }
    }

    #[test]
    fn deep_flow_nesting_is_found_at_its_bracket() {
        let text = format!("design: {}{}\n", "[".repeat(40_000), "]".repeat(40_000));
        let at = depth_error(&text).unwrap();
        assert_eq!((at.line, at.col), (1, 9 + MAX_DEPTH - 1));
        // Exactly at the limit is fine: the top mapping and 99 brackets.
        let ok = format!(
            "design: {}{}\n",
            "[".repeat(MAX_DEPTH - 1),
            "]".repeat(MAX_DEPTH - 1)
        );
        assert_eq!(check(&ok), None);
    }

    #[test]
    fn deep_block_nesting_is_found_at_its_line() {
        let mut text = String::from("profile:\n");
        for i in 0..200 {
            let pad = "  ".repeat(i + 1);
            text += &pad;
            text += "- times: 2\n";
            text += &pad;
            text += "  repeat:\n";
        }
        let at = depth_error(&text).unwrap();
        assert_eq!(at.line, 100);
        // `- - - x` on one line counts each level.
        let dashes = ["a: 1\nb:\n", &"- ".repeat(200), "x\n"].concat();
        assert_eq!(depth_error(&dashes).map(|l| l.line), Some(3));
    }
}
