//! Pictures of a spread: a histogram of the runtimes the simulated units reached (stacked by why
//! each unit stops, with the 5th, 50th and 95th percentiles and the target marked) and a tornado
//! chart of the swings (each varied value at its low and high bound, the rest as designed).

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::discharge::{Chart, Px, header, overlaps, tick};
use super::style::{
    BLUE, Dash, GREEN, GREY, INK, MESH_BOLD, ORANGE, PURPLE, SKY, Shape, Swatch, TimeUnit, Type,
    VERMILLION, YELLOW, label, legend, marker, pixel_line, px, text, text_width,
};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::model::Design;
use crate::report::spread::fmt_value;
use crate::solve::EndReason;
use crate::spread::{Spread, percentile};
use crate::units::{fmt_percent, fmt_sig};

/// Seconds in a year of 365.25 days, as durations are written elsewhere.
const YEAR_S: f64 = 365.25 * 86_400.0;

/// Fewest and most bins of the histogram (fewer says nothing of the shape; more are too thin
/// to read at the sizes pictures are drawn).
const BINS: (usize, usize) = (4, 60);

/// The runtime unit for values up to `hi_s`: hours up to three days, days up to two years,
/// years beyond (minutes and seconds for short runs).
fn runtime_unit(hi_s: f64) -> TimeUnit {
    if hi_s < 2.0 * YEAR_S {
        TimeUnit::for_span(hi_s)
    } else {
        TimeUnit {
            seconds: YEAR_S,
            symbol: "y",
        }
    }
}

/// A runtime in `unit`, three significant digits.
fn in_unit(s: f64, unit: TimeUnit) -> String {
    format!("{} {}", fmt_sig(s / unit.seconds, 3), unit.symbol)
}

/// A round step at most `x`: 1, 2, 2.5 or 5 times a power of ten.
fn round_step_down(x: f64) -> f64 {
    if !(x > 0.0 && x.is_finite()) {
        return 1.0;
    }
    let mag = 10f64.powf(x.log10().floor());
    // A width a thousandth short of a step is that step.
    for m in [5.0, 2.5, 2.0, 1.0] {
        if m * mag <= x * (1.0 + 1e-3) {
            return m * mag;
        }
    }
    mag
}

/// A round step at least `x`: 1, 2, 2.5 or 5 times a power of ten.
fn round_step(x: f64) -> f64 {
    if !(x > 0.0 && x.is_finite()) {
        return 1.0;
    }
    let mag = 10f64.powf(x.log10().floor());
    for m in [1.0, 2.0, 2.5, 5.0, 10.0] {
        if m * mag >= x * (1.0 - 1e-9) {
            return m * mag;
        }
    }
    10.0 * mag
}

/// Bin edges for `sorted` values (ascending, finite, not empty): the first edge and the width.
///
/// The width follows the Freedman–Diaconis rule, 2 IQR / n^(1/3) (Freedman, D. and Diaconis,
/// P., "On the histogram as a density estimator: L2 theory", Zeitschrift für
/// Wahrscheinlichkeitstheorie 57, 1981), or Sturges' rule, log2(n) + 1 bins over the range
/// (Sturges, H. A., "The choice of a class interval", JASA 21, 1926), whichever gives the
/// narrower bins: Freedman–Diaconis alone draws a few wide bins for a spread of several peaks
/// (a wide interquartile range) at a few hundred samples. Taking the narrower of the two is
/// what NumPy's `histogram_bin_edges(bins="auto")` does (from memory). A zero interquartile
/// range leaves Sturges alone. The width is then rounded
/// down to a round step and the edges put on its multiples, and the count kept within [`BINS`].
pub(crate) fn bins(sorted: &[f64]) -> (f64, f64, usize) {
    let n = sorted.len().max(1) as f64;
    let (lo, hi) = (sorted[0], sorted[sorted.len() - 1]);
    let range = hi - lo;
    if range <= 0.0 {
        // All alike: one bin of a round width centred on the value.
        let w = round_step((lo.abs() * 0.02).max(1e-9));
        return (lo - w / 2.0, w, 1);
    }
    let iqr = percentile(sorted, 75.0) - percentile(sorted, 25.0);
    let sturges = range / (n.log2().floor() + 1.0);
    let raw = if iqr > 0.0 {
        (2.0 * iqr / n.cbrt()).min(sturges)
    } else {
        sturges
    };
    // Rounded down, so there are at least as many bins as the rule asks, but not above the
    // most.
    let mut w = round_step_down(raw);
    if range / w > BINS.1 as f64 - 1.0 {
        w = round_step(range / (BINS.1 as f64 - 1.0));
    }
    // Fewer than the least: narrower round steps until there are enough.
    while range / w < BINS.0 as f64 - 1.0 && sorted.len() >= 2 * BINS.0 {
        w = round_step(w * 0.45);
    }
    let first = (lo / w).floor() * w;
    let count = (((hi - first) / w).floor() as usize + 1).max(1);
    (first, w, count)
}

/// The fill of an end reason: the same colour in every picture.
fn end_fill(e: EndReason) -> RGBColor {
    match e {
        EndReason::Cutoff => BLUE,
        EndReason::Empty => GREEN,
        EndReason::Undervoltage => PURPLE,
        EndReason::Rail => ORANGE,
        EndReason::Collapse => YELLOW,
        EndReason::Horizon => SKY,
    }
}

/// A short phrase for an end reason in a legend.
fn end_phrase(e: EndReason) -> &'static str {
    match e {
        EndReason::Cutoff => "stop at the cutoff",
        EndReason::Empty => "run empty",
        EndReason::Undervoltage => "stop: a stage's input too low",
        EndReason::Rail => "stop: a load's supply too low",
        EndReason::Collapse => "stop: the pack cannot give the power",
        EndReason::Horizon => "still running at the horizon",
    }
}

/// The histogram of the runtimes the units of `spread` reached: bins by the Freedman–Diaconis
/// rule, stacked by end reason, with the 5th, 50th and 95th percentiles, the target and the
/// share reaching it, and the design as written marked; runs that gave no runtime are counted
/// in the caption.
///
/// # Errors
///
/// [`PlotError::Nothing`] when no unit gave a runtime; [`PlotError::Size`] for a size out of
/// range.
pub fn spread_histogram(
    design: &Design,
    spread: &Spread,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    let mut units: Vec<(f64, EndReason)> = spread
        .samples
        .iter()
        .filter_map(|o| match (&o.runtime, o.end) {
            (Ok(t), Some(e)) if t.is_finite() => Some((*t, e)),
            _ => None,
        })
        .collect();
    if units.is_empty() {
        return Err(PlotError::Nothing(format!(
            "none of the {} simulated units gave a runtime: no histogram to draw",
            spread.samples.len()
        )));
    }
    units.sort_by(|a, b| a.0.total_cmp(&b.0));
    render(
        &Histogram {
            design,
            spread,
            units,
        },
        format,
        size,
    )
}

struct Histogram<'a> {
    design: &'a Design,
    spread: &'a Spread,
    /// Runtime and end reason of every unit that gave one, shortest first.
    units: Vec<(f64, EndReason)>,
}

/// A vertical line through the chart with its words above it.
struct Mark {
    at_s: f64,
    words: String,
    colour: RGBColor,
    dash: Dash,
}

/// The units in each bin `(first, width, count)` of `values` (runtimes in the axis' unit), by
/// end reason in the order of `reasons`.
fn bin_counts(
    values: &[f64],
    units: &[(f64, EndReason)],
    reasons: &[EndReason],
    (first, width, count): (f64, f64, usize),
) -> Vec<Vec<usize>> {
    let mut counts = vec![vec![0usize; reasons.len()]; count];
    for (v, (_, e)) in values.iter().zip(units.iter()) {
        let b = (((v - first) / width).floor().max(0.0) as usize).min(count - 1);
        if let Some(k) = reasons.iter().position(|r| r == e) {
            counts[b][k] += 1;
        }
    }
    counts
}

/// The histogram's legend: each end reason with its count and share, the percentile lines, and
/// the target and the design as written when they are drawn.
fn histogram_keys(sp: &Spread, target: bool, nominal: bool) -> Vec<(Swatch, String)> {
    let n = sp.samples.len();
    let mut keys: Vec<(Swatch, String)> = sp
        .ends
        .iter()
        .map(|(e, c)| {
            (
                Swatch::Block(end_fill(*e), 0.85),
                format!(
                    "{}: {c} ({})",
                    end_phrase(*e),
                    fmt_percent(*c as f64 / n as f64)
                ),
            )
        })
        .collect();
    keys.push((
        Swatch::Line(INK, 2, Dash::Medium),
        "5th, 50th, 95th percentile".into(),
    ));
    if target {
        keys.push((Swatch::Line(VERMILLION, 2, Dash::Solid), "target".into()));
    }
    if nominal {
        keys.push((
            Swatch::Mark(Shape::Diamond, INK, true),
            "as designed".into(),
        ));
    }
    keys
}

/// The vertical lines over the histogram: the 5th, 50th and 95th percentiles and the target.
fn percentile_marks(sp: &Spread, unit: TimeUnit) -> Vec<Mark> {
    let s = &sp.summary;
    let mut marks = vec![
        Mark {
            at_s: s.p5,
            words: format!("P5 {}", in_unit(s.p5, unit)),
            colour: INK,
            dash: Dash::Medium,
        },
        Mark {
            at_s: s.p50,
            words: format!("P50 {}", in_unit(s.p50, unit)),
            colour: INK,
            dash: Dash::Long,
        },
        Mark {
            at_s: s.p95,
            words: format!("P95 {}", in_unit(s.p95, unit)),
            colour: INK,
            dash: Dash::Medium,
        },
    ];
    if let Some(r) = sp.reach {
        marks.push(Mark {
            at_s: r.target_s,
            words: format!(
                "target {}: {} reach it",
                in_unit(r.target_s, unit),
                fmt_percent(r.share)
            ),
            colour: VERMILLION,
            dash: Dash::Solid,
        });
    }
    marks
}

impl Painter for Histogram<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (sp, units) = (self.spread, &self.units);
        let w = root.dim_in_pixel().0;
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let nominal = sp.nominal.runtime.as_ref().ok().copied();
        let target = sp.reach;

        let mut hi_s = units[units.len() - 1].0;
        let mut lo_s = units[0].0;
        for x in [target.map(|r| r.target_s), nominal].into_iter().flatten() {
            hi_s = hi_s.max(x);
            lo_s = lo_s.min(x);
        }
        let unit = runtime_unit(hi_s);
        let values: Vec<f64> = units.iter().map(|u| u.0 / unit.seconds).collect();
        let (first, width, count) = bins(&values);

        // Which reasons occur, most common first (the spread's order), and the count of each
        // reason in each bin.
        let reasons: Vec<EndReason> = sp.ends.iter().map(|e| e.0).collect();
        let counts = bin_counts(&values, units, &reasons, (first, width, count));
        let tallest = counts
            .iter()
            .map(|c| c.iter().sum::<usize>())
            .max()
            .unwrap_or(1)
            .max(1);

        let y = self.caption(root, unit, ty, pad)?;
        let marks = percentile_marks(sp, unit);
        // The runtime axis: the bins, the target and the design as written, a bin of room on
        // either side, never below zero.
        let x_lo = (first.min(lo_s / unit.seconds) - width).max(0.0);
        let x_hi = (first + width * count as f64).max(hi_s / unit.seconds) + width;
        let y_hi = tallest as f64 * 1.08;
        let y_area = (ty.body * 3.6) as u32;
        let x_area = (ty.body * 3.4) as u32;
        let body = root.margin(y, pad / 2, pad / 2, pad);
        let chart = |area: &Canvas<DB>| {
            ChartBuilder::on(area)
                .margin_top(4)
                .margin_right(pad)
                .x_label_area_size(x_area)
                .y_label_area_size(y_area)
                .build_cartesian_2d(x_lo..x_hi, 0.0..y_hi)
        };
        // The marks' words go in rows above the chart, each in the first row where it overlaps
        // no other; the chart takes the rest. Building a chart draws nothing, so a first one
        // on the whole body gives the marks' places across (the same in the final one).
        let probe = chart(&body)?;
        let row_h = (ty.body * 1.6) as i32;
        let (rows, slot) = place_marks(root, &probe, &marks, unit, ty, pad);
        let strip = px_len(rows) * row_h + 4;
        let area = body.margin(strip, 0, 0, 0);
        let mut ch = chart(&area)?;
        draw_mesh(&mut ch, unit, ty)?;
        draw_bars(&ch, &counts, &reasons, first, width)?;
        if let Some(t) = nominal {
            let at = ch.backend_coord(&(t / unit.seconds, 0.0));
            marker(root, at, Shape::Diamond, (ty.body * 0.45) as i32, INK, true)?;
        }
        let lines = MarkLines {
            top: ch.backend_coord(&(x_lo, y_hi)).1,
            bottom: ch.backend_coord(&(x_lo, 0.0)).1,
            strip_top: y + 2,
            row_h,
        };
        let across: Vec<i32> = marks
            .iter()
            .map(|m| ch.backend_coord(&(m.at_s / unit.seconds, 0.0)).0)
            .collect();
        draw_marks(root, &marks, &across, &slot, &lines, ty)
    }
}

impl Histogram<'_> {
    /// Title, the sentences on the percentiles and the failed runs, and the legend; returns the
    /// y below them.
    fn caption<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        unit: TimeUnit,
        ty: Type,
        pad: i32,
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let sp = self.spread;
        let n = sp.samples.len();
        let s = &sp.summary;
        let mut lines = vec![format!(
            "{n} simulated units (seed {}): half run longer than {}, and 90 % between {} and {}.",
            sp.options.seed,
            in_unit(s.p50, unit),
            in_unit(s.p5, unit),
            in_unit(s.p95, unit)
        )];
        lines.push(if sp.failed == 0 {
            "Every simulated unit gave a runtime.".into()
        } else {
            format!(
                "{} of the {n} runs gave no runtime (the simulation failed) and are not drawn.",
                sp.failed
            )
        });
        let mut y = header(
            root,
            &format!("Runtime across units: {}", self.design.title),
            &lines,
            ty,
            pad,
        )?;
        let nominal = sp.nominal.runtime.is_ok();
        let keys = histogram_keys(sp, sp.reach.is_some(), nominal);
        let w = root.dim_in_pixel().0;
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        Ok(y)
    }
}

/// The row of words each mark goes in above the chart (the first where it overlaps no other)
/// and its centre across, kept inside the canvas; and the number of rows.
fn place_marks<DB: DrawingBackend>(
    root: &Canvas<DB>,
    probe: &Chart<'_, DB>,
    marks: &[Mark],
    unit: TimeUnit,
    ty: Type,
    pad: i32,
) -> (usize, Vec<(usize, i32)>) {
    let row_h = (ty.body * 1.6) as i32;
    let right_edge = px(root.dim_in_pixel().0) - pad / 2;
    let mut rows: Vec<Vec<Px>> = Vec::new();
    let mut order: Vec<usize> = (0..marks.len()).collect();
    order.sort_by(|&a, &b| marks[a].at_s.total_cmp(&marks[b].at_s));
    let mut slot = vec![(0usize, 0i32); marks.len()];
    for &k in &order {
        let x = probe.backend_coord(&(marks[k].at_s / unit.seconds, 0.0)).0;
        let tw = text_width(root, &marks[k].words, ty.body);
        // Kept inside the canvas: the centre moves in from an edge.
        let cx = x.clamp(pad / 2 + tw / 2, right_edge - tw / 2);
        let rect: Px = ((cx - tw / 2 - 4, 0), (cx + tw / 2 + 4, row_h));
        let row = rows
            .iter()
            .position(|r| r.iter().all(|b| !overlaps(*b, rect)))
            .unwrap_or_else(|| {
                rows.push(Vec::new());
                rows.len() - 1
            });
        rows[row].push(rect);
        slot[k] = (row, cx);
    }
    (rows.len(), slot)
}

/// The histogram's grid and axes: runtime in `unit` across, whole numbers of units up.
fn draw_mesh<DB: DrawingBackend>(
    ch: &mut Chart<'_, DB>,
    unit: TimeUnit,
    ty: Type,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    ch.configure_mesh()
        .light_line_style(WHITE)
        .bold_line_style(MESH_BOLD)
        .x_desc(format!("runtime ({})", unit.symbol))
        .y_desc("simulated units")
        .axis_desc_style(("sans-serif", ty.axis))
        .label_style(("sans-serif", ty.body))
        .x_label_formatter(&|x| tick(*x))
        .y_label_formatter(&|v| {
            if (v - v.round()).abs() < 1e-9 {
                format!("{v:.0}")
            } else {
                String::new()
            }
        })
        .draw()?;
    Ok(())
}

/// The bars: each bin's units stacked by end reason, the most common reason at the bottom.
fn draw_bars<DB: DrawingBackend>(
    ch: &Chart<'_, DB>,
    counts: &[Vec<usize>],
    reasons: &[EndReason],
    first: f64,
    width: f64,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    for (b, c) in counts.iter().enumerate() {
        let x0 = first + width * b as f64;
        let mut base = 0usize;
        for (k, &m) in c.iter().enumerate() {
            if m == 0 {
                continue;
            }
            let (y0, y1) = (base as f64, (base + m) as f64);
            ch.plotting_area().draw(&Rectangle::new(
                [(x0, y0), (x0 + width, y1)],
                end_fill(reasons[k]).mix(0.85).filled(),
            ))?;
            ch.plotting_area().draw(&Rectangle::new(
                [(x0, y0), (x0 + width, y1)],
                WHITE.stroke_width(1),
            ))?;
            base += m;
        }
    }
    Ok(())
}

/// Where the marks' lines and words go, px: the chart's top and bottom, the top of the strip of
/// words above it and the height of a row of words.
struct MarkLines {
    top: i32,
    bottom: i32,
    strip_top: i32,
    row_h: i32,
}

/// The marks: each line (at `across[k]`, px) and its lead first, then the words on white over
/// any lead they cross, in the row and centre of `slot`.
fn draw_marks<DB: DrawingBackend>(
    root: &Canvas<DB>,
    marks: &[Mark],
    across: &[i32],
    slot: &[(usize, i32)],
    p: &MarkLines,
    ty: Type,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let row_h = p.row_h;
    for (k, m) in marks.iter().enumerate() {
        let row = slot[k].0;
        let x = across[k];
        let ly = p.strip_top + px_len(row) * row_h + row_h / 2;
        pixel_line(
            root,
            vec![(x, ly + row_h / 2 - 2), (x, p.top)],
            GREY,
            1,
            Dash::Solid,
        )?;
        pixel_line(root, vec![(x, p.top), (x, p.bottom)], m.colour, 2, m.dash)?;
    }
    for (k, m) in marks.iter().enumerate() {
        let (row, cx) = slot[k];
        let ly = p.strip_top + px_len(row) * row_h + row_h / 2;
        let tw = text_width(root, &m.words, ty.body);
        root.draw(&Rectangle::new(
            [
                (cx - tw / 2 - 3, ly - row_h / 2 + 2),
                (cx + tw / 2 + 3, ly + row_h / 2 - 2),
            ],
            WHITE.filled(),
        ))?;
        label(
            root,
            &m.words,
            (cx, ly),
            &text(ty.body, m.colour, HPos::Center, VPos::Center),
        )?;
    }
    Ok(())
}

/// A count of rows as pixels' multiplier.
fn px_len(n: usize) -> i32 {
    i32::try_from(n).unwrap_or(i32::MAX)
}

/// The tornado chart of `spread`'s swings: one bar per varied value, largest swing on top, from
/// the runtime with the value at its low bound to that at its high bound (the rest as designed),
/// around the runtime as designed; the part toward the low bound's runtime in one colour, toward
/// the high bound's in another; a bound whose run failed is named as such.
///
/// # Errors
///
/// [`PlotError::Size`] for a size out of range; [`PlotError::Nothing`] when the spread has no
/// swings or no runtime as designed.
pub fn spread_tornado(
    design: &Design,
    spread: &Spread,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    let Ok(nominal) = spread.nominal.runtime.as_ref().map(|t| *t) else {
        return Err(PlotError::Nothing(
            "the design as written gives no runtime: no swings to draw".into(),
        ));
    };
    if spread.swings.is_empty() {
        return Err(PlotError::Nothing(
            "nothing varies: no swings to draw".into(),
        ));
    }
    render(
        &Tornado {
            design,
            spread,
            nominal,
        },
        format,
        size,
    )
}

struct Tornado<'a> {
    design: &'a Design,
    spread: &'a Spread,
    /// Runtime as designed, s.
    nominal: f64,
}

/// Whether both bounds gave a runtime.
fn failed_none(lo: Option<f64>, hi: Option<f64>) -> bool {
    lo.is_some() && hi.is_some()
}

/// Colour of the part of a bar toward the low bound's runtime.
const LOW: RGBColor = BLUE;
/// Colour of the part toward the high bound's runtime.
const HIGH: RGBColor = ORANGE;

impl Painter for Tornado<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (sp, nom) = (self.spread, self.nominal);
        let w = root.dim_in_pixel().0;
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let n = sp.swings.len();
        let ends: Vec<(Option<f64>, Option<f64>)> = sp
            .swings
            .iter()
            .map(|x| {
                (
                    x.at.0.runtime.as_ref().ok().copied(),
                    x.at.1.runtime.as_ref().ok().copied(),
                )
            })
            .collect();
        let all = ends
            .iter()
            .flat_map(|(a, b)| [*a, *b])
            .flatten()
            .chain(std::iter::once(nom));
        let (lo_s, hi_s) = all.fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), t| {
            (l.min(t), h.max(t))
        });
        let unit = runtime_unit(hi_s);
        let span = (hi_s - lo_s).max(nom * 0.1).max(1.0) / unit.seconds;
        let x_lo = (lo_s / unit.seconds - 0.07 * span).max(0.0);
        let x_hi = hi_s / unit.seconds + 0.07 * span;

        let y = self.caption(root, unit, ty, pad, &ends)?;
        let names = self.row_names();
        let small = ty.scaled(0.9);
        let name_w = names
            .iter()
            .map(|(a, b)| text_width(root, a, ty.body).max(text_width(root, b, small)))
            .max()
            .unwrap_or(0)
            + (ty.body * 1.0) as i32;
        let area = root.margin(y + 4, pad / 2, pad / 2, pad);
        let mut ch = ChartBuilder::on(&area)
            .margin_right(pad)
            .x_label_area_size((ty.body * 3.4) as u32)
            .y_label_area_size(name_w.max(40) as u32)
            .build_cartesian_2d(x_lo..x_hi, 0.0..n as f64)?;
        ch.configure_mesh()
            .disable_y_mesh()
            .y_labels(0)
            .light_line_style(WHITE)
            .bold_line_style(MESH_BOLD)
            .x_desc(format!("runtime ({})", unit.symbol))
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .x_label_formatter(&|x| tick(*x))
            .draw()?;
        let row_px = f64::from(ch.plotting_area().dim_in_pixel().1) / n as f64;
        let rows = Rows {
            // Two lines of words beside a bar when the row has room for them, one otherwise.
            two_lines: row_px >= 2.7 * ty.body,
            half: (1.3 * ty.body / row_px).min(0.3),
            nom_u: nom / unit.seconds,
            unit_s: unit.seconds,
            x_lo,
            ty,
        };
        for (rank, &(lo, hi)) in ends.iter().enumerate() {
            let row = (n - 1 - rank) as f64 + 0.5;
            rows.draw_bar(root, &ch, row, (lo, hi))?;
            rows.mark_failed(root, &ch, row, (lo, hi))?;
            rows.name_row(root, &ch, row, &names[rank])?;
        }
        // The runtime as designed, across every row.
        let top = ch.backend_coord(&(rows.nom_u, n as f64));
        let bottom = ch.backend_coord(&(rows.nom_u, 0.0));
        pixel_line(root, vec![top, bottom], INK, 2, Dash::Solid)?;
        Ok(())
    }
}

impl Tornado<'_> {
    /// Title, the sentence on how the bars are made, and the legend; returns the y below them.
    fn caption<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        unit: TimeUnit,
        ty: Type,
        pad: i32,
        ends: &[(Option<f64>, Option<f64>)],
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let lines = vec![
            "Each varied value at its low and at its high bound, the others as designed; the \
             largest swing on top."
                .to_string(),
        ];
        let mut y = header(
            root,
            &format!("What moves the runtime: {}", self.design.title),
            &lines,
            ty,
            pad,
        )?;
        let mut keys = vec![
            (
                Swatch::Block(LOW, 0.9),
                "value at its low bound".to_string(),
            ),
            (Swatch::Block(HIGH, 0.9), "value at its high bound".into()),
            (
                Swatch::Line(INK, 2, Dash::Solid),
                format!("as designed: {}", in_unit(self.nominal, unit)),
            ),
        ];
        if ends.iter().any(|(a, b)| a.is_none() || b.is_none()) {
            keys.push((
                Swatch::Mark(Shape::Square, VERMILLION, false),
                "run gave no result".into(),
            ));
        }
        let w = root.dim_in_pixel().0;
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        Ok(y)
    }

    /// Each row's words left of the chart: the path, and the bounds under it.
    fn row_names(&self) -> Vec<(String, String)> {
        let (d, sp) = (self.design, self.spread);
        sp.swings
            .iter()
            .map(|x| {
                let k = &sp.tolerances[x.tolerance].knob;
                (
                    x.path.clone(),
                    format!(
                        "low {} · high {}",
                        fmt_value(d, k, x.bounds.0),
                        fmt_value(d, k, x.bounds.1)
                    ),
                )
            })
            .collect()
    }
}

/// How the rows of a tornado chart are drawn.
struct Rows {
    /// Two lines of words beside each bar (else one).
    two_lines: bool,
    /// Half a bar's height, in rows.
    half: f64,
    /// The runtime as designed, in the axis' unit.
    nom_u: f64,
    /// Seconds per unit of the runtime axis.
    unit_s: f64,
    /// The runtime axis' start.
    x_lo: f64,
    /// Type sizes.
    ty: Type,
}

impl Rows {
    /// The bar of the row centred at `row`: from the runtime as designed toward each bound's
    /// runtime, or "no change" when neither bound moves it.
    fn draw_bar<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ch: &Chart<'_, DB>,
        row: f64,
        (lo, hi): (Option<f64>, Option<f64>),
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let nom_u = self.nom_u;
        let (y0, y1) = (row - self.half, row + self.half);
        // The longer part first, so that the shorter stays in sight when both lie on the
        // same side of the design as written.
        let mut parts: Vec<(f64, RGBColor)> = [(lo, LOW), (hi, HIGH)]
            .iter()
            .filter_map(|(t, c)| t.map(|t| (t / self.unit_s, *c)))
            .collect();
        parts.sort_by(|a, b| (b.0 - nom_u).abs().total_cmp(&(a.0 - nom_u).abs()));
        let centre = ch.backend_coord(&(nom_u, y0));
        let still = parts.iter().all(|p| (p.0 - nom_u).abs() <= 0.0);
        for (t, c) in parts {
            // In pixels: a part that moves the runtime at all shows at least 3 pixels past
            // the line as designed (which is 2 wide), so a small swing is not hidden by it.
            let (end, bottom) = ch.backend_coord(&(t, y1));
            let end = if t < nom_u {
                end.min(centre.0 - 3)
            } else if t > nom_u {
                end.max(centre.0 + 3)
            } else {
                continue;
            };
            let rect = [(centre.0.min(end), centre.1), (centre.0.max(end), bottom)];
            root.draw(&Rectangle::new(rect, c.mix(0.9).filled()))?;
            root.draw(&Rectangle::new(rect, WHITE.stroke_width(1)))?;
        }
        if still && failed_none(lo, hi) {
            let at = ch.backend_coord(&(nom_u, row));
            label(
                root,
                "no change",
                (at.0 + 6, at.1),
                &text(self.ty.scaled(0.9), GREY, HPos::Left, VPos::Center),
            )?;
        }
        Ok(())
    }

    /// A failed bound: a hollow square on the line as designed and its words beside it, on the
    /// side away from the other bound's bar.
    fn mark_failed<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ch: &Chart<'_, DB>,
        row: f64,
        (lo, hi): (Option<f64>, Option<f64>),
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let failed: Vec<(&str, Option<f64>)> = [("low", lo, hi), ("high", hi, lo)]
            .iter()
            .filter(|(_, t, _)| t.is_none())
            .map(|(which, _, other)| (*which, *other))
            .collect();
        if failed.is_empty() {
            return Ok(());
        }
        let at = ch.backend_coord(&(self.nom_u, row));
        let other_left = failed[0].1.is_some_and(|t| t / self.unit_s < self.nom_u);
        let words = if failed.len() == 2 {
            "no result at either bound".to_string()
        } else {
            format!("no result at the {} bound", failed[0].0)
        };
        let r = (self.ty.body * 0.4) as i32;
        marker(root, at, Shape::Square, r, VERMILLION, false)?;
        let (dx, anchor) = if other_left {
            (2 * r + 4, HPos::Left)
        } else {
            (-2 * r - 4, HPos::Right)
        };
        label(
            root,
            &words,
            (at.0 + dx, at.1),
            &text(self.ty.scaled(0.9), VERMILLION, anchor, VPos::Center),
        )
    }

    /// The row's path left of the axis, and its bounds under it when there is room.
    fn name_row<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ch: &Chart<'_, DB>,
        row: f64,
        (path, bounds): &(String, String),
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let ty = self.ty;
        let axis = ch.backend_coord(&(self.x_lo, row));
        let right = text(ty.body, INK, HPos::Right, VPos::Center);
        if self.two_lines {
            let gap = (ty.body * 0.62) as i32;
            label(root, path, (axis.0 - 8, axis.1 - gap), &right)?;
            label(
                root,
                bounds,
                (axis.0 - 8, axis.1 + gap),
                &text(ty.scaled(0.9), GREY, HPos::Right, VPos::Center),
            )
        } else {
            label(root, path, (axis.0 - 8, axis.1), &right)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bins_follow_freedman_diaconis_on_round_edges() {
        // 8001 values evenly over 0..100: IQR 50, so Freedman–Diaconis gives
        // 2 * 50 / 8001^(1/3) = 4.9998, narrower than Sturges' 100 / 13, a step of 5.
        let v: Vec<f64> = (0..=8000).map(|i| f64::from(i) / 80.0).collect();
        let (first, w, n) = bins(&v);
        assert!((w - 5.0).abs() < 1e-9, "{w}");
        assert!(first.abs() < 1e-12);
        // 0..5, ..., 95..100 and 100..105 for the greatest value.
        assert_eq!(n, 21);
        assert!(first + w * n as f64 > v[8000]);
        // 1000 values: Freedman–Diaconis 10, Sturges 99.9 / 10 = 9.99, rounded down to 5.
        let v: Vec<f64> = (0..1000).map(|i| f64::from(i) / 10.0).collect();
        assert!((bins(&v).1 - 5.0).abs() < 1e-9);
        // All alike: one bin holding the value.
        let (first, w, n) = bins(&[5.0; 20]);
        assert_eq!(n, 1);
        assert!(first <= 5.0 && first + w > 5.0);
        // A zero IQR with a few outliers: Sturges over the range, within the bounds.
        let mut v = vec![1.0; 50];
        v.extend([3.0, 9.0]);
        let (_, _, n) = bins(&v);
        assert!((BINS.0..=BINS.1).contains(&n), "{n}");
    }

    #[test]
    fn round_steps() {
        assert!((round_step(0.73) - 1.0).abs() < 1e-12);
        assert!((round_step(2.2) - 2.5).abs() < 1e-12);
        assert!((round_step(40.0) - 50.0).abs() < 1e-9);
        assert!((runtime_unit(3.0 * YEAR_S).seconds - YEAR_S).abs() < 1e-6);
        assert_eq!(runtime_unit(100.0 * 86_400.0).symbol, "d");
        assert_eq!(runtime_unit(20.0 * 3600.0).symbol, "h");
    }
}
