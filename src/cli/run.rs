//! Dispatch: read the design, call the library, write the output.

use std::fmt::Write as _;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use joulepath::Design;
use joulepath::error::{Diagnostic, Error, did_you_mean};
use joulepath::model::Preset;
use joulepath::report::cells::{write_cell, write_cells};
use joulepath::report::compare::{Entry, write_compare};
use joulepath::report::plot::PlotFormat;
use joulepath::report::{
    Format, budget::write_budget, heat::write_heat, outline::write_outline, runtime::write_runtime,
    spread::write_spread, warnings, write_warnings,
};
use joulepath::solve::budget;
use joulepath::spec::Override;

use super::args::{
    Args, BudgetArgs, Command, FormatArg, HeatArgs, PlotArgs, ReportSpread, RunArgs, RuntimeArgs,
    SpreadArgs,
};
use super::groups::{Group, check as check_groups};
use super::pictures::{
    SpreadPicture, compare_plot, draw_spread, plot_command, report_command, run_with_progress,
    spread_pictures, spread_with_progress,
};
use super::render::render_diagnostics;

/// Why a command did not succeed.
#[derive(Debug)]
pub enum Failure {
    /// The design file is invalid.
    Invalid {
        /// Its path as given.
        file: PathBuf,
        /// Its text (for showing source lines).
        text: String,
        /// The problems.
        diagnostics: Vec<Diagnostic>,
    },
    /// An input file cannot be read or the output cannot be written (exit 1).
    Input(String),
    /// An argument does not fit the design (exit 2).
    Usage(String),
}

impl Failure {
    /// The exit code.
    pub fn code(&self) -> u8 {
        match self {
            Failure::Invalid { .. } | Failure::Input(_) => 1,
            Failure::Usage(_) => 2,
        }
    }

    /// The failure in words (the first problem of an invalid file).
    pub fn message(&self) -> String {
        match self {
            Failure::Invalid {
                file, diagnostics, ..
            } => format!(
                "{}: {}",
                file.display(),
                diagnostics.first().map_or("invalid", Diagnostic::message)
            ),
            Failure::Input(m) | Failure::Usage(m) => m.clone(),
        }
    }

    /// Print the failure on standard error.
    pub fn report(&self) {
        let mut err = io::stderr().lock();
        let _ = match self {
            Failure::Invalid {
                file,
                text,
                diagnostics,
            } => render_diagnostics(&mut err, &file.display().to_string(), text, diagnostics),
            Failure::Input(m) | Failure::Usage(m) => writeln!(err, "error: {m}"),
        };
    }
}

pub(super) fn read(path: &Path) -> Result<String, Failure> {
    // Bounded, regular files only; then the text must be UTF-8, with the place of the first
    // byte that is not.
    let bytes = super::files::read_input(path)?;
    String::from_utf8(bytes).map_err(|e| {
        // The place of the first byte that is not UTF-8, as line and column of the text before.
        let bytes = e.as_bytes();
        let at = e.utf8_error().valid_up_to();
        let before = String::from_utf8_lossy(&bytes[..at]);
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
        Failure::Invalid {
            file: path.to_path_buf(),
            text: String::from_utf8_lossy(bytes).into_owned(),
            diagnostics: vec![
                Diagnostic::new(
                    "",
                    format!(
                        "the file is not UTF-8 text: byte 0x{:02X} at line {line}, column {col} is not a character",
                        bytes[at]
                    ),
                )
                .with_hint("save the file as UTF-8 (in most editors under Save As or Encoding)")
                .at_line_col(line, col),
            ],
        }
    })
}

fn load(path: &Path) -> Result<Design, Failure> {
    load_with(path, &[])
}

/// Read a design with `--set PATH=VALUE` overrides applied.
fn load_with(path: &Path, sets: &[String]) -> Result<Design, Failure> {
    let text = read(path)?;
    let overrides = sets
        .iter()
        .map(|s| Override::parse(s))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|d| Failure::Usage(format!("{} ({})", d.message(), d.hint().unwrap_or(""))))?;
    let mut d = Design::from_text_in(&text, &overrides, &dir_of(path)).map_err(|e| match e {
        Error::Invalid(diagnostics) => Failure::Invalid {
            file: path.to_path_buf(),
            text,
            diagnostics,
        },
        other => Failure::Input(other.to_string()),
    })?;
    let title = with_overrides(d.title(), &overrides);
    d.set_title(title);
    Ok(d)
}

/// A title with the `--set` changes it was run with, `title [path=value, ...]`: a variant says
/// what was changed wherever its title is shown (tables, JSON `design`, pictures, the report),
/// so that variants of one file can be told apart.
pub(super) fn with_overrides(title: &str, overrides: &[Override]) -> String {
    if overrides.is_empty() {
        return title.to_string();
    }
    let changes: Vec<String> = overrides
        .iter()
        .map(|o| format!("{}={}", o.path, o.value))
        .collect();
    format!("{title} [{}]", changes.join(", "))
}

/// The directory of a design file, which the files it names are read from.
pub(super) fn dir_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

pub(super) fn format(f: FormatArg) -> Format {
    match f {
        FormatArg::Table => Format::Table,
        FormatArg::Json => Format::Json,
        FormatArg::Csv => Format::Csv,
    }
}

/// Write `bytes` to `out`, or standard output; a file is written whole or not at all.
pub(super) fn emit(bytes: &[u8], out: Option<&Path>) -> Result<(), Failure> {
    match out {
        None => super::files::write_stdout(bytes),
        Some(path) => super::files::write_output(bytes, path),
    }
}

fn run_options(d: &Design, a: &RunArgs, trace: bool) -> joulepath::solve::RunOptions {
    let mut o = joulepath::solve::RunOptions::for_design(d);
    // `--ambient` holds the ambient at one temperature, in place of a climate.
    if let Some(t) = a.ambient {
        o.ambient_c = t;
        o.climate = None;
    }
    if let Some(h) = a.horizon {
        o.horizon_s = h;
    }
    if a.exact {
        o = joulepath::solve::RunOptions {
            ambient_c: o.ambient_c,
            climate: o.climate,
            horizon_s: o.horizon_s,
            ..joulepath::solve::RunOptions::reference(d)
        };
    }
    o.trace = trace;
    o
}

/// Print the warnings about a design on standard error when the output is JSON or CSV (tables
/// carry them in their text), so that a reader of the file still sees them.
fn warn_beside(d: &Design, ambient_c: f64, f: FormatArg) {
    if !matches!(f, FormatArg::Table) {
        warn(d, ambient_c);
    }
}

/// Print the warnings about a design on standard error.
fn warn(d: &Design, ambient_c: f64) {
    let _ = write_warnings(&mut io::stderr().lock(), &warnings(d, ambient_c), 96);
}

/// The modes `budget` shows: the one named by `--mode`, else every mode of the file.
fn budget_modes(d: &Design, mode: Option<&str>) -> Result<Vec<usize>, Failure> {
    let Some(name) = mode else {
        return Ok(d.file_modes());
    };
    if let Some(m) = d.mode_index(name) {
        return Ok(vec![m]);
    }
    let names: Vec<&str> = d.modes().iter().map(joulepath::model::Mode::name).collect();
    let hint = did_you_mean(name, names.iter().copied()).map_or_else(
        || {
            let quoted: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
            format!("the modes are {}", quoted.join(", "))
        },
        |s| format!("did you mean `{s}`?"),
    );
    Err(Failure::Usage(format!(
        "the design has no mode `{name}` ({hint})"
    )))
}

/// `joulepath cells [NAME]`: every preset, or the one named.
fn cells_command(name: Option<&str>, f: Format, buf: &mut Vec<u8>) -> Result<(), Failure> {
    match name {
        None => {
            let all = Preset::all().map_err(|e| Failure::Input(e.to_string()))?;
            write_cells(buf, &all, f).map_err(io_fail)
        }
        Some(n) => {
            if Preset::text(n).is_none() {
                return Err(Failure::Usage(format!(
                    "unknown cell preset `{n}` ({})",
                    Preset::suggestion(n)
                )));
            }
            let p = Preset::load(n).map_err(|e| Failure::Input(e.to_string()))?;
            write_cell(buf, &p, f).map_err(io_fail)
        }
    }
}

/// `joulepath report`: a design with tolerances gets a spread section; a spread that cannot run
/// is said in its place rather than failing the report.
fn report_with_spread(
    d: &Design,
    ra: &RunArgs,
    soc: Option<f64>,
    spread: &ReportSpread,
) -> Result<Vec<u8>, Failure> {
    let sp = (!d.tolerances().is_empty()).then(|| {
        let (n, t) = (spread.samples as usize, spread.target);
        spread_command(d.clone(), ra, n, spread.seed, t, false).map_err(|e| e.message())
    });
    let sp = sp
        .as_ref()
        .map(|r| r.as_ref().map(|x| &x.1).map_err(String::as_str));
    report_command(d, &run_options(d, ra, true), soc, sp)
}

/// Run the command line: each command has its own function.
pub fn run(args: &Args) -> Result<(), Failure> {
    match &args.command {
        Command::Check(a) => check_command(&a.file),
        Command::Budget(a) => budget_command(a),
        Command::Runtime(a) => runtime_command(a),
        Command::Heat(a) => heat_command(a),
        Command::Spread(a) => spread_file_command(a),
        Command::Cells(a) => {
            let mut buf = Vec::new();
            cells_command(a.name.as_deref(), format(a.format), &mut buf)?;
            emit(&buf, a.output.as_deref())
        }
        Command::Compare(a) => {
            check_groups(&a.groups).map_err(Failure::Usage)?;
            compare(
                &a.groups,
                &a.run,
                a.plot.as_deref(),
                a.format,
                a.output.as_deref(),
            )
        }
        Command::FitCell(a) => super::fit_cell::fit_cell_command(a),
        Command::Capture(a) => {
            let mut buf = Vec::new();
            super::capture::capture_command(a, &mut buf)?;
            emit(&buf, a.output.as_deref())
        }
        Command::Plot(a) => plot_file_command(a),
        Command::Report(a) => {
            let d = load_with(&a.file, &a.sets)?;
            let bytes = report_with_spread(&d, &a.run, a.soc, &a.spread)?;
            emit(&bytes, Some(&a.output))
        }
        Command::Size(a) => super::size::size_command(a),
        Command::Schema(a) => emit(
            joulepath::spec::design_schema().as_bytes(),
            a.output.as_deref(),
        ),
    }
}

/// The error of a write into the output buffer.
#[allow(clippy::needless_pass_by_value)] // `map_err` hands the error over by value.
pub(super) fn io_fail(e: io::Error) -> Failure {
    Failure::Input(format!("cannot write the output: {e}"))
}

/// `joulepath check FILE`: the design's outline and its warnings.
fn check_command(file: &Path) -> Result<(), Failure> {
    let d = load(file)?;
    let mut buf = Vec::new();
    write_outline(&mut buf, &d).map_err(io_fail)?;
    write_warnings(&mut buf, &warnings(&d, d.ambient_c()), 96).map_err(io_fail)?;
    emit(&buf, None)
}

/// `joulepath budget`: the operating point of the modes asked for, at `--soc` (default: the
/// pack's start).
fn budget_command(a: &BudgetArgs) -> Result<(), Failure> {
    let d = &load_with(&a.file, &a.sets)?;
    let modes = budget_modes(d, a.mode.as_deref())?;
    let soc = a.soc.unwrap_or(d.pack().start_soc());
    let result = budget(d, soc, &modes);
    let mut buf = Vec::new();
    write_budget(&mut buf, d, soc, &result, format(a.format)).map_err(io_fail)?;
    warn_beside(d, d.ambient_c(), a.format);
    emit(&buf, a.output.as_deref())
}

/// `joulepath runtime`: one run of the design, with its time series under `--trace`.
fn runtime_command(a: &RuntimeArgs) -> Result<(), Failure> {
    let d = &load_with(&a.file, &a.sets)?;
    let result = run_with_progress(d, &run_options(d, &a.run, a.trace), "simulating")?;
    let mut buf = Vec::new();
    write_runtime(&mut buf, d, &result, format(a.format), a.trace).map_err(io_fail)?;
    warn_beside(d, result.ambient_c, a.format);
    emit(&buf, a.output.as_deref())
}

/// `joulepath heat`: one run of the design, its heat per stage.
fn heat_command(a: &HeatArgs) -> Result<(), Failure> {
    let d = &load_with(&a.file, &a.sets)?;
    let result = run_with_progress(d, &run_options(d, &a.run, false), "simulating")?;
    let mut buf = Vec::new();
    write_heat(&mut buf, d, &result, format(a.format)).map_err(io_fail)?;
    warn_beside(d, result.ambient_c, a.format);
    emit(&buf, a.output.as_deref())
}

/// `joulepath spread`: the pictures' files are checked before the design is read and run.
fn spread_file_command(a: &SpreadArgs) -> Result<(), Failure> {
    let to_draw = spread_pictures(&a.pictures)?;
    let d = load_with(&a.file, &a.sets)?;
    let sp = spread_command(d, &a.run, a.samples as usize, a.seed, a.target, a.corners)?;
    write_spread_outputs(&sp, &to_draw, a.format, a.output.as_deref())
}

/// `joulepath plot`: one run of the design with its trace, drawn to `-o`.
fn plot_file_command(a: &PlotArgs) -> Result<(), Failure> {
    let d = load_with(&a.file, &a.sets)?;
    let opt = run_options(&d, &a.run, true);
    warn(&d, opt.ambient_c);
    let bytes = plot_command(&d, &opt, a.kind, &a.output, (a.width, a.height))?;
    emit(&bytes, Some(&a.output))
}

/// Write a finished spread: its table (or JSON, CSV) and the pictures asked for.
fn write_spread_outputs(
    sp: &(Design, joulepath::spread::Spread),
    to_draw: &[(PathBuf, PlotFormat, SpreadPicture)],
    f: FormatArg,
    output: Option<&Path>,
) -> Result<(), Failure> {
    let mut buf = Vec::new();
    write_spread(&mut buf, &sp.0, &sp.1, format(f)).map_err(io_fail)?;
    warn_beside(&sp.0, sp.0.ambient_c(), f);
    for (path, bytes) in draw_spread(&sp.0, &sp.1, to_draw)? {
        emit(&bytes, Some(&path))?;
    }
    emit(&buf, output)
}

/// The spread of a design: `--ambient` moves the design's own ambient (each unit runs at its
/// own when the ambient varies).
fn spread_command(
    mut d: Design,
    ra: &RunArgs,
    samples: usize,
    seed: u64,
    target: Option<f64>,
    corners: bool,
) -> Result<(Design, joulepath::spread::Spread), Failure> {
    if let Some(t) = ra.ambient {
        if d.tolerances()
            .iter()
            .any(|t| *t.knob() == joulepath::model::Knob::Ambient)
        {
            return Err(Failure::Usage(
                "the ambient varies in the design's `tolerances:`, so `--ambient` cannot fix it; move its centre with `--set ambient=...` instead".into(),
            ));
        }
        d.set_ambient(t).map_err(|r| {
            Failure::Usage(format!(
                "--ambient must lie between {} and {} °C",
                r.lo(),
                r.hi()
            ))
        })?;
    }
    let opts = joulepath::spread::SpreadOptions {
        samples,
        seed,
        target_s: target,
        corners,
        run: run_options(&d, ra, false),
    };
    let sp = spread_with_progress(&d, &opts)?;
    Ok((d, sp))
}

fn compare(
    groups: &[Group],
    ra: &RunArgs,
    plot: Option<&Path>,
    f: FormatArg,
    output: Option<&Path>,
) -> Result<(), Failure> {
    let mut designs = Vec::new();
    for g in groups {
        let d = load_with(&g.file, &g.sets)?;
        let mut label = g.file.display().to_string();
        for s in &g.sets {
            let _ = write!(label, " --set {s}");
        }
        designs.push((label, d));
    }
    let n = designs.len();
    let runs: Vec<joulepath::solve::RunResult> = designs
        .iter()
        .enumerate()
        .map(|(i, (_, d))| {
            run_with_progress(
                d,
                &run_options(d, ra, plot.is_some()),
                &format!("design {}/{n}", i + 1),
            )
        })
        .collect::<Result<_, _>>()?;
    let entries: Vec<Entry<'_>> = designs
        .iter()
        .zip(&runs)
        .map(|((label, d), r)| Entry {
            label: label.clone(),
            design: d,
            run: r,
        })
        .collect();
    if let Some(path) = plot {
        // The picture names designs by title (which carries any overrides), and by file as
        // given when titles repeat.
        let files: Vec<String> = groups
            .iter()
            .map(|g| g.file.display().to_string())
            .collect();
        let curves: Vec<(&str, &Design, &joulepath::solve::RunResult)> = entries
            .iter()
            .zip(&files)
            .map(|(e, f)| (f.as_str(), e.design, e.run))
            .collect();
        let bytes = compare_plot(&curves, path)?;
        emit(&bytes, Some(path))?;
    }
    let mut buf = Vec::new();
    write_compare(&mut buf, &entries, format(f))
        .map_err(|e| Failure::Input(format!("cannot write the output: {e}")))?;
    for e in &entries {
        warn_beside(e.design, e.run.ambient_c, f);
    }
    emit(&buf, output)
}
