//! The efficiency picture: each switching stage's loss model as efficiency against output
//! current, at the lowest and highest input voltage it sees, with each mode's operating point.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::discharge::header;
use super::style::{
    BLUE, Dash, GREY, MESH_BOLD, MESH_LIGHT, Shape, Swatch, Type, VERMILLION, label, legend,
    marker, pixel_line, px, series, text,
};
use super::{Canvas, Painter, PlotError, PlotFormat, render};
use crate::model::{Design, LossModel, StageKind};
use crate::solve::{ModeBudget, RunResult, Solution, StageState};
use crate::units::fmt_eng;

/// Lowest output current drawn, A.
const I_MIN: f64 = 1e-6;
/// Points per curve.
const STEPS: usize = 160;

/// For every switching stage, one panel: its efficiency model against output current (log scale
/// from 1 µA to its highest tabulated current or twice its highest operating current, whichever
/// is more) at the lowest and highest input voltage it sees, and the operating point of each mode
/// in `modes` (a budget, usually at the start state of charge). A stage on the battery sees the
/// pack's terminal voltage range over `run`'s trace (cutoff to the start's open-circuit voltage
/// without one); a stage fed by another sees that stage's setpoint.
pub fn efficiency(
    design: &Design,
    modes: &[ModeBudget],
    run: Option<&RunResult>,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    let stages: Vec<usize> = (0..design.stages.len())
        .filter(|&k| design.stages[k].kind.is_switching())
        .collect();
    if stages.is_empty() {
        return Err(PlotError::Nothing(
            "the design has no switching stage (buck, boost or buck-boost): no efficiency to draw"
                .into(),
        ));
    }
    render(
        &Efficiency {
            design,
            modes,
            run,
            stages,
        },
        format,
        size,
    )
}

struct Efficiency<'a> {
    design: &'a Design,
    modes: &'a [ModeBudget],
    run: Option<&'a RunResult>,
    stages: Vec<usize>,
}

/// The input voltages stage `k` sees: the pack's range for a stage on the battery (through
/// switches), else the setpoint of the converter feeding it.
fn vin_range(d: &Design, k: usize, run: Option<&RunResult>) -> (f64, f64) {
    let mut rail = d.stages[k].input;
    while rail > 0 {
        let parent = &d.stages[rail - 1];
        if parent.kind != StageKind::Switch {
            return (parent.setpoint, parent.setpoint);
        }
        rail = parent.input;
    }
    match run.filter(|r| !r.trace.is_empty()) {
        Some(r) => {
            let lo = r
                .trace
                .iter()
                .map(|p| p.voltage)
                .fold(f64::INFINITY, f64::min);
            let hi = r
                .trace
                .iter()
                .map(|p| p.voltage)
                .fold(f64::NEG_INFINITY, f64::max);
            (lo, hi)
        }
        None => (d.pack.cutoff_v(), d.pack.ocv(d.pack.start_soc)),
    }
}

/// Efficiency in % of stage `k` at `vin` and output current `i` per its loss model.
fn model_eta(d: &Design, k: usize, vin: f64, i: f64) -> f64 {
    let s = &d.stages[k];
    let pout = s.setpoint * i;
    let loss = s.regulating_loss(vin, s.setpoint, i);
    if pout + loss > 0.0 {
        100.0 * pout / (pout + loss)
    } else {
        0.0
    }
}

/// `fmt_eng` without trailing zeros: `10 µA`, `2.5 mA`.
fn short_eng(x: f64, unit: &str) -> String {
    let s = fmt_eng(x, unit);
    match s.split_once(' ') {
        Some((num, rest)) if num.contains('.') => {
            format!("{} {rest}", num.trim_end_matches('0').trim_end_matches('.'))
        }
        _ => s,
    }
}

/// One mode's operating point on stage `k`: output current, efficiency %, regulating.
fn operating_point(mb: &ModeBudget, k: usize) -> Option<(f64, f64, bool)> {
    let Solution::Point(p) = &mb.solution else {
        return None;
    };
    let sp = p.stages.get(k)?;
    if !sp.state.is_running() || sp.iout <= 0.0 {
        return None;
    }
    let eta = sp.efficiency()?;
    Some((sp.iout, eta * 100.0, sp.state == StageState::Regulating))
}

impl Painter for Efficiency<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let w = root.dim_in_pixel().0;
        let ty = Type::for_width(w);
        let pad = (ty.body * 1.2) as i32;
        let n = self.stages.len();
        let shown: Vec<&ModeBudget> = self
            .modes
            .iter()
            .filter(|mb| {
                self.stages
                    .iter()
                    .any(|&k| operating_point(mb, k).is_some())
            })
            .collect();
        let y = self.caption(root, ty, pad, &shown)?;
        let cols = if n == 1 { 1 } else { 2 };
        let rows = n.div_ceil(cols);
        let grid = root.margin(y + 4, pad / 2, pad / 2, pad / 2);
        let panels = grid.split_evenly((rows, cols));
        for (panel, &k) in panels.iter().zip(&self.stages) {
            self.panel(root, panel, k, &shown, (ty, pad))?;
        }
        Ok(())
    }
}

/// A chart with a logarithmic axis of current across and efficiency up.
type LogChart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<
        plotters::coord::combinators::LogCoord<f64>,
        plotters::coord::types::RangedCoordf64,
    >,
>;

impl Efficiency<'_> {
    /// Title, the sentence on what is drawn, and the legend (the two input voltages, each mode
    /// in `shown`, the hollow marks); returns the y below them.
    fn caption<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ty: Type,
        pad: i32,
        shown: &[&ModeBudget],
    ) -> Result<i32, PlotError>
    where
        DB::ErrorType: 'static,
    {
        let d = self.design;
        let w = root.dim_in_pixel().0;
        let lines = vec![
            "Each switching stage's efficiency model against its output current, at the lowest \
             and highest input voltage it sees over the run, with each mode's operating point at \
             the start of the run."
                .to_string(),
        ];
        let mut y = header(
            root,
            &format!("Converter efficiency: {}", d.title),
            &lines,
            ty,
            pad,
        )?;
        let mut keys = vec![
            (
                Swatch::Line(BLUE, 2, Dash::Solid),
                "lowest input voltage".to_string(),
            ),
            (
                Swatch::Line(VERMILLION, 2, Dash::Long),
                "highest input voltage".into(),
            ),
        ];
        for (j, mb) in shown.iter().enumerate() {
            keys.push((
                Swatch::Mark(Shape::nth(j), series(j + 2), true),
                format!("mode `{}`", d.modes[mb.mode].name),
            ));
        }
        if shown.iter().any(|mb| {
            self.stages
                .iter()
                .any(|&k| operating_point(mb, k).is_some_and(|p| !p.2))
        }) {
            keys.push((
                Swatch::Mark(Shape::Circle, GREY, false),
                "hollow: not regulating (bypass or dropout)".into(),
            ));
        }
        y += legend(root, &keys, (pad, y), px(w) - 2 * pad, ty.body, false)?;
        Ok(y)
    }

    /// The panel of stage `k`: its caption, its efficiency at the lowest and highest input
    /// voltage, where its table ends, and the operating point of each mode in `shown`.
    fn panel<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        panel: &Canvas<DB>,
        k: usize,
        shown: &[&ModeBudget],
        (ty, pad): (Type, i32),
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let d = self.design;
        let s = &d.stages[k];
        let (v_lo, v_hi) = vin_range(d, k, self.run);
        let ops: Vec<(usize, (f64, f64, bool))> = shown
            .iter()
            .enumerate()
            .filter_map(|(j, mb)| operating_point(mb, k).map(|p| (j, p)))
            .collect();
        let peak = ops.iter().map(|(_, p)| p.0).fold(0.0, f64::max);
        let tab = match &s.loss {
            LossModel::Curves(c) => c.iter().map(|(_, e)| e.max_current()).fold(0.0, f64::max),
            _ => 0.0,
        };
        let hi = tab
            .max(2.0 * peak)
            .max(s.max_output_current.unwrap_or(0.0))
            .max(1e-2);
        let x_hi = 10f64.powf(hi.log10().ceil());
        let same = (v_hi - v_lo).abs() < 1e-3;
        let input = if same {
            format!("input {}", fmt_eng(v_lo, "V"))
        } else {
            format!(
                "input {} (solid) to {} (dashed)",
                fmt_eng(v_lo, "V"),
                fmt_eng(v_hi, "V")
            )
        };
        let caption = format!(
            "`{}` {} to {}, {input}",
            s.id,
            s.kind_name(),
            fmt_eng(s.setpoint, "V")
        );
        let mut ch = ChartBuilder::on(panel)
            .caption(caption, ("sans-serif", ty.axis))
            .margin(pad / 2)
            .margin_top(pad)
            .margin_right(pad)
            .x_label_area_size((ty.body * 3.4) as u32)
            .y_label_area_size((ty.body * 3.6) as u32)
            .build_cartesian_2d((I_MIN..x_hi).log_scale(), 0.0..100.0)?;
        ch.configure_mesh()
            .light_line_style(MESH_LIGHT)
            .bold_line_style(MESH_BOLD)
            .x_desc("output current (A, log scale)")
            .y_desc("efficiency (%)")
            .axis_desc_style(("sans-serif", ty.axis))
            .label_style(("sans-serif", ty.body))
            .x_label_formatter(&|x| short_eng(*x, "A"))
            .y_label_formatter(&|v| format!("{v:.0}"))
            .y_labels(6)
            .draw()?;
        self.draw_model(root, &mut ch, k, (v_lo, v_hi), (tab, x_hi), ty)?;
        draw_points(root, &ch, &ops, x_hi, ty)
    }

    /// Stage `k`'s efficiency model up to `x_hi` at the lowest input voltage (solid) and, when
    /// it differs, the highest (dashed); a guide where its table (up to `tab`, A) ends.
    fn draw_model<DB: DrawingBackend>(
        &self,
        root: &Canvas<DB>,
        ch: &mut LogChart<'_, DB>,
        k: usize,
        (v_lo, v_hi): (f64, f64),
        (tab, x_hi): (f64, f64),
        ty: Type,
    ) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static,
    {
        let d = self.design;
        let curve = |vin: f64| -> Vec<(f64, f64)> {
            (0..=STEPS)
                .map(|j| {
                    let i = I_MIN * (x_hi / I_MIN).powf(j as f64 / STEPS as f64);
                    (i, model_eta(d, k, vin, i))
                })
                .collect()
        };
        ch.draw_series(LineSeries::new(curve(v_lo), BLUE.stroke_width(2)))?;
        let same = (v_hi - v_lo).abs() < 1e-3;
        if !same {
            ch.draw_series(DashedLineSeries::new(
                curve(v_hi),
                12,
                6,
                VERMILLION.stroke_width(2),
            ))?;
        }
        if tab > 0.0 && tab < x_hi {
            // Beyond the highest tabulated current the curve is held, not measured.
            let a = ch.backend_coord(&(tab, 100.0));
            let b = ch.backend_coord(&(tab, 0.0));
            pixel_line(root, vec![a, b], GREY, 1, Dash::Medium)?;
            label(
                root,
                "table ends",
                (a.0 - 4, a.1 + 4),
                &text(ty.scaled(0.9), GREY, HPos::Right, VPos::Top),
            )?;
        }
        Ok(())
    }
}

/// Each mode's operating point `(j, (current, efficiency %, regulating))` as mode `j`'s mark,
/// hollow when not regulating; modes at the same point sit side by side rather than hide each
/// other. A stage off in every mode says so.
fn draw_points<DB: DrawingBackend>(
    root: &Canvas<DB>,
    ch: &LogChart<'_, DB>,
    ops: &[(usize, (f64, f64, bool))],
    x_hi: f64,
    ty: Type,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let r = (ty.body * 0.42) as i32;
    let mut drawn: Vec<(i32, i32)> = Vec::new();
    for (j, (i, eta, regulating)) in ops {
        let mut at = ch.backend_coord(&(i.clamp(I_MIN, x_hi), *eta));
        while drawn
            .iter()
            .any(|p| (p.0 - at.0).abs() < 2 * r && (p.1 - at.1).abs() < 2 * r)
        {
            at.0 += 2 * r + 2;
        }
        drawn.push(at);
        marker(root, at, Shape::nth(*j), r, series(j + 2), *regulating)?;
    }
    if ops.is_empty() {
        let at = ch.backend_coord(&(I_MIN * 3.0, 8.0));
        label(
            root,
            "off in every mode of the budget",
            at,
            &text(ty.body, GREY, HPos::Left, VPos::Bottom),
        )?;
    }
    Ok(())
}
