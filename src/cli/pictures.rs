//! The picture commands (`plot`, `report`, `compare --plot`) and the progress bar of long runs.

use std::cell::Cell;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use joulepath::Design;
use joulepath::report::plot::{self, PlotFormat, plot_format};
use joulepath::solve::{RunOptions, RunResult, budget, run_observed};

use super::args::{PlotKind, SpreadPictures};
use super::run::Failure;

/// Run a discharge, with a progress bar on standard error when it is a terminal and the run
/// takes a while (nothing at all otherwise). A run that cannot give a result (values beyond
/// what the models compute with, or too much work) is an input failure (exit 1).
pub fn run_with_progress(d: &Design, opt: &RunOptions, what: &str) -> Result<RunResult, Failure> {
    let fail = |e: joulepath::solve::RunError| Failure::Input(format!("`{}`: {e}", d.title()));
    if !std::io::stderr().is_terminal() {
        return joulepath::solve::run(d, opt).map_err(fail);
    }
    let start = Instant::now();
    let last = Cell::new(start);
    let shown = Cell::new(false);
    let report = |share: f64| {
        let now = Instant::now();
        if now - start < Duration::from_millis(300) || now - last.get() < Duration::from_millis(100)
        {
            return;
        }
        last.set(now);
        shown.set(true);
        let width = 30;
        let filled = ((share * width as f64) as usize).min(width);
        let mut err = std::io::stderr().lock();
        let _ = write!(
            err,
            "\r{what} [{}{}] {:>3.0} %",
            "#".repeat(filled),
            ".".repeat(width - filled),
            100.0 * share
        );
        let _ = err.flush();
    };
    let r = run_observed(d, opt, Some(&report));
    if shown.get() {
        let _ = write!(
            std::io::stderr().lock(),
            "\r{}\r",
            " ".repeat(what.chars().count() + 40)
        );
    }
    r.map_err(fail)
}

/// A spread, with a progress bar of the units simulated on a terminal.
pub fn spread_with_progress(
    d: &Design,
    opts: &joulepath::spread::SpreadOptions,
) -> Result<joulepath::spread::Spread, Failure> {
    let fail = |e: joulepath::spread::SpreadError| match e {
        joulepath::spread::SpreadError::NoTolerances => {
            Failure::Usage(format!("`{}`: {e}", d.title()))
        }
        _ => Failure::Input(format!("`{}`: {e}", d.title())),
    };
    if !std::io::stderr().is_terminal() {
        return joulepath::spread::spread(d, opts).map_err(fail);
    }
    let start = Instant::now();
    let last = std::sync::Mutex::new(start);
    let shown = std::sync::atomic::AtomicBool::new(false);
    let total = opts.samples;
    let report = |done: usize| {
        let now = Instant::now();
        let Ok(mut l) = last.try_lock() else { return };
        if now - start < Duration::from_millis(300) || now - *l < Duration::from_millis(100) {
            return;
        }
        *l = now;
        shown.store(true, std::sync::atomic::Ordering::Relaxed);
        let width = 30;
        let share = done as f64 / total as f64;
        let filled = ((share * width as f64) as usize).min(width);
        let mut err = std::io::stderr().lock();
        let _ = write!(
            err,
            "\runits [{}{}] {done}/{total}",
            "#".repeat(filled),
            ".".repeat(width - filled),
        );
        let _ = err.flush();
    };
    let r = joulepath::spread::spread_observed(d, opts, &report);
    if shown.load(std::sync::atomic::Ordering::Relaxed) {
        let _ = write!(std::io::stderr().lock(), "\r{}\r", " ".repeat(60));
    }
    r.map_err(fail)
}

pub(super) fn format_of(path: &Path) -> Result<PlotFormat, Failure> {
    plot_format(path).ok_or_else(|| {
        Failure::Usage(format!(
            "cannot tell the picture format of `{}`: name it `.svg` or `.png`",
            path.display()
        ))
    })
}

fn plot_fail(e: &plot::PlotError) -> Failure {
    Failure::Input(format!("cannot draw the picture: {e}"))
}

/// `plot FILE --kind ... -o OUT`.
pub fn plot_command(
    d: &Design,
    opt: &RunOptions,
    kind: PlotKind,
    output: &Path,
    size: (u32, u32),
) -> Result<Vec<u8>, Failure> {
    let fmt = format_of(output)?;
    let mut o = opt.clone();
    o.trace = true;
    let r = run_with_progress(d, &o, "simulating")?;
    match kind {
        PlotKind::Discharge => plot::discharge(d, &r, fmt, size),
        PlotKind::Losses => plot::losses(d, &r, fmt, size),
        PlotKind::Efficiency => {
            let modes: Vec<usize> = d.file_modes();
            let b = budget(d, d.pack().start_soc(), &modes);
            plot::efficiency(d, &b, Some(&r), fmt, size)
        }
    }
    .map_err(|e| plot_fail(&e))
}

/// Which spread picture to draw.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpreadPicture {
    /// The histogram of the runtimes.
    Histogram,
    /// The tornado chart of the swings.
    Tornado,
}

/// The spread pictures asked for, each with its file and format; a file whose extension names
/// no picture format is a usage error, found before anything runs.
pub fn spread_pictures(
    p: &SpreadPictures,
) -> Result<Vec<(PathBuf, PlotFormat, SpreadPicture)>, Failure> {
    [
        (&p.histogram, SpreadPicture::Histogram),
        (&p.tornado, SpreadPicture::Tornado),
    ]
    .into_iter()
    .filter_map(|(path, kind)| path.as_ref().map(|path| (path, kind)))
    .map(|(path, kind)| Ok((path.clone(), format_of(path)?, kind)))
    .collect()
}

/// Draw the spread pictures `asked` (from [`spread_pictures`]): each file with its bytes.
pub fn draw_spread(
    d: &Design,
    sp: &joulepath::spread::Spread,
    asked: &[(PathBuf, PlotFormat, SpreadPicture)],
) -> Result<Vec<(PathBuf, Vec<u8>)>, Failure> {
    asked
        .iter()
        .map(|(path, fmt, kind)| {
            let bytes = match kind {
                SpreadPicture::Histogram => plot::spread_histogram(d, sp, *fmt, (1200, 800)),
                SpreadPicture::Tornado => plot::spread_tornado(d, sp, *fmt, (1200, 800)),
            }
            .map_err(|e| plot_fail(&e))?;
            Ok((path.clone(), bytes))
        })
        .collect()
}

/// `report FILE -o OUT.html`; `spread` is the spread of a design with tolerances (or why it
/// could not run), `None` for a design without.
pub fn report_command(
    d: &Design,
    opt: &RunOptions,
    soc: Option<f64>,
    spread: Option<Result<&joulepath::spread::Spread, &str>>,
) -> Result<Vec<u8>, Failure> {
    let mut o = opt.clone();
    o.trace = true;
    let r = run_with_progress(d, &o, "simulating")?;
    let soc = soc.unwrap_or(d.pack().start_soc());
    let modes: Vec<usize> = d.file_modes();
    let b = budget(d, soc, &modes);
    let mut buf = Vec::new();
    joulepath::report::html::write_html_with_spread(&mut buf, d, &b, soc, &r, spread)
        .map_err(|e| Failure::Input(format!("cannot write the report: {e}")))?;
    Ok(buf)
}

/// The discharge curves of compared designs on one chart.
pub fn compare_plot(
    entries: &[(&str, &Design, &RunResult)],
    output: &Path,
) -> Result<Vec<u8>, Failure> {
    let fmt = format_of(output)?;
    plot::compare_discharge(entries, fmt, (1200, 800)).map_err(|e| plot_fail(&e))
}
