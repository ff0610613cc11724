//! `--set PATH=VALUE`: one value of a design replaced before it is read, by YAML path with list
//! items addressed by id (`loads.radio.draw.tx=90 mA`, `stages.boost-3v3.efficiency=88 %`).

use std::borrow::Cow;

use super::node::{Kind, Node};
use crate::error::{Diagnostic, did_you_mean};

use super::path::Seg;

/// One override, as written on the command line.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Override {
    /// The path as written, e.g. `battery.parallel`.
    pub path: String,
    /// The value as written, read as YAML (`2`, `90 mA`, `[1 V, 3 V]`).
    pub value: String,
}

impl Override {
    /// Read `PATH=VALUE`.
    ///
    /// # Errors
    ///
    /// A diagnostic when there is no `=` or the path is empty.
    ///
    /// # Examples
    ///
    /// ```
    /// use joulepath::spec::Override;
    /// let o = Override::parse("loads.radio.draw.tx=90 mA").unwrap();
    /// assert_eq!((o.path.as_str(), o.value.as_str()), ("loads.radio.draw.tx", "90 mA"));
    /// assert!(Override::parse("battery.parallel").is_err());
    /// ```
    pub fn parse(text: &str) -> Result<Self, Diagnostic> {
        match text.split_once('=') {
            Some((p, v)) if !p.trim().is_empty() => Ok(Self {
                path: p.trim().to_string(),
                value: v.trim().to_string(),
            }),
            _ => Err(Diagnostic::new(
                "",
                format!("`--set {text}` is not of the form PATH=VALUE"),
            )
            .with_hint("for example `--set battery.parallel=2` or `--set loads.radio.draw.tx=\"90 mA\"`")),
        }
    }
}

/// The optional blocks of a design (mappings of keys with defaults) that `--set` creates when
/// the file leaves them out: `battery.aging`, `battery.buffer`, a cell's `polarization`, a
/// stage's `loss`.
const OPTIONAL_BLOCKS: [&str; 4] = ["aging", "buffer", "polarization", "loss"];

/// Apply `o` to the document `root`; returns the index-form path of the value replaced (e.g.
/// `stages[2].efficiency`), which the checker's messages use. The value put in has no place in
/// the file.
pub(crate) fn apply(root: &mut Node<'_>, o: &Override) -> Result<String, Diagnostic> {
    let value = override_value(o)?;
    let fail = |msg: String, hint: Option<String>| {
        Diagnostic::new(format!("--set {}", o.path), msg).with_hint_opt(hint)
    };
    // `[N]` is a list item by position, as `.N` is.
    let parts = super::path::segments(&o.path).map_err(|m| {
        fail(
            m,
            Some("write a path such as `loads.radio.draw.tx` or `profile[0].for`".into()),
        )
    })?;
    let index_texts: Vec<String> = parts
        .iter()
        .map(|p| match p {
            Seg::Name(n) => (*n).to_string(),
            Seg::Index(i) => i.to_string(),
        })
        .collect();
    let segments: Vec<&str> = index_texts.iter().map(String::as_str).collect();
    let name = |seg: &str| Node::detached(Kind::Str(Cow::Owned(seg.to_string())));
    let mut node = root;
    let mut index_path = String::new();
    for (n, seg) in segments.iter().enumerate() {
        let last = n + 1 == segments.len();
        if seg.is_empty() {
            return Err(fail(
                "the path has an empty part".into(),
                Some("separate names with single dots".into()),
            ));
        }
        // A block written empty (`aging:`) takes keys like one left out.
        if node.is_null() {
            node.kind = Kind::Map(Vec::new());
        }
        match &mut node.kind {
            Kind::Map(map) => {
                let at = match map.iter().position(|(k, _)| k.as_str() == Some(*seg)) {
                    Some(i) => i,
                    // A key the file leaves out (a default) may be set; the checker judges it.
                    None if last => {
                        map.push((name(seg), Node::detached(Kind::Null)));
                        map.len() - 1
                    }
                    // An optional block the file leaves out is created to hold the value.
                    None if OPTIONAL_BLOCKS.contains(seg) => {
                        map.push((name(seg), Node::detached(Kind::Map(Vec::new()))));
                        map.len() - 1
                    }
                    None => return Err(unknown(map, seg, &fail)),
                };
                index_path = join(&index_path, seg);
                node = &mut map[at].1;
            }
            Kind::Seq(items) => {
                let i = item_index(items, (&segments, n), &fail)?;
                index_path = format!("{index_path}[{i}]");
                node = &mut items[i];
            }
            _ => {
                return Err(fail(
                    format!(
                        "`{}` holds a single value; it has no `{seg}`",
                        prefix(&segments, n)
                    ),
                    Some(format!("set `{}` itself", prefix(&segments, n))),
                ));
            }
        }
    }
    *node = value;
    Ok(index_path)
}

/// The value of `o` as a document node: its YAML, or the text itself when it is not YAML on
/// its own (`a: b: c`); an error when it is nested too deep.
fn override_value(o: &Override) -> Result<Node<'static>, Diagnostic> {
    if super::depth::check(&o.value).is_some() {
        return Err(Diagnostic::new(
            format!("--set {}", o.path),
            format!(
                "the value is nested too deep: more than {} levels of lists and mappings",
                super::depth::MAX_DEPTH
            ),
        )
        .with_hint("give a plain value such as `90 mA` or a short list such as `[1 V, 3 V]`"));
    }
    Ok(super::yaml::read(&o.value).map_or_else(
        |_| Node::detached(Kind::Str(Cow::Owned(o.value.clone()))),
        |v| v.detach(),
    ))
}

/// The position in `items` of path segment `n` of `segments`: the item with that `id`, else
/// the item at that index; an error naming the ids (or the positions) when there is none.
fn item_index(
    items: &[Node<'_>],
    (segments, n): (&[&str], usize),
    fail: &dyn Fn(String, Option<String>) -> Diagnostic,
) -> Result<usize, Diagnostic> {
    let seg = segments[n];
    let id = |it: &Node<'_>| it.get("id").and_then(Node::as_str).map(str::to_string);
    let by_id = items.iter().position(|it| id(it).as_deref() == Some(seg));
    let pos = by_id.or_else(|| seg.parse::<usize>().ok().filter(|&i| i < items.len()));
    pos.ok_or_else(|| {
        let ids: Vec<String> = items.iter().filter_map(id).collect();
        let hint = match did_you_mean(seg, ids.iter().map(String::as_str)) {
            Some(s) => format!("did you mean `{s}`?"),
            None if ids.is_empty() => format!(
                "address items by position, 0 to {}",
                items.len().saturating_sub(1)
            ),
            None => format!("the ids here are {}", super::backticked(&ids)),
        };
        fail(
            format!("no item `{seg}` in `{}`", prefix(segments, n)),
            Some(hint),
        )
    })
}

fn unknown(
    map: &[(Node<'_>, Node<'_>)],
    seg: &str,
    fail: &dyn Fn(String, Option<String>) -> Diagnostic,
) -> Diagnostic {
    let keys: Vec<&str> = map.iter().filter_map(|(k, _)| k.as_str()).collect();
    let hint = match did_you_mean(seg, keys.iter().copied()) {
        Some(s) => format!("did you mean `{s}`?"),
        None => format!("the names here are {}", super::backticked(&keys)),
    };
    fail(format!("there is no `{seg}` here"), Some(hint))
}

fn prefix(segments: &[&str], n: usize) -> String {
    if n == 0 {
        "the design".into()
    } else {
        segments[..n].join(".")
    }
}

fn join(a: &str, b: &str) -> String {
    if a.is_empty() {
        b.to_string()
    } else {
        format!("{a}.{b}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::node::Number;
    use crate::spec::yaml::read;

    const DOC: &str = "battery: { cell: c }\nstages: [{ id: boost, efficiency: 90 % }]\nloads: [{ id: radio, draw: { tx: 120 mA } }]\n";

    fn set(v: &mut Node<'_>, s: &str) -> Result<String, Diagnostic> {
        apply(v, &Override::parse(s).unwrap())
    }

    /// The node at the keys and list indices `path`.
    fn at<'n>(v: &'n Node<'_>, path: &[&str]) -> &'n Node<'n> {
        path.iter()
            .fold(v, |n, p| match (&n.kind, p.parse::<usize>()) {
                (Kind::Seq(items), Ok(i)) => &items[i],
                _ => n.get(p).unwrap(),
            })
    }

    #[test]
    fn replaces_by_id_and_reports_the_index_path() {
        let mut v = read(DOC).unwrap();
        assert_eq!(
            set(&mut v, "loads.radio.draw.tx=90 mA").unwrap(),
            "loads[0].draw.tx"
        );
        assert_eq!(
            at(&v, &["loads", "0", "draw", "tx"]).as_str(),
            Some("90 mA")
        );
        // The value set has no place in the file.
        assert_eq!(at(&v, &["loads", "0", "draw", "tx"]).at.location(), None);
        assert_eq!(
            set(&mut v, "stages.boost.efficiency=88 %").unwrap(),
            "stages[0].efficiency"
        );
        assert_eq!(
            set(&mut v, "battery.parallel=2").unwrap(),
            "battery.parallel"
        );
        assert_eq!(
            at(&v, &["battery", "parallel"]).kind,
            Kind::Number(Number::PosInt(2))
        );
        // An optional block the file leaves out is created, as a left-out key is.
        assert_eq!(
            set(&mut v, "battery.aging.capacity=80 %").unwrap(),
            "battery.aging.capacity"
        );
        assert_eq!(
            at(&v, &["battery", "aging", "capacity"]).as_str(),
            Some("80 %")
        );
        // By position too, as `.N` or `[N]`.
        assert_eq!(
            set(&mut v, "stages.0.quiescent=5 µA").unwrap(),
            "stages[0].quiescent"
        );
        assert_eq!(
            set(&mut v, "stages[0].shutdown=1 µA").unwrap(),
            "stages[0].shutdown"
        );
        assert_eq!(at(&v, &["stages", "0", "shutdown"]).as_str(), Some("1 µA"));
        assert!(set(&mut v, "stages[7].shutdown=1 µA").is_err());
        assert!(set(&mut v, "stages[x].shutdown=1 µA").is_err());
        // A value that is not YAML on its own is text.
        set(&mut v, "design=a: b: c").unwrap();
        assert_eq!(at(&v, &["design"]).as_str(), Some("a: b: c"));
    }

    #[test]
    fn unknown_parts_say_what_exists() {
        let mut v = read(DOC).unwrap();
        let e = set(&mut v, "loads.radoi.draw.tx=1 mA").unwrap_err();
        assert_eq!(e.hint(), Some("did you mean `radio`?"));
        let e = set(&mut v, "baterry.parallel=2").unwrap_err();
        assert_eq!(e.hint(), Some("did you mean `battery`?"));
        let e = set(&mut v, "battery.agign.capacity=80 %").unwrap_err();
        assert_eq!(e.message(), "there is no `agign` here");
        let e = set(&mut v, "battery.cell.x=2").unwrap_err();
        assert!(e.message().contains("single value"), "{}", e.message());
    }
}
