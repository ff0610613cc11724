//! `compare`'s designs: each file with the `--set` overrides that follow it on the command line,
//! from the positions clap records for every value.

use std::path::PathBuf;

use clap::ArgMatches;

/// One design to compare: a file and the overrides that make a variant of it.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Group {
    /// The design file.
    pub file: PathBuf,
    /// `PATH=VALUE` overrides, in order: those given before every file first.
    pub sets: Vec<String>,
    /// How many of `sets` were given before every file (shared by all designs).
    pub shared: usize,
}

/// Group `compare`'s files with the `--set` values that follow each; a `--set` before any file
/// applies to every design.
pub fn groups(m: &ArgMatches) -> Vec<Group> {
    let indexed =
        |id: &str| -> Vec<usize> { m.indices_of(id).map(Iterator::collect).unwrap_or_default() };
    let files: Vec<PathBuf> = m
        .get_many::<PathBuf>("files")
        .map(|v| v.cloned().collect())
        .unwrap_or_default();
    let sets: Vec<String> = m
        .get_many::<String>("sets")
        .map(|v| v.cloned().collect())
        .unwrap_or_default();
    let (file_at, set_at) = (indexed("files"), indexed("sets"));
    let shared: Vec<String> = sets
        .iter()
        .zip(&set_at)
        .filter(|(_, i)| file_at.first().is_none_or(|f| *i < f))
        .map(|(s, _)| s.clone())
        .collect();
    files
        .iter()
        .enumerate()
        .map(|(k, file)| {
            let (from, to) = (
                file_at[k],
                file_at.get(k + 1).copied().unwrap_or(usize::MAX),
            );
            let mut own = shared.clone();
            own.extend(
                sets.iter()
                    .zip(&set_at)
                    .filter(|(_, i)| **i > from && **i < to)
                    .map(|(s, _)| s.clone()),
            );
            Group {
                file: file.clone(),
                sets: own,
                shared: shared.len(),
            }
        })
        .collect()
}

/// Whether the groups make a comparison: two or more designs, or one file with a variant.
pub fn check(groups: &[Group]) -> Result<(), String> {
    match groups.len() {
        0 => Err("compare needs at least one design file (and a second file, or `--set` variants)".into()),
        1 if groups[0].sets.len() == groups[0].shared => Err(
            "compare needs two or more designs: give another file, or the same file again with `--set PATH=VALUE`"
                .into(),
        ),
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use clap::{CommandFactory, FromArgMatches};

    use super::super::args::{Args, Command};

    fn parse(line: &str) -> Args {
        let words = std::iter::once("joulepath").chain(line.split_whitespace());
        let m = Args::command().try_get_matches_from(words).expect("parses");
        let mut a = Args::from_arg_matches(&m).expect("args");
        if let (Command::Compare(c), Some((_, sub))) = (&mut a.command, m.subcommand()) {
            c.groups = super::groups(sub);
        }
        a
    }

    #[test]
    fn groups_take_their_own_sets() {
        let a =
            parse("compare a.yaml b.yaml --set battery.parallel=2 --format json a.yaml --set=x=1");
        let Command::Compare(super::super::args::CompareArgs { groups, format, .. }) = a.command
        else {
            panic!("compare")
        };
        assert_eq!(groups.len(), 3);
        assert!(groups[0].sets.is_empty());
        assert_eq!(groups[1].sets, ["battery.parallel=2"]);
        assert_eq!(groups[2].sets, ["x=1"]);
        assert_eq!(format, super::super::args::FormatArg::Json);
    }

    #[test]
    fn a_set_before_the_files_applies_to_all() {
        let a = parse("compare --set ambient=0degC a.yaml b.yaml --set x=1");
        let Command::Compare(super::super::args::CompareArgs { groups, .. }) = a.command else {
            panic!("compare")
        };
        assert_eq!(groups[0].sets, ["ambient=0degC"]);
        assert_eq!(groups[1].sets, ["ambient=0degC", "x=1"]);
    }

    #[test]
    fn one_design_needs_a_variant() {
        let g = |line: &str| {
            let Command::Compare(super::super::args::CompareArgs { groups, .. }) =
                parse(line).command
            else {
                panic!("compare")
            };
            super::check(&groups)
        };
        assert!(g("compare a.yaml").is_err());
        assert!(g("compare a.yaml a.yaml --set battery.parallel=2").is_ok());
        let words = ["joulepath", "compare", "a.yaml", "b.yaml", "--bogus"];
        assert!(Args::command().try_get_matches_from(words).is_err());
        let words = ["joulepath", "compare", "a.yaml", "b.yaml", "--format"];
        assert!(Args::command().try_get_matches_from(words).is_err());
    }
}
