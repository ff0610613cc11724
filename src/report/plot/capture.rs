//! A measured capture and its segments: the waveform as captured (its lowest and highest sample
//! in each pixel column, so a million samples draw as fast as a thousand) and the
//! piecewise-constant segments the design runs on.

use plotters::prelude::*;

use super::discharge::header;
use super::style::{BLUE, Dash, MESH_BOLD, MESH_LIGHT, Swatch, Type, VERMILLION, legend, px};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::capture::{Capture, Compressed};
use crate::units::fmt_eng;

/// The picture of `capture` with the segments of `compressed` over it; `on` says what the
/// tolerance is held on (a pack in words).
pub fn capture(
    capture: &Capture,
    compressed: &Compressed,
    on: &str,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    render(
        &Picture {
            c: capture,
            z: compressed,
            on,
        },
        format,
        size,
    )
}

struct Picture<'a> {
    c: &'a Capture,
    z: &'a Compressed,
    on: &'a str,
}

/// The unit of the time axis and its factor from seconds.
fn time_unit(span: f64) -> (&'static str, f64) {
    if span < 2e-3 {
        ("µs", 1e6)
    } else if span < 2.0 {
        ("ms", 1e3)
    } else {
        ("s", 1.0)
    }
}

/// The unit of the current axis and its factor from amperes.
fn current_unit(peak: f64) -> (&'static str, f64) {
    if peak < 2e-3 {
        ("µA", 1e6)
    } else if peak < 2.0 {
        ("mA", 1e3)
    } else {
        ("A", 1.0)
    }
}

/// The lowest and highest sample of capture `c` in each of `cols` columns of time, in time
/// order, as points on axes scaled by `tk` (time) and `ik` (current).
fn envelope(c: &Capture, cols: usize, tk: f64, ik: f64) -> Vec<(f64, f64)> {
    let span = c.duration_s();
    let mut lo = vec![f64::INFINITY; cols];
    let mut hi = vec![f64::NEG_INFINITY; cols];
    let mut t = 0.0;
    for (&i, &d) in c.current().iter().zip(c.dt()) {
        let k = (((t / span) * cols as f64) as usize).min(cols - 1);
        lo[k] = lo[k].min(i);
        hi[k] = hi[k].max(i);
        t += d;
    }
    let mut pts = Vec::with_capacity(2 * cols);
    for k in 0..cols {
        if lo[k].is_finite() {
            let x = (k as f64 + 0.5) / cols as f64 * span * tk;
            pts.push((x, lo[k] * ik));
            if hi[k] > lo[k] {
                pts.push((x, hi[k] * ik));
            }
        }
    }
    pts
}

impl Painter for Picture<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (w, _) = root.dim_in_pixel();
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let (c, z) = (self.c, self.z);
        let span = c.duration_s();
        let peak = c.current().iter().copied().fold(0.0_f64, f64::max);
        let low = c.current().iter().copied().fold(0.0_f64, f64::min);
        let (tu, tk) = time_unit(span);
        let (iu, ik) = current_unit(peak);
        let lines = vec![format!(
            "{} samples over {}, mean {}, peak {}; {} segments keep the charge and the lowest terminal voltage within {} on {} (bound {})",
            c.len(),
            fmt_eng(span, "s"),
            fmt_eng(c.charge_c() / span, "A"),
            fmt_eng(peak, "A"),
            z.segments.len(),
            fmt_eng(z.tolerance_v, "V"),
            self.on,
            fmt_eng(z.bound_v, "V"),
        )];
        let mut y = header(root, &format!("Capture {}", c.name()), &lines, ty, pad)?;
        let keys = [
            (
                Swatch::Line(BLUE, 1, Dash::Solid),
                "as captured".to_string(),
            ),
            (
                Swatch::Line(VERMILLION, 4, Dash::Solid),
                "segments (the mean of each)".to_string(),
            ),
        ];
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        let (_, h) = root.dim_in_pixel();
        let area = root.clone().shrink((0, y), (w, (px(h) - y).max(10) as u32));
        let top = (peak * ik * 1.08).max(1e-9);
        let bottom = (low * ik * 1.08).min(0.0);
        let mut ch = ChartBuilder::on(&area)
            .margin(pad / 2)
            .margin_right(pad)
            .x_label_area_size((ty.body * 3.4) as u32)
            .y_label_area_size((ty.body * 4.2) as u32)
            .build_cartesian_2d(0.0..span * tk, bottom..top)?;
        ch.configure_mesh()
            .light_line_style(MESH_LIGHT)
            .bold_line_style(MESH_BOLD)
            .x_desc(format!("time ({tu})"))
            .y_desc(format!("current ({iu})"))
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .draw()?;
        let pts = envelope(c, (2 * w as usize).max(1), tk, ik);
        let mut steps = Vec::with_capacity(2 * z.segments.len());
        let mut t = 0.0;
        for s in &z.segments {
            steps.push((t * tk, s.value * ik));
            t += s.seconds;
            steps.push((t * tk, s.value * ik));
        }
        // The segments under the waveform, so that both show where they agree.
        ch.draw_series(LineSeries::new(steps, VERMILLION.mix(0.75).stroke_width(4)))?;
        ch.draw_series(LineSeries::new(pts, BLUE.stroke_width(1)))?;
        Ok(())
    }
}
