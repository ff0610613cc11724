//! The discharge picture: pack voltage (terminal and open-circuit) against time with the cutoff
//! and the end, the state of charge below, and the long stretches of each mode shaded.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::profile::{Band, bands};
use super::style::{
    BLUE, Dash, GREEN, GREY, INK, MESH_BOLD, MESH_LIGHT, ORANGE, SKY, Shape, Swatch, TimeUnit,
    Type, VERMILLION, end_words, fill, fit_lines, label, legend, marker, pixel_line, px, text,
    text_width,
};
use super::thin::{bucket_minima, decimate, mark_count, voltage_band};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::model::Design;
use crate::report::runtime::end_sentence;
use crate::solve::{RunResult, TracePoint};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// Opacity of the terminal-voltage band.
const BAND_ALPHA: f64 = 0.45;

/// Most trace points drawn as they are (more are decimated, keeping each bucket's minimum).
pub(super) const MAX_POINTS: usize = 3000;

/// The discharge of `run` (which must have been run with a trace): the band the pack terminal
/// voltage moves in (lowest to highest near each time), the lowest voltage of each stretch of
/// the trace (pulses) as dots, the open-circuit voltage against time, the cutoff, the end with its reason, the state of charge in a second panel, and shaded bands
/// for long stretches of one mode.
pub fn discharge(
    design: &Design,
    run: &RunResult,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    if run.trace.is_empty() {
        return Err(PlotError::NoTrace);
    }
    render(&Discharge { design, run }, format, size)
}

struct Discharge<'a> {
    design: &'a Design,
    run: &'a RunResult,
}

/// The state-of-charge panel under a discharge chart: time in `unit` up to `x_hi`, 0..100 %.
pub(super) fn soc_panel<DB: DrawingBackend>(
    area: &Canvas<DB>,
    x_hi: f64,
    unit: TimeUnit,
    ty: Type,
    pad: i32,
    y_area: u32,
) -> Result<Chart<'_, DB>, PlotError> {
    let mut sc = ChartBuilder::on(area)
        .margin_top(6)
        .margin_right(pad)
        .x_label_area_size((ty.body * 3.4) as u32)
        .y_label_area_size(y_area)
        .build_cartesian_2d(0.0..x_hi, 0.0..100.0)?;
    sc.configure_mesh()
        .light_line_style(MESH_LIGHT)
        .bold_line_style(MESH_BOLD)
        .x_desc(unit.title())
        .y_desc("state of charge (%)")
        .axis_desc_style(("sans-serif", ty.axis))
        .label_style(("sans-serif", ty.body))
        .x_label_formatter(&|x| tick(*x))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .y_labels(6)
        .draw()?;
    Ok(sc)
}

/// Tick text: integers bare, others with up to three decimals.
pub(super) fn tick(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.to_string() }
}

/// Voltage axis limits covering `lo..hi` with a margin, at least 0.1 V tall.
pub(super) fn volt_range(lo: f64, hi: f64) -> (f64, f64) {
    let span = (hi - lo).max(0.1);
    ((lo - 0.08 * span).max(0.0), hi + 0.08 * span)
}

/// The trace point closest in time to `t`.
pub(super) fn at_time(trace: &[TracePoint], t: f64) -> Option<TracePoint> {
    trace
        .iter()
        .min_by(|a, b| (a.t_s - t).abs().total_cmp(&(b.t_s - t).abs()))
        .copied()
}

/// A rectangle in pixels: top left and bottom right.
pub(super) type Px = ((i32, i32), (i32, i32));

/// The box `boxed` would draw for `s` at `at`.
pub(super) fn box_of<DB: DrawingBackend>(
    root: &Canvas<DB>,
    s: &str,
    at: (i32, i32),
    size: f64,
    right: bool,
) -> Px {
    let w = text_width(root, s, size) + 10;
    let h = (size * 1.5) as i32;
    let x0 = if right { at.0 - w } else { at.0 };
    let (x0, y0) = (x0.max(2), at.1 - h / 2);
    ((x0, y0), (x0 + w, y0 + h))
}

/// Whether two pixel rectangles overlap (with a 2-pixel gap required).
pub(super) fn overlaps(a: Px, b: Px) -> bool {
    a.0.0 < b.1.0 + 2 && b.0.0 < a.1.0 + 2 && a.0.1 < b.1.1 + 2 && b.0.1 < a.1.1 + 2
}

/// Draw `text` in a white box with a thin border; `right` puts the box's right edge at `at.0`.
/// Returns the box.
pub(super) fn boxed<DB: DrawingBackend>(
    root: &Canvas<DB>,
    s: &str,
    at: (i32, i32),
    size: f64,
    right: bool,
) -> Result<Px, PlotError>
where
    DB::ErrorType: 'static,
{
    let rect = box_of(root, s, at, size, right);
    root.draw(&Rectangle::new([rect.0, rect.1], WHITE.mix(0.92).filled()))?;
    root.draw(&Rectangle::new([rect.0, rect.1], GREY.stroke_width(1)))?;
    label(
        root,
        s,
        (rect.0.0 + 5, at.1),
        &text(size, INK, HPos::Left, VPos::Center),
    )?;
    Ok(rect)
}

/// Title and wrapped sentences at the top; returns the y below them.
pub(super) fn header<DB: DrawingBackend>(
    root: &Canvas<DB>,
    title: &str,
    lines: &[String],
    ty: Type,
    pad: i32,
) -> Result<i32, PlotError>
where
    DB::ErrorType: 'static,
{
    let width = px(root.dim_in_pixel().0) - 2 * pad;
    let mut y = pad;
    for line in fit_lines(root, title, ty.title, width) {
        label(
            root,
            &line,
            (pad, y),
            &text(ty.title, INK, HPos::Left, VPos::Top),
        )?;
        y += (ty.title * 1.3) as i32;
    }
    for sentence in lines {
        for line in fit_lines(root, sentence, ty.body, width) {
            label(
                root,
                &line,
                (pad, y),
                &text(ty.body, GREY, HPos::Left, VPos::Top),
            )?;
            y += (ty.body * 1.35) as i32;
        }
    }
    Ok(y + (ty.body * 0.4) as i32)
}

/// Legend keys for `bands`, and each band's fill colour index.
pub(super) fn band_keys(design: &Design, bands: &[Band]) -> (Vec<(Swatch, String)>, Vec<usize>) {
    let mut kinds: Vec<(usize, bool)> = Vec::new();
    let mut colour = Vec::with_capacity(bands.len());
    for b in bands {
        let k = (b.mode, b.cycling);
        let i = kinds.iter().position(|x| *x == k).unwrap_or_else(|| {
            kinds.push(k);
            kinds.len() - 1
        });
        colour.push(i);
    }
    let keys = kinds
        .iter()
        .enumerate()
        .map(|(i, &(m, cycling))| {
            let name = &design.modes[m].name;
            let words = if cycling {
                format!("short cycles, mostly `{name}`")
            } else {
                format!("mode `{name}`")
            };
            (Swatch::Block(fill(i + 4), 0.22), words)
        })
        .collect();
    (keys, colour)
}

impl Painter for Discharge<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (d, r) = (self.design, self.run);
        let (w, h) = root.dim_in_pixel();
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let band_list = bands(d, r.end.t_s);
        let (band_legend, band_colour) = band_keys(d, &band_list);
        let y = self.header_and_legend(root, ty, pad, band_legend)?;

        let body = root.margin(y + 4, pad / 2, pad / 2, pad);
        let body_h = px(h) - y - 4 - pad / 2;
        let (top, bottom) = body.split_vertically(body_h * 62 / 100);
        let t_end = r.end.t_s.max(r.trace.last().map_or(0.0, |p| p.t_s));
        let v_min = r
            .trace
            .iter()
            .map(|p| p.voltage)
            .fold(f64::INFINITY, f64::min);
        let v_max = r
            .trace
            .iter()
            .map(|p| p.ocv.max(p.voltage))
            .fold(f64::NEG_INFINITY, f64::max);
        let cutoff = d.pack.cutoff_v();
        let (v_lo, v_hi) = volt_range(v_min.min(cutoff), v_max);
        let unit = TimeUnit::for_span(t_end);
        let frame = Frame {
            ty,
            pad,
            unit,
            x_hi: t_end / unit.seconds * 1.04,
            v_range: (v_lo, v_hi),
            cutoff,
            y_area: (ty.body * 4.0) as u32,
            bands: band_list,
            band_colour,
            trace: decimate(&r.trace, MAX_POINTS),
        };
        let vc = self.voltage_panel(root, &top, &frame)?;
        let mut sc = soc_panel(&bottom, frame.x_hi, unit, ty, pad, frame.y_area)?;
        sc.draw_series(frame.bands.iter().zip(&frame.band_colour).map(|(b, &c)| {
            Rectangle::new(
                [(b.t0 / unit.seconds, 0.0), (b.t1 / unit.seconds, 100.0)],
                fill(c + 4).mix(0.22).filled(),
            )
        }))?;
        let soc: Vec<(f64, f64)> = frame
            .trace
            .iter()
            .map(|p| (p.t_s / unit.seconds, p.soc * 100.0))
            .collect();
        sc.draw_series(AreaSeries::new(soc.clone(), 0.0, GREEN.mix(0.12)))?;
        sc.draw_series(LineSeries::new(soc, GREEN.stroke_width(2)))?;
        self.mark_end(root, &vc, &sc, &frame)
    }
}

/// A chart with a linear axis of numbers each way.
pub(super) type Chart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// What the panels of a discharge chart share: type and padding, axes, bands and the trace.
struct Frame {
    /// Type sizes.
    ty: Type,
    /// Padding around the chart, px.
    pad: i32,
    /// The time axis' unit.
    unit: TimeUnit,
    /// The time axis' end, in `unit`.
    x_hi: f64,
    /// The voltage axis' limits, V.
    v_range: (f64, f64),
    /// The pack's cutoff voltage, V.
    cutoff: f64,
    /// Width of the value axis' labels, px.
    y_area: u32,
    /// Long stretches of one mode, shaded.
    bands: Vec<Band>,
    /// Each band's fill colour index.
    band_colour: Vec<usize>,
    /// The trace, decimated to at most [`MAX_POINTS`].
    trace: Vec<TracePoint>,
}

impl Discharge<'_> {
    /// Title, the runtime sentence and the legend; returns the y below them.
    fn header_and_legend<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ty: Type,
        pad: i32,
        band_legend: Vec<(Swatch, String)>,
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (d, r) = (self.design, self.run);
        let sentence = format!(
            "Runtime {} at {} ambient: it stops because {}.",
            fmt_duration(r.end.t_s),
            fmt_celsius(r.ambient_c),
            end_sentence(d, r)
        );
        let mut y = header(
            root,
            &format!("Discharge: {}", d.title),
            &[sentence],
            ty,
            pad,
        )?;
        let mut keys = vec![
            (
                Swatch::Block(SKY, BAND_ALPHA),
                "terminal voltage, lowest to highest".to_string(),
            ),
            (
                Swatch::Mark(Shape::Circle, BLUE, true),
                "lowest terminal voltage (pulses)".into(),
            ),
            (
                Swatch::Line(ORANGE, 2, Dash::Long),
                "open-circuit voltage".into(),
            ),
            (Swatch::Line(VERMILLION, 2, Dash::Medium), "cutoff".into()),
            (
                Swatch::Line(GREEN, 2, Dash::Solid),
                "state of charge".into(),
            ),
            (Swatch::Mark(Shape::Diamond, INK, true), "end".into()),
        ];
        keys.extend(band_legend);
        let width = px(root.dim_in_pixel().0) - 2 * pad;
        y += legend(root, &keys, (pad, y), width, ty.body, false)?;
        Ok(y)
    }

    /// The voltage panel on `top`: bands, the terminal-voltage band and its lowest points, the
    /// open-circuit voltage, the cutoff and the bands' names.
    fn voltage_panel<'a, DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        top: &'a Canvas<DB>,
        f: &Frame,
    ) -> Result<Chart<'a, DB>, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (d, r) = (self.design, self.run);
        let (ty, unit, (v_lo, v_hi)) = (f.ty, f.unit, f.v_range);
        let w = root.dim_in_pixel().0;
        let pass: f64 = d.profile.iter().map(crate::model::Step::duration).sum();
        let band = voltage_band(&r.trace, (w / 3) as usize, pass);
        let span = r.trace.last().map_or(0.0, |p| p.t_s);
        let minima = bucket_minima(&r.trace, mark_count((w / 9) as usize, span, pass));
        let mut vc = ChartBuilder::on(top)
            .margin_top(4)
            .margin_right(f.pad)
            .x_label_area_size((ty.body * 2.0) as u32)
            .y_label_area_size(f.y_area)
            .build_cartesian_2d(0.0..f.x_hi, v_lo..v_hi)?;
        vc.configure_mesh()
            .light_line_style(MESH_LIGHT)
            .bold_line_style(MESH_BOLD)
            .y_desc("pack voltage (V)")
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .x_label_formatter(&|x| tick(*x))
            .y_label_formatter(&|v| format!("{v:.2}"))
            .draw()?;
        vc.draw_series(f.bands.iter().zip(&f.band_colour).map(|(b, &c)| {
            Rectangle::new(
                [(b.t0 / unit.seconds, v_lo), (b.t1 / unit.seconds, v_hi)],
                fill(c + 4).mix(0.22).filled(),
            )
        }))?;
        // The terminal voltage as a band from its lowest to its highest value near each time,
        // and the lowest points (the pulses) as dots: a line through the lowest points would
        // suggest the pack sits that low between pulses.
        let outline: Vec<(f64, f64)> = band
            .iter()
            .map(|s| (s.t_s / unit.seconds, s.high))
            .chain(band.iter().rev().map(|s| (s.t_s / unit.seconds, s.low)))
            .collect();
        vc.draw_series(std::iter::once(Polygon::new(
            outline.clone(),
            SKY.mix(BAND_ALPHA).filled(),
        )))?;
        let mut ring = outline;
        ring.extend(ring.first().copied());
        vc.draw_series(std::iter::once(PathElement::new(ring, SKY.stroke_width(1))))?;
        let dot = (ty.body / 6.0).round().max(2.0) as i32;
        vc.draw_series(
            minima
                .iter()
                .map(|p| Circle::new((p.t_s / unit.seconds, p.voltage), dot, BLUE.filled())),
        )?;
        let ocv: Vec<(f64, f64)> = f
            .trace
            .iter()
            .map(|p| (p.t_s / unit.seconds, p.ocv))
            .collect();
        vc.draw_series(DashedLineSeries::new(ocv, 12, 6, ORANGE.stroke_width(2)))?;
        self.cutoff_and_band_names(root, &vc, f)?;
        Ok(vc)
    }

    /// The cutoff line with its value, and the bands' names where they fit along the top of
    /// the voltage panel.
    fn cutoff_and_band_names<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        vc: &Chart<'_, DB>,
        f: &Frame,
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (ty, unit, v_hi) = (f.ty, f.unit, f.v_range.1);
        let cut_l = vc.backend_coord(&(0.0, f.cutoff));
        let cut_r = vc.backend_coord(&(f.x_hi, f.cutoff));
        pixel_line(root, vec![cut_l, cut_r], VERMILLION, 2, Dash::Medium)?;
        label(
            root,
            &format!("cutoff {}", fmt_eng(f.cutoff, "V")),
            (cut_l.0 + 6, cut_l.1 - 4),
            &text(ty.body, VERMILLION, HPos::Left, VPos::Bottom),
        )?;
        for b in &f.bands {
            let name = &self.design.modes[b.mode].name;
            let l = vc.backend_coord(&(b.t0 / unit.seconds, v_hi));
            let rr = vc.backend_coord(&(b.t1 / unit.seconds, v_hi));
            if rr.0 - l.0 > text_width(root, name, ty.scaled(0.9)) + 8 {
                let at = ((l.0 + rr.0) / 2, l.1 + 4);
                label(
                    root,
                    name,
                    at,
                    &text(ty.scaled(0.9), GREY, HPos::Center, VPos::Top),
                )?;
            }
        }
        Ok(())
    }

    /// The end: a vertical guide through both panels, a marker in each, the time and reason
    /// beside the voltage one and the charge left beside the other.
    fn mark_end<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        vc: &Chart<'_, DB>,
        sc: &Chart<'_, DB>,
        f: &Frame,
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (d, r, ty) = (self.design, self.run, f.ty);
        let te = r.end.t_s / f.unit.seconds;
        let v_end = at_time(&r.trace, r.end.t_s).map_or(f.cutoff, |p| p.voltage);
        let top_px = vc.backend_coord(&(te, f.v_range.1));
        let bottom_px = sc.backend_coord(&(te, 0.0));
        pixel_line(root, vec![top_px, bottom_px], GREY, 1, Dash::Dots)?;
        let mv = vc.backend_coord(&(te, v_end));
        let ms = sc.backend_coord(&(te, r.end.soc * 100.0));
        let r_mark = (ty.body * 0.45) as i32;
        marker(root, mv, Shape::Diamond, r_mark, INK, true)?;
        marker(root, ms, Shape::Diamond, r_mark, INK, true)?;
        let mode = r
            .end
            .mode
            .map_or_else(String::new, |m| format!(" in `{}`", d.modes[m].name));
        let words = format!(
            "end {}{mode}: {}",
            fmt_duration(r.end.t_s),
            end_words(d, &r.end)
        );
        let right = mv.0 > px(root.dim_in_pixel().0) / 2;
        let dx = if right { -2 * r_mark } else { 2 * r_mark };
        let above = (ty.body * 1.6) as i32;
        let ly = (mv.1 - above).max(top_px.1 + (ty.body * 2.2) as i32);
        boxed(root, &words, (mv.0 + dx, ly), ty.body, right)?;
        boxed(
            root,
            &format!("{} left", fmt_percent(r.end.soc)),
            (
                ms.0 + dx,
                (ms.1 - above).max(sc.backend_coord(&(te, 100.0)).1 + ty.body as i32),
            ),
            ty.body,
            right,
        )?;
        Ok(())
    }
}
