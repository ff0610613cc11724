//! `size`: read the design, try the candidate packs, write the ranking.

use std::io::{IsTerminal, Write};

use joulepath::Design;
use joulepath::error::Error;
use joulepath::report::size::write_size;
use joulepath::report::warnings;
use joulepath::size::{RankBy, SizeError, SizeOptions, size_observed};
use joulepath::spec::{self, Override};

use super::args::{FormatArg, RankArg, SizeArgs};
use super::run::{Failure, dir_of, emit, format, read, with_overrides};

/// Run `size`.
pub fn size_command(a: &SizeArgs) -> Result<(), Failure> {
    let text = read(&a.file)?;
    let overrides = a
        .sets
        .iter()
        .map(|s| Override::parse(s))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|d| Failure::Usage(format!("{} ({})", d.message(), d.hint().unwrap_or(""))))?;
    let invalid = |e: Error, text: &str| match e {
        Error::Invalid(diagnostics) => Failure::Invalid {
            file: a.file.clone(),
            text: text.to_string(),
            diagnostics,
        },
        other => Failure::Input(other.to_string()),
    };
    // The design as given must pass the checker, with every problem listed as `check` does.
    let dir = dir_of(&a.file);
    let design = Design::from_text_in(&text, &overrides, &dir).map_err(|e| invalid(e, &text))?;
    let mut parsed =
        spec::parse_with(&text, &overrides).map_err(|d| invalid(Error::Invalid(d), &text))?;
    parsed.source.set_base_dir(dir);
    let mut opts = SizeOptions::new(a.target);
    opts.percentile = a.percentile;
    opts.samples = a.samples as usize;
    opts.seed = a.seed;
    opts.cells =
        (!a.cells.is_empty()).then(|| a.cells.iter().map(|c| c.trim().to_string()).collect());
    opts.series = a.series;
    opts.parallel = a.parallel;
    opts.rank_by = match a.by {
        RankArg::Mass => RankBy::Mass,
        RankArg::Volume => RankBy::Volume,
    };
    opts.ambient_c = a.ambient;
    let terminal = std::io::stderr().is_terminal();
    let mut progress = |done: usize, total: usize| {
        if terminal {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\rsizing: run {done} of about {total}");
            let _ = err.flush();
        }
    };
    let result = size_observed(&parsed.spec, &parsed.source, &opts, &mut progress);
    if terminal {
        let _ = write!(std::io::stderr().lock(), "\r{}\r", " ".repeat(48));
    }
    let mut sizing = result.map_err(|e| match e {
        SizeError::Invalid(e) => invalid(e, &text),
        other => Failure::Usage(other.to_string()),
    })?;
    sizing.title = with_overrides(&sizing.title, &overrides);
    let mut buf = Vec::new();
    write_size(&mut buf, &sizing, format(a.format))
        .map_err(|e| Failure::Input(format!("cannot write the output: {e}")))?;
    if !matches!(a.format, FormatArg::Table) {
        let ambient = a.ambient.unwrap_or(design.ambient_c());
        let mut all = warnings(&design, ambient);
        for w in &sizing.warnings {
            if !all.contains(w) {
                all.push(w.clone());
            }
        }
        let _ = joulepath::report::write_warnings(&mut std::io::stderr().lock(), &all, 96);
    }
    emit(&buf, a.output.as_deref())
}
