//! The losses picture: energy lost over the run in each stage and in the pack, ranked, each bar
//! split by mode.
//!
//! The run's ledger gives each bar's length exactly. It does not say which mode the energy was
//! lost in, so the split is an estimate: each mode's mean loss in each place (its operating point
//! solved at a few states of charge along the run) times the time the profile gives that mode,
//! scaled so that the parts add up to the ledger's total.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::discharge::{Chart, header, tick};
use super::profile::mode_seconds;
use super::style::{
    GREY, INK, MESH_BOLD, Swatch, Type, fill, label, legend, nice_ceiling, px, text, text_width,
};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::model::Design;
use crate::solve::{PackState, RunResult, Solution, solve_point};
use crate::units::{fmt_duration, fmt_eng, fmt_percent};

/// States of charge sampled along the run for each mode's mean loss.
const SAMPLES: usize = 5;

/// Energy lost over `run` in each stage and in the pack (horizontal bars, most first), each bar
/// split by mode. The split is estimated from each mode's time share and its operating point
/// along the run; the bar totals are the run's.
pub fn losses(
    design: &Design,
    run: &RunResult,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    let bars = split(design, run);
    if bars.iter().all(|b| b.total_j <= 0.0) {
        return Err(PlotError::Nothing(
            "nothing was lost over the run: no losses to draw".into(),
        ));
    }
    render(&Losses { design, run, bars }, format, size)
}

/// One bar: a place where energy is lost.
#[derive(Debug, Clone)]
struct Bar {
    /// Stage id or `battery`.
    name: String,
    /// What it is.
    what: String,
    /// Total over the run, J.
    total_j: f64,
    /// Part lost in each mode, J (sums to `total_j`), or empty when no split was possible.
    by_mode: Vec<f64>,
}

/// The bars, most loss first, with their estimated split by mode.
fn split(d: &Design, r: &RunResult) -> Vec<Bar> {
    let modes = d.modes.len();
    let places = d.stages.len() + 1;
    let seconds = mode_seconds(d, r.end.t_s);
    let s0 = d.pack.start_soc;
    let s1 = r.end.soc.clamp(0.0, s0);
    // est[m][k]: estimated energy lost in place k during mode m (k = stages..., pack).
    let mut est = vec![vec![0.0; places]; modes];
    for (m, row) in est.iter_mut().enumerate() {
        if seconds[m] <= 0.0 {
            continue;
        }
        let mut sum = vec![0.0; places];
        let mut n = 0.0;
        for i in 0..SAMPLES {
            let soc = s0 - (s0 - s1) * (i as f64 + 0.5) / SAMPLES as f64;
            let at = PackState {
                soc,
                v_pol: None,
                ambient_c: r.ambient_c,
            };
            if let Solution::Point(p) = solve_point(d, m, at) {
                for (k, s) in p.stages.iter().enumerate() {
                    sum[k] += s.loss;
                }
                sum[places - 1] += p.pack.loss;
                n += 1.0;
            }
        }
        if n > 0.0 {
            for (e, s) in row.iter_mut().zip(&sum) {
                *e = seconds[m] * s / n;
            }
        }
    }
    let l = &r.ledger;
    let mut bars: Vec<Bar> = (0..places)
        .map(|k| {
            let (name, what, total_j) = if k + 1 == places {
                ("battery".to_string(), "pack".to_string(), l.pack_loss_j)
            } else {
                let s = &d.stages[k];
                (s.id.clone(), s.kind_name().to_string(), l.stage_loss_j()[k])
            };
            let est_sum: f64 = est.iter().map(|row| row[k]).sum();
            let by_mode = if est_sum > 0.0 {
                est.iter().map(|row| total_j * row[k] / est_sum).collect()
            } else {
                Vec::new()
            };
            Bar {
                name,
                what,
                total_j,
                by_mode,
            }
        })
        .collect();
    bars.sort_by(|a, b| b.total_j.total_cmp(&a.total_j));
    bars
}

/// Energy unit for a largest value of `max_j` joules: factor from J and symbol.
fn energy_unit(max_j: f64) -> (f64, &'static str) {
    let wh = max_j / 3600.0;
    if wh >= 1.0 {
        (1.0 / 3600.0, "Wh")
    } else if wh >= 1e-3 {
        (1e3 / 3600.0, "mWh")
    } else {
        (1e6 / 3600.0, "µWh")
    }
}

struct Losses<'a> {
    design: &'a Design,
    run: &'a RunResult,
    bars: Vec<Bar>,
}

impl Painter for Losses<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (r, bars) = (self.run, &self.bars);
        let w = root.dim_in_pixel().0;
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let total: f64 = bars.iter().map(|b| b.total_j).sum();
        let y = self.caption(root, ty, pad, total)?;

        let (factor, symbol) = energy_unit(bars[0].total_j);
        let n = bars.len();
        let names: Vec<String> = bars
            .iter()
            .map(|b| format!("{} ({})", b.name, b.what))
            .collect();
        let name_w = names
            .iter()
            .map(|s| text_width(root, s, ty.body))
            .max()
            .unwrap_or(0)
            + (ty.body * 1.2) as i32;
        let values: Vec<String> = bars.iter().map(|b| value_words(b, total)).collect();
        // The plotting width: the canvas less the side margins, the names and the right margin.
        let plot_w = px(w) - 3 * pad - name_w.max(40);
        let x_hi = axis_end(root, bars, &values, factor, plot_w, pad, ty.body);
        // The bars take the room down to a strip at the bottom that shows where all the energy
        // from the cells went (when the picture is tall enough for both).
        let h = px(root.dim_in_pixel().1);
        let split_h = destination_height(root, r, ty, px(w) - 2 * pad)?;
        let left = h - y - 4;
        let bars_h = if left - split_h >= (ty.body * 12.0) as i32 {
            left - split_h
        } else {
            left
        };
        let (area, rest) = root.margin(y + 4, 0, pad, pad).split_vertically(bars_h);
        if bars_h < left {
            destination(root, &rest, r, ty)?;
        }
        let area = area.margin(0, pad / 2, 0, 0);
        let mut ch = ChartBuilder::on(&area)
            .margin_right(pad)
            .x_label_area_size((ty.body * 3.4) as u32)
            .y_label_area_size(name_w.max(40) as u32)
            .build_cartesian_2d(0.0..x_hi, 0.0..n as f64)?;
        ch.configure_mesh()
            .disable_y_mesh()
            .y_labels(0)
            .light_line_style(WHITE)
            .bold_line_style(MESH_BOLD)
            .x_desc(format!("energy lost over the run ({symbol})"))
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .x_label_formatter(&|x| tick(*x))
            .draw()?;
        // Bars fill the middle 64 % of their row, at most three lines of text thick; most loss
        // on top.
        let row_px = f64::from(ch.plotting_area().dim_in_pixel().1) / n as f64;
        let half = (1.5 * ty.body / row_px).min(0.32);
        for (rank, b) in bars.iter().enumerate() {
            let row = (n - 1 - rank) as f64;
            let x = draw_bar(&ch, b, row, half, factor)?;
            let words = (values[rank].as_str(), names[rank].as_str());
            label_bar(root, &ch, (x, row), b.total_j, words, (ty, pad))?;
        }
        Ok(())
    }
}

impl Losses<'_> {
    /// Title, the sentences on the share lost and the split by mode, and the legend (each mode
    /// with a loss, and the bars not split); returns the y below them.
    fn caption<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ty: Type,
        pad: i32,
        total: f64,
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let (d, r, bars) = (self.design, self.run, &self.bars);
        let w = root.dim_in_pixel().0;
        let from_cells = r.ledger.cell_energy_j();
        let mut lines = vec![format!(
            "Over the runtime of {}: {} of the energy from the cells was lost on the way.",
            fmt_duration(r.end.t_s),
            if from_cells > 0.0 {
                fmt_percent(total / from_cells)
            } else {
                "none".into()
            }
        )];
        lines.push(
            "Bar lengths are the run's totals; the split by mode is estimated from each mode's \
             time share and its operating point along the run."
                .into(),
        );
        let mut y = header(root, &format!("Energy lost: {}", d.title), &lines, ty, pad)?;
        let used: Vec<usize> = (0..d.modes.len())
            .filter(|&m| {
                bars.iter()
                    .any(|b| b.by_mode.get(m).is_some_and(|e| *e > 0.0))
            })
            .collect();
        let mut keys: Vec<(Swatch, String)> = used
            .iter()
            .map(|&m| {
                (
                    Swatch::Block(fill(m), 0.85),
                    format!("mode `{}`", d.modes[m].name),
                )
            })
            .collect();
        if bars.iter().any(|b| b.by_mode.is_empty() && b.total_j > 0.0) {
            keys.push((
                Swatch::Block(GREY, 0.35),
                "not split (no operating point)".into(),
            ));
        }
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        Ok(y)
    }
}

/// Bar `b` in the row starting at `row`, `half` a row thick either side of its middle: one
/// part per mode in that mode's colour (grey when not split), energies scaled by `factor`;
/// returns where it ends on the axis.
fn draw_bar<DB: DrawingBackend>(
    ch: &Chart<'_, DB>,
    b: &Bar,
    row: f64,
    half: f64,
    factor: f64,
) -> Result<f64, PlotError>
where
    DB::ErrorType: 'static,
{
    let (y0, y1) = (row + 0.5 - half, row + 0.5 + half);
    let parts: Vec<(f64, RGBColor)> = if b.by_mode.is_empty() {
        vec![(b.total_j, GREY)]
    } else {
        b.by_mode
            .iter()
            .enumerate()
            .map(|(m, e)| (*e, fill(m)))
            .collect()
    };
    let mut x = 0.0;
    for (e, colour) in parts {
        if e <= 0.0 {
            continue;
        }
        let x1 = x + e * factor;
        ch.plotting_area()
            .draw(&Rectangle::new([(x, y0), (x1, y1)], colour.filled()))?;
        ch.plotting_area()
            .draw(&Rectangle::new([(x, y0), (x1, y1)], WHITE.stroke_width(1)))?;
        x = x1;
    }
    Ok(x)
}

/// The words of the bar ending at `x` in the row starting at `row`: its value right of the bar
/// (where the canvas is too narrow for it, the energy `total_j` alone, and else the energy
/// inside the bar's end), and its name left of the axis.
fn label_bar<DB: DrawingBackend>(
    root: &Canvas<DB>,
    ch: &Chart<'_, DB>,
    (x, row): (f64, f64),
    total_j: f64,
    (value_words, name_words): (&str, &str),
    (ty, pad): (Type, i32),
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let w = root.dim_in_pixel().0;
    let mid = ch.backend_coord(&(x, row + 0.5));
    let axis = ch.backend_coord(&(0.0, row + 0.5));
    let room = px(w) - pad / 2 - (mid.0 + 6);
    let energy = fmt_eng(total_j / 3600.0, "Wh");
    let (value, at, anchor, ink) = if text_width(root, value_words, ty.body) <= room {
        (value_words, mid.0 + 6, HPos::Left, INK)
    } else if text_width(root, &energy, ty.body) <= room {
        (energy.as_str(), mid.0 + 6, HPos::Left, INK)
    } else {
        (energy.as_str(), mid.0 - 6, HPos::Right, WHITE)
    };
    label(
        root,
        value,
        (at, mid.1),
        &text(ty.body, ink, anchor, VPos::Center),
    )?;
    let name = text(ty.body, INK, HPos::Right, VPos::Center);
    label(root, name_words, (axis.0 - 8, axis.1), &name)
}

/// The words beside a bar: its energy and its share of all losses.
fn value_words(b: &Bar, total: f64) -> String {
    let share = if total > 0.0 { b.total_j / total } else { 0.0 };
    format!(
        "{} ({} of losses)",
        fmt_eng(b.total_j / 3600.0, "Wh"),
        fmt_percent(share)
    )
}

/// The end of the energy axis: a round number at least 5 % past the longest bar, and far enough
/// that every bar's words fit between its end and the canvas's right edge, `plot_w` pixels of
/// plot wide with `pad` to the right of it. Bars keep at least 40 % of the width; words that
/// still do not fit are shortened where they are drawn.
fn axis_end<DB: DrawingBackend>(
    root: &Canvas<DB>,
    bars: &[Bar],
    values: &[String],
    factor: f64,
    plot_w: i32,
    pad: i32,
    size: f64,
) -> f64 {
    let longest = bars[0].total_j * factor;
    let plot_w = f64::from(plot_w.max(1));
    let mut end = longest * 1.05;
    for (b, words) in bars.iter().zip(values) {
        // Pixels left for the bar once its words, their gap and half the margin are taken.
        let room = plot_w + f64::from(pad) - f64::from(text_width(root, words, size) + 6);
        let room = room.max(0.4 * plot_w);
        end = end.max(b.total_j * factor * plot_w / room);
    }
    nice_ceiling(end.min(longest / 0.4))
}

/// One part of the energy from the cells: energy (J), its share of the energy from the cells,
/// name, fill and text colour.
type Part = (f64, f64, &'static str, RGBColor, RGBColor);

/// Where the energy from the cells went ([`crate::solve::Ledger::cell_energy_j`], the figure
/// the runtime and heat tables give): to the loads (their share as
/// [`crate::solve::Ledger::load_share_of_cell_energy`]), lost in the stages, lost in the pack.
fn destination_parts(r: &RunResult) -> [Part; 3] {
    let l = &r.ledger;
    let from_cells = l.cell_energy_j();
    let share = |e: f64| {
        if from_cells > 0.0 {
            e / from_cells
        } else {
            0.0
        }
    };
    [
        (
            l.load_energy_total(),
            l.load_share_of_cell_energy().unwrap_or(0.0),
            "to the loads",
            RGBColor(222, 222, 222),
            INK,
        ),
        (
            l.stage_loss_total(),
            share(l.stage_loss_total()),
            "lost in stages",
            RGBColor(90, 90, 90),
            WHITE,
        ),
        (
            l.pack_loss_j,
            share(l.pack_loss_j),
            "lost in the pack",
            RGBColor(160, 160, 160),
            INK,
        ),
    ]
}

/// The legend under the destination bar: each part that is not empty, with its energy and its
/// share of the energy from the cells (said in full on the first).
fn destination_keys(parts: &[Part]) -> Vec<(Swatch, String)> {
    parts
        .iter()
        .filter(|p| p.0 > 0.0)
        .enumerate()
        .map(|(i, &(e, share, name, colour, _))| {
            let of = if i == 0 {
                " of the energy from the cells"
            } else {
                ""
            };
            (
                Swatch::Block(colour, 1.0),
                format!(
                    "{name}: {} ({}{of})",
                    fmt_eng(e / 3600.0, "Wh"),
                    fmt_percent(share)
                ),
            )
        })
        .collect()
}

/// The height the destination strip needs `width` pixels wide: its title, its bar, its legend
/// (on as many rows as it takes) and a margin below.
fn destination_height<DB: DrawingBackend>(
    root: &Canvas<DB>,
    r: &RunResult,
    ty: Type,
    width: i32,
) -> Result<i32, PlotError>
where
    DB::ErrorType: 'static,
{
    let keys = destination_keys(&destination_parts(r));
    let rows = legend(root, &keys, (0, 0), width, ty.body, true)?;
    Ok((ty.body * 4.3) as i32 + 6 + rows + (ty.body * 0.6) as i32)
}

/// One bar across the width: the energy from the cells (open-circuit voltage x current), split
/// into what reached the loads, what the stages lost and what the pack lost inside, each part as
/// wide as its share. Greys (told apart by lightness and named in place) keep it apart from the
/// mode colours above.
fn destination<DB: DrawingBackend>(
    root: &Canvas<DB>,
    area: &Canvas<DB>,
    r: &RunResult,
    ty: Type,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let parts = destination_parts(r);
    let from_cells = r.ledger.cell_energy_j();
    if from_cells <= 0.0 {
        return Ok(());
    }
    // The parts add up to the energy from the cells (the run's energy balance); the bar is
    // drawn to their sum so that rounding leaves no gap at its end.
    let shares: f64 = parts.iter().map(|p| p.1).sum();
    let ((x0, y0), (x1, _)) = {
        let (xr, yr) = area.get_pixel_range();
        ((xr.start, yr.start), (xr.end, yr.end))
    };
    let title = format!(
        "Where the energy from the cells ({}) went",
        fmt_eng(from_cells / 3600.0, "Wh")
    );
    let top = y0 + (ty.body * 1.5) as i32;
    label(
        root,
        &title,
        (x0, top),
        &text(ty.axis, INK, HPos::Left, VPos::Bottom),
    )?;
    let (bar_top, bar_h) = (top + (ty.body * 0.6) as i32, (ty.body * 2.2) as i32);
    let width = f64::from(x1 - x0);
    let mut x = f64::from(x0);
    for (_, part, _, colour, ink) in parts {
        let w = if shares > 0.0 {
            width * part / shares
        } else {
            0.0
        };
        let (a, b) = (x.round() as i32, (x + w).round() as i32);
        if b > a {
            root.draw(&Rectangle::new(
                [(a, bar_top), (b, bar_top + bar_h)],
                colour.filled(),
            ))?;
            let share = fmt_percent(part);
            if b - a > text_width(root, &share, ty.body) + 8 {
                label(
                    root,
                    &share,
                    ((a + b) / 2, bar_top + bar_h / 2),
                    &text(ty.body, ink, HPos::Center, VPos::Center),
                )?;
            }
        }
        x += w;
    }
    let keys = destination_keys(&parts);
    legend(
        root,
        &keys,
        (x0, bar_top + bar_h + 6),
        x1 - x0,
        ty.body,
        false,
    )?;
    Ok(())
}
