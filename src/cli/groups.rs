//! The arguments of `compare`: designs, each optionally followed by its own `--set` overrides,
//! and options that apply to all of them.

use std::path::PathBuf;

use super::args::FormatArg;

/// One design to compare: a file and the overrides that make a variant of it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Group {
    /// The design file.
    pub file: PathBuf,
    /// `PATH=VALUE` overrides, in order.
    pub sets: Vec<String>,
}

/// Everything `compare` was given.
#[derive(Debug, Clone, PartialEq)]
pub struct CompareArgs {
    /// The designs, in order.
    pub groups: Vec<Group>,
    /// Output format.
    pub format: FormatArg,
    /// Output file.
    pub output: Option<PathBuf>,
    /// Ambient override, °C.
    pub ambient: Option<f64>,
    /// Horizon, s.
    pub horizon: Option<f64>,
    /// The chronological reference solver.
    pub exact: bool,
    /// A chart of all the discharge curves.
    pub plot: Option<PathBuf>,
}

/// Read the words after `compare`: `FILE [--set P=V]... FILE [--set P=V]... [options]`.
/// A `--set` before any file applies to every design.
pub fn parse_groups(words: &[String]) -> Result<CompareArgs, String> {
    let mut out = CompareArgs {
        groups: Vec::new(),
        format: FormatArg::Table,
        output: None,
        ambient: None,
        horizon: None,
        exact: false,
        plot: None,
    };
    let mut shared_sets: Vec<String> = Vec::new();
    let mut i = 0;
    let value = |i: usize, flag: &str| -> Result<String, String> {
        words
            .get(i + 1)
            .cloned()
            .ok_or_else(|| format!("`{flag}` needs a value"))
    };
    while i < words.len() {
        let w = words[i].as_str();
        let (flag, inline) = match w.split_once('=') {
            Some((f, v)) if f.starts_with("--") => (f, Some(v.to_string())),
            _ => (w, None),
        };
        let take = |i: &mut usize| -> Result<String, String> {
            if let Some(v) = &inline {
                Ok(v.clone())
            } else {
                let v = value(*i, flag)?;
                *i += 1;
                Ok(v)
            }
        };
        match flag {
            "--set" => {
                let v = take(&mut i)?;
                match out.groups.last_mut() {
                    Some(g) => g.sets.push(v),
                    None => shared_sets.push(v),
                }
            }
            "--format" => {
                out.format = match take(&mut i)?.as_str() {
                    "table" => FormatArg::Table,
                    "json" => FormatArg::Json,
                    "csv" => FormatArg::Csv,
                    other => {
                        return Err(format!("unknown format `{other}` (use table, json or csv)"));
                    }
                };
            }
            "-o" | "--output" => out.output = Some(PathBuf::from(take(&mut i)?)),
            "--plot" => out.plot = Some(PathBuf::from(take(&mut i)?)),
            "--ambient" => out.ambient = Some(super::args::parse_temperature(&take(&mut i)?)?),
            "--horizon" => out.horizon = Some(super::args::parse_duration(&take(&mut i)?)?),
            "--exact" => out.exact = true,
            f if f.starts_with('-')
                && f.len() > 1
                && !f.starts_with("-.")
                && f.parse::<f64>().is_err() =>
            {
                return Err(format!(
                    "unknown option `{f}` for compare (options: --set, --format, -o, --plot, --ambient, --horizon, --exact)"
                ));
            }
            _ => out.groups.push(Group {
                file: PathBuf::from(w),
                sets: shared_sets.clone(),
            }),
        }
        i += 1;
    }
    match out.groups.len() {
        0 => Err("compare needs at least one design file (and a second file, or `--set` variants)".into()),
        1 if out.groups[0].sets.len() == shared_sets.len() => Err(
            "compare needs two or more designs: give another file, or the same file again with `--set PATH=VALUE`"
                .into(),
        ),
        _ => Ok(out),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn words(s: &str) -> Vec<String> {
        s.split_whitespace().map(str::to_string).collect()
    }

    #[test]
    fn groups_take_their_own_sets() {
        let a = parse_groups(&words(
            "a.yaml b.yaml --set battery.parallel=2 --format json a.yaml --set=x=1",
        ))
        .unwrap();
        assert_eq!(a.groups.len(), 3);
        assert!(a.groups[0].sets.is_empty());
        assert_eq!(a.groups[1].sets, ["battery.parallel=2"]);
        assert_eq!(a.groups[2].sets, ["x=1"]);
        assert_eq!(a.format, FormatArg::Json);
    }

    #[test]
    fn one_design_needs_a_variant() {
        assert!(parse_groups(&words("a.yaml")).is_err());
        assert!(parse_groups(&words("a.yaml a.yaml --set battery.parallel=2")).is_ok());
        assert!(parse_groups(&words("a.yaml b.yaml --bogus")).is_err());
        assert!(parse_groups(&words("a.yaml b.yaml --format")).is_err());
    }
}
