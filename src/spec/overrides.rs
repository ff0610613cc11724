//! `--set PATH=VALUE`: one value of a design replaced before it is read, by YAML path with list
//! items addressed by id (`loads.radio.draw.tx=90 mA`, `stages.boost-3v3.efficiency=88 %`).

use serde_yaml::{Mapping, Value};

use crate::error::{Diagnostic, did_you_mean};

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
/// the file leaves them out: `battery.aging`, a cell's `polarization`, a stage's `loss`.
const OPTIONAL_BLOCKS: [&str; 3] = ["aging", "polarization", "loss"];

/// Apply `o` to the document `root`; returns the index-form path of the value replaced (e.g.
/// `stages[2].efficiency`), which the checker's messages use.
pub(crate) fn apply(root: &mut Value, o: &Override) -> Result<String, Diagnostic> {
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
    let value: Value =
        serde_yaml::from_str(&o.value).unwrap_or_else(|_| Value::String(o.value.clone()));
    let segments: Vec<&str> = o.path.split('.').collect();
    let fail = |msg: String, hint: Option<String>| {
        Diagnostic::new(format!("--set {}", o.path), msg).with_hint_opt(hint)
    };
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
            *node = Value::Mapping(Mapping::new());
        }
        match node {
            Value::Mapping(map) => {
                let key = Value::String((*seg).to_string());
                if !map.contains_key(&key) {
                    if last {
                        // A key the file leaves out (a default) may be set; the checker judges it.
                        map.insert(key.clone(), Value::Null);
                    } else if OPTIONAL_BLOCKS.contains(seg) {
                        // An optional block the file leaves out is created to hold the value.
                        map.insert(key.clone(), Value::Mapping(Mapping::new()));
                    } else {
                        return Err(unknown(map, seg, &fail));
                    }
                }
                index_path = join(&index_path, seg);
                node = map.get_mut(&key).expect("present");
            }
            Value::Sequence(items) => {
                let by_id = items
                    .iter()
                    .position(|it| it.get("id").and_then(Value::as_str) == Some(*seg));
                let pos = by_id.or_else(|| seg.parse::<usize>().ok().filter(|&i| i < items.len()));
                let Some(i) = pos else {
                    let ids: Vec<&str> = items
                        .iter()
                        .filter_map(|it| it.get("id").and_then(Value::as_str))
                        .collect();
                    let hint = match did_you_mean(seg, ids.iter().copied()) {
                        Some(s) => format!("did you mean `{s}`?"),
                        None if ids.is_empty() => format!(
                            "address items by position, 0 to {}",
                            items.len().saturating_sub(1)
                        ),
                        None => format!("the ids here are {}", super::backticked(&ids)),
                    };
                    return Err(fail(
                        format!("no item `{seg}` in `{}`", prefix(&segments, n)),
                        Some(hint),
                    ));
                };
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

fn unknown(
    map: &Mapping,
    seg: &str,
    fail: &dyn Fn(String, Option<String>) -> Diagnostic,
) -> Diagnostic {
    let keys: Vec<&str> = map.keys().filter_map(Value::as_str).collect();
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

    fn doc() -> Value {
        serde_yaml::from_str(
            "battery: { cell: c }\nstages: [{ id: boost, efficiency: 90 % }]\nloads: [{ id: radio, draw: { tx: 120 mA } }]\n",
        )
        .unwrap()
    }

    fn set(v: &mut Value, s: &str) -> Result<String, Diagnostic> {
        apply(v, &Override::parse(s).unwrap())
    }

    #[test]
    fn replaces_by_id_and_reports_the_index_path() {
        let mut v = doc();
        assert_eq!(
            set(&mut v, "loads.radio.draw.tx=90 mA").unwrap(),
            "loads[0].draw.tx"
        );
        assert_eq!(v["loads"][0]["draw"]["tx"], Value::String("90 mA".into()));
        assert_eq!(
            set(&mut v, "stages.boost.efficiency=88 %").unwrap(),
            "stages[0].efficiency"
        );
        assert_eq!(
            set(&mut v, "battery.parallel=2").unwrap(),
            "battery.parallel"
        );
        assert_eq!(v["battery"]["parallel"], Value::Number(2.into()));
        // An optional block the file leaves out is created, as a left-out key is.
        assert_eq!(
            set(&mut v, "battery.aging.capacity=80 %").unwrap(),
            "battery.aging.capacity"
        );
        assert_eq!(
            v["battery"]["aging"]["capacity"],
            Value::String("80 %".into())
        );
        // By position too.
        assert_eq!(
            set(&mut v, "stages.0.quiescent=5 µA").unwrap(),
            "stages[0].quiescent"
        );
    }

    #[test]
    fn unknown_parts_say_what_exists() {
        let mut v = doc();
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
