//! Several designs' discharges on one chart: the lowest terminal voltage of each stretch of their
//! traces against time, their cutoffs and ends, and their states of charge below.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::discharge::{
    Chart, Px, at_time, box_of, boxed, header, overlaps, soc_panel, tick, volt_range,
};
use super::style::{
    Dash, GREY, INK, MESH_BOLD, MESH_LIGHT, Shape, Swatch, TimeUnit, Type, fit_lines, label,
    legend, marker, pixel_line, px, series, text,
};
use super::thin::{bucket_minima, lower_envelope, mark_count};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::model::Design;
use crate::solve::RunResult;
use crate::units::{fmt_duration, fmt_eng};

/// The discharges of several designs on one chart, each with its letter (A, B, C, ... as in
/// `compare`'s table), colour, line pattern and marker shape: the lowest terminal voltage of each
/// stretch of its trace (as marks), its cutoff, its end, and its state of charge in a second panel. The
/// legend names each design by its title, and also by its source (the `&str` of its entry,
/// usually the file it was read from) when titles repeat. Every run must have a trace.
pub fn compare_discharge(
    entries: &[(&str, &Design, &RunResult)],
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    if entries.is_empty() {
        return Err(PlotError::Nothing("no designs to compare".into()));
    }
    if entries.iter().any(|(_, _, r)| r.trace.is_empty()) {
        return Err(PlotError::NoTrace);
    }
    render(&Compare { entries }, format, size)
}

struct Compare<'a, 'b> {
    entries: &'b [(&'a str, &'a Design, &'a RunResult)],
}

/// The letter of entry `k`: A, B, C, ... (then AA, AB, ... past Z).
pub(super) fn letter(k: usize) -> String {
    let a = |i: usize| char::from(b'A' + u8::try_from(i % 26).unwrap_or(0));
    if k < 26 {
        a(k).to_string()
    } else {
        format!("{}{}", a(k / 26 - 1), a(k))
    }
}

/// A row index as a pixel multiplier.
fn px_of(i: usize) -> i32 {
    i32::try_from(i).unwrap_or(i32::MAX)
}

/// What the legend calls each design: its title, or its title and source when titles repeat.
pub(super) fn series_names(entries: &[(&str, &Design, &RunResult)]) -> Vec<String> {
    let repeated = |t: &str| entries.iter().filter(|(_, d, _)| d.title == t).count() > 1;
    entries
        .iter()
        .map(|(source, d, _)| {
            if repeated(&d.title) {
                format!("{} ({source})", d.title)
            } else {
                d.title.clone()
            }
        })
        .collect()
}

/// The pattern of entry `k` (solid, long dashes, medium dashes, ...; dots are too faint here).
fn dash(k: usize) -> Dash {
    [Dash::Solid, Dash::Long, Dash::Medium][k % 3]
}

/// Draw `pts` (data already in pixels) with entry `k`'s pattern.
fn line<DB: DrawingBackend>(
    root: &Canvas<DB>,
    pts: Vec<(i32, i32)>,
    k: usize,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    pixel_line(root, pts, series(k), 2, dash(k))
}

impl Painter for Compare<'_, '_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let e = self.entries;
        let (w, h) = root.dim_in_pixel();
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let t_end = e
            .iter()
            .map(|(_, _, r)| r.end.t_s.max(r.trace.last().map_or(0.0, |p| p.t_s)))
            .fold(0.0, f64::max);
        let unit = TimeUnit::for_span(t_end);
        let dot = (ty.body * 0.16).round().max(2.0) as i32;
        let y = self.caption(root, ty, pad, dot)?;

        let body = root.margin(y + 4, pad / 2, pad / 2, pad);
        let body_h = px(h) - y - 4 - pad / 2;
        let (top, bottom) = body.split_vertically(body_h * 62 / 100);
        let mut v_min = f64::INFINITY;
        let mut v_max = f64::NEG_INFINITY;
        for (_, d, r) in e {
            for p in &r.trace {
                v_min = v_min.min(p.voltage);
                v_max = v_max.max(p.voltage);
            }
            v_min = v_min.min(d.pack.cutoff_v());
        }
        let (v_lo, v_hi) = volt_range(v_min, v_max);
        let x_hi = t_end / unit.seconds * 1.04;
        let y_area = (ty.body * 4.0) as u32;
        let mut vc = ChartBuilder::on(&top)
            .margin_top(4)
            .margin_right(pad)
            .x_label_area_size((ty.body * 2.0) as u32)
            .y_label_area_size(y_area)
            .build_cartesian_2d(0.0..x_hi, v_lo..v_hi)?;
        vc.configure_mesh()
            .light_line_style(MESH_LIGHT)
            .bold_line_style(MESH_BOLD)
            .y_desc("lowest pack voltage (V)")
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .x_label_formatter(&|x| tick(*x))
            .y_label_formatter(&|v| format!("{v:.2}"))
            .draw()?;
        let sc = soc_panel(&bottom, x_hi, unit, ty, pad, y_area)?;
        let axes = Axes {
            unit,
            t_end,
            x_hi,
            v_range: (v_lo, v_hi),
            ty,
            dot,
        };
        let cutoffs = self.draw_series(root, &vc, &sc, &axes)?;
        let placed = label_cutoffs(root, &vc, &cutoffs, ty)?;
        self.mark_ends(root, &vc, &sc, &axes, placed)
    }
}

/// The axes of a comparison chart and the sizes its marks share.
struct Axes {
    /// The time axis' unit.
    unit: TimeUnit,
    /// The latest end or trace point of any design, s.
    t_end: f64,
    /// The time axis' end, in `unit`.
    x_hi: f64,
    /// The voltage axis' limits, V.
    v_range: (f64, f64),
    /// Type sizes.
    ty: Type,
    /// Radius of the lowest-voltage marks, px.
    dot: i32,
}

/// Cutoffs that share one label: the voltage, the letters of the designs and the colour
/// index of the first.
type Cutoff = (f64, Vec<String>, usize);

impl Compare<'_, '_> {
    /// Title, one row per design (wrapped when long: its line, letter, name, runtime and end),
    /// the legend and the note on marks and lines; returns the y below them.
    fn caption<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ty: Type,
        pad: i32,
        dot: i32,
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let e = self.entries;
        let w = root.dim_in_pixel().0;
        let names = series_names(e);
        let mut y = header(root, "Discharge compared", &[], ty, pad)?;
        let sample = (ty.body * 2.2) as i32;
        let row_h = (ty.body * 1.45) as i32;
        let style = text(ty.body, INK, HPos::Left, VPos::Center);
        for (k, (_, _, r)) in e.iter().enumerate() {
            let words = format!(
                "{}: {}, runtime {}, ends on {}",
                letter(k),
                names[k],
                fmt_duration(r.end.t_s),
                r.end.reason.name()
            );
            let cy = y + row_h / 2;
            line(root, vec![(pad, cy), (pad + sample, cy)], k)?;
            marker(
                root,
                (pad + sample / 2, cy),
                Shape::nth(k),
                dot,
                series(k),
                true,
            )?;
            for (i, part) in fit_lines(root, &words, ty.body, px(w) - 2 * pad - sample - 6)
                .iter()
                .enumerate()
            {
                label(
                    root,
                    part,
                    (pad + sample + 6, cy + row_h * px_of(i)),
                    &style,
                )?;
                y += row_h;
            }
        }
        let keys = [
            (
                Swatch::Line(GREY, 1, Dash::Dots),
                "cutoff (thin, same colour)".to_string(),
            ),
            (Swatch::Mark(Shape::Diamond, GREY, true), "end".into()),
        ];
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        let note = "Marks: the lowest terminal voltage in each stretch of the run (the pulses); \
                    lines: the state of charge.";
        label(
            root,
            note,
            (pad, y),
            &text(ty.body, GREY, HPos::Left, VPos::Top),
        )?;
        Ok(y + (ty.body * 1.5) as i32)
    }

    /// Each design's lowest voltages as marks, its state of charge as a line and its cutoff as
    /// a thin line; returns the cutoffs, those closer than a fiftieth of the axis sharing one
    /// label.
    fn draw_series<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        vc: &Chart<'_, DB>,
        sc: &Chart<'_, DB>,
        a: &Axes,
    ) -> Result<Vec<Cutoff>, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let w = root.dim_in_pixel().0;
        let buckets = (w / 3) as usize;
        let (v_lo, v_hi) = a.v_range;
        let mut cutoffs: Vec<Cutoff> = Vec::new();
        for (k, (_, d, r)) in self.entries.iter().enumerate() {
            let pass: f64 = d.profile.iter().map(crate::model::Step::duration).sum();
            let env = lower_envelope(&r.trace, buckets, pass);
            // The lowest voltages as marks, not a line: between pulses the pack is higher.
            let span = r.trace.last().map_or(0.0, |p| p.t_s);
            let most = (f64::from(w / 12) * span / a.t_end.max(1e-9)) as usize;
            for p in bucket_minima(&r.trace, mark_count(most, span, pass)) {
                let at = vc.backend_coord(&(p.t_s / a.unit.seconds, p.voltage));
                marker(root, at, Shape::nth(k), a.dot, series(k), true)?;
            }
            let s_px: Vec<(i32, i32)> = env
                .iter()
                .map(|p| sc.backend_coord(&(p.t_s / a.unit.seconds, p.soc * 100.0)))
                .collect();
            line(root, s_px, k)?;
            let cutoff = d.pack.cutoff_v();
            let cl = vc.backend_coord(&(0.0, cutoff));
            let cr = vc.backend_coord(&(a.x_hi, cutoff));
            pixel_line(root, vec![cl, cr], series(k), 1, Dash::Dots)?;
            match cutoffs
                .iter_mut()
                .find(|c| (c.0 - cutoff).abs() < 0.02 * (v_hi - v_lo))
            {
                Some(c) => c.1.push(letter(k)),
                None => cutoffs.push((cutoff, vec![letter(k)], k)),
            }
        }
        Ok(cutoffs)
    }

    /// Each design's end: a marker in both panels and its letter, time and reason in a box,
    /// just above the marker, else higher, else below it: the first place not over anything
    /// in `placed`.
    fn mark_ends<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        vc: &Chart<'_, DB>,
        sc: &Chart<'_, DB>,
        a: &Axes,
        mut placed: Vec<Px>,
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (ty, unit, (v_lo, v_hi)) = (a.ty, a.unit, a.v_range);
        let w = root.dim_in_pixel().0;
        let r_mark = (ty.body * 0.45) as i32;
        let top = vc.backend_coord(&(0.0, v_hi)).1;
        let step = (ty.body * 1.7) as i32;
        for (k, (_, d, r)) in self.entries.iter().enumerate() {
            let cutoff = d.pack.cutoff_v();
            let te = r.end.t_s / unit.seconds;
            let v_end = at_time(&r.trace, r.end.t_s).map_or(cutoff, |p| p.voltage);
            let mv = vc.backend_coord(&(te, v_end));
            marker(root, mv, Shape::Diamond, r_mark, series(k), true)?;
            let ms = sc.backend_coord(&(te, r.end.soc * 100.0));
            marker(root, ms, Shape::Diamond, r_mark, series(k), true)?;
            placed.push((
                (mv.0 - r_mark - 2, mv.1 - r_mark - 2),
                (mv.0 + r_mark + 2, mv.1 + r_mark + 2),
            ));
            let words = format!(
                "{}: {}, {}",
                letter(k),
                fmt_duration(r.end.t_s),
                r.end.reason.name()
            );
            let right = mv.0 > px(w) / 2;
            let dx = if right { -2 * r_mark } else { 2 * r_mark };
            let bottom = vc.backend_coord(&(0.0, v_lo)).1;
            let candidates = (2..12)
                .map(|j| mv.1 - step * j / 2)
                .chain((2..8).map(|j| mv.1 + step * j / 2))
                .filter(|y| *y > top + step / 2 && *y < bottom - step / 2);
            let mut y_at = mv.1 - step;
            for y in candidates {
                let rect = box_of(root, &words, (mv.0 + dx, y), ty.body, right);
                if !placed.iter().any(|p| overlaps(*p, rect)) {
                    y_at = y;
                    break;
                }
            }
            placed.push(boxed(root, &words, (mv.0 + dx, y_at), ty.body, right)?);
        }
        Ok(())
    }
}

/// The cutoffs' labels at the left of the voltage panel, on white; returns their boxes.
fn label_cutoffs<DB: DrawingBackend>(
    root: &Canvas<DB>,
    vc: &Chart<'_, DB>,
    cutoffs: &[Cutoff],
    ty: Type,
) -> Result<Vec<Px>, PlotError>
where
    DB::ErrorType: 'static,
{
    let mut placed: Vec<Px> = Vec::new();
    let small = ty.scaled(0.9);
    for (cutoff, names, k) in cutoffs {
        let at = vc.backend_coord(&(0.0, *cutoff));
        let words = format!("cutoff {} ({})", fmt_eng(*cutoff, "V"), names.join(", "));
        let rect = box_of(
            root,
            &words,
            (at.0 + 6, at.1 - (small * 0.9) as i32),
            small,
            false,
        );
        root.draw(&Rectangle::new([rect.0, rect.1], WHITE.mix(0.85).filled()))?;
        label(
            root,
            &words,
            (rect.0.0 + 5, (rect.0.1 + rect.1.1) / 2),
            &text(small, series(*k), HPos::Left, VPos::Center),
        )?;
        placed.push(rect);
    }
    Ok(placed)
}
