//! The fit itself: OCV and resistance against state of charge from curves at several currents.

use super::fitted::{CurveFit, Fit, Residual, SocPoint};
use super::peukert::{RateFit, fit_rate};
use super::{Curve, FitError, FitOptions, peukert_factor};
use crate::model::{Chemistry, Table};
use crate::units::{fmt_eng, fmt_percent};

/// How far (in SoC) a grid point may lie outside the data and still be fitted, each curve
/// extended along its end segment; edges of the data closer than this to a grid point are not
/// added as points of their own.
const EDGE_TOL: f64 = 0.002;
/// Least SoC range the curves must share.
const MIN_SPAN: f64 = 0.1;
/// OCV changes below this (V) by the monotone smoothing are not reported.
const ADJUST_TOL: f64 = 1e-4;
/// How far past empty (in SoC) a curve's point may run and still count, evaluated at 0 %: the
/// rounding of digitized capacities.
const PAST_TOL: f64 = 1e-3;
/// Relative capacity mismatch (fitted cell or capacity law against a curve) that is reported.
const CAPACITY_TOL: f64 = 0.02;

/// Fits a cell to discharge curves of one cell at two or more different constant currents.
///
/// # Errors
///
/// Fewer than two curves or two different currents, options out of range, a Peukert exponent
/// above 2, curves that share less than 10 % of SoC, or a cutoff not below the full-charge OCV.
pub fn fit(curves: &[Curve], opts: &FitOptions) -> Result<Fit, FitError> {
    check_inputs(curves, opts)?;
    let lowest = curves
        .iter()
        .map(Curve::current_a)
        .fold(f64::INFINITY, f64::min);
    let rated = opts.rated_current_a.unwrap_or(lowest);
    let caps: Vec<(f64, f64)> = curves
        .iter()
        .map(|c| (c.current_a(), c.capacity_c()))
        .collect();
    let RateFit { q_c, k, raw_k } = fit_rate(&caps, rated)?;
    let highest = curves.iter().map(Curve::current_a).fold(0.0, f64::max);
    let warnings = rate_warnings(raw_k, lowest, highest);
    // s = 1 - q per_c[j] for curve j.
    let per_c: Vec<f64> = curves
        .iter()
        .map(|c| peukert_factor(c.current_a(), rated, k) / q_c)
        .collect();
    let (starts, ends, lo, hi) = shared_span(curves, &per_c)?;
    let grid = soc_grid(opts.soc_step);
    let mut rows = fit_rows(curves, &per_c, &grid, lo, hi)?;
    extrapolate(&mut rows, &grid);
    let adjusted = make_monotone(&mut rows);
    for p in &mut rows {
        p.ocv_v = p.ocv_v.max(1e-3);
    }
    check_conditioning(curves, &rows, lowest, highest)?;
    let (Some(ocv), Some(resistance)) = (
        table(&rows, |p| p.ocv_v),
        table(&rows, |p| p.resistance_ohm),
    ) else {
        return Err(FitError::new(
            "",
            "the fitted tables are not valid: SoC points repeat",
        ));
    };
    let cutoff_v = fitted_cutoff(curves, opts, &ocv)?;
    let mut f = Fit {
        capacity_c: q_c,
        rated_current_a: rated,
        peukert: k,
        cutoff_v,
        chemistry: opts.chemistry.unwrap_or(Chemistry::Other),
        table: rows,
        soc_min: lo,
        soc_max: hi,
        curves: Vec::new(),
        residual: Residual::default(),
        warnings,
        ocv,
        resistance,
    };
    score_curves(&mut f, curves, &per_c, (&starts, &ends));
    note_table(&mut f, adjusted);
    note_capacities(&mut f);
    Ok(f)
}

/// An error where the fitted open-circuit voltage runs above twice the highest voltage the
/// curves hold: the resistance and the OCV were not separated (currents too close, or voltages
/// that do not fall with current), and the extrapolation blew up. A cell's OCV is its loaded
/// voltage plus R I; twice the loaded voltage would mean half the voltage lost inside it at
/// the curves' currents (common practice, no source).
fn check_conditioning(
    curves: &[Curve],
    rows: &[SocPoint],
    lowest: f64,
    highest: f64,
) -> Result<(), FitError> {
    let v_max = curves
        .iter()
        .flat_map(|c| c.points().iter().map(|p| p.1))
        .fold(0.0, f64::max);
    let ocv_max = rows.iter().map(|p| p.ocv_v).fold(0.0, f64::max);
    if ocv_max.is_finite() && ocv_max <= 2.0 * v_max {
        return Ok(());
    }
    Err(FitError::new(
        "",
        format!(
            "the fitted open-circuit voltage reaches {}, over twice the curves' highest voltage {}: the curves at {} to {} do not separate the resistance from the open-circuit voltage",
            fmt_eng(ocv_max, "V"),
            fmt_eng(v_max, "V"),
            fmt_eng(lowest, "A"),
            fmt_eng(highest, "A")
        ),
    )
    .with_hint("give curves at currents at least 1.5 times apart whose voltages fall with current"))
}

/// The warnings on the capacity law: capacities that rise with current (a raw exponent
/// `raw_k` below 1), and currents from `lowest` to `highest`, A, too close to determine it.
fn rate_warnings(raw_k: f64, lowest: f64, highest: f64) -> Vec<String> {
    let mut warnings = Vec::new();
    if raw_k < 1.0 - 1e-6 {
        warnings.push(format!(
            "the capacities rise with current (Peukert exponent {raw_k:.3}); k is held at 1 and the capacity is their geometric mean"
        ));
    }
    if highest / lowest < 1.5 {
        warnings.push(format!(
            "the currents differ by less than a factor of 1.5 ({} to {}); k and the resistance are poorly determined",
            fmt_eng(lowest, "A"),
            fmt_eng(highest, "A")
        ));
    }
    warnings
}

/// The cutoff: the one given, else the lowest final voltage of the curves; an error when it
/// is not below the fitted full-charge OCV.
fn fitted_cutoff(curves: &[Curve], opts: &FitOptions, ocv: &Table) -> Result<f64, FitError> {
    let cutoff_v = opts.cutoff_v.unwrap_or_else(|| {
        curves
            .iter()
            .map(Curve::final_v)
            .fold(f64::INFINITY, f64::min)
    });
    // A millivolt of margin, so that the rounded values keep the cutoff below the full OCV.
    if cutoff_v + 1e-3 > ocv.at(1.0) {
        return Err(FitError::new(
            "",
            format!(
                "the cutoff {} is not below the fitted full-charge OCV {}",
                fmt_eng(cutoff_v, "V"),
                fmt_eng(ocv.at(1.0), "V")
            ),
        )
        .with_hint("give a lower cutoff, the end-of-discharge voltage under load"));
    }
    Ok(cutoff_v)
}

/// Each curve against the fit `f` (curve `j` from `starts[j]` to `ends[j]` in the fitted
/// capacity law): its fit, the residuals over all curves, and a warning for a curve with
/// points past empty.
fn score_curves(f: &mut Fit, curves: &[Curve], per_c: &[f64], (starts, ends): (&[f64], &[f64])) {
    let mut all = Vec::new();
    for (j, c) in curves.iter().enumerate() {
        let (cf, errors, past) = curve_fit(f, c, per_c[j], starts[j], ends[j]);
        all.extend(errors);
        if past > 0 {
            f.warnings.push(format!(
                "curve `{}`: {past} points run past empty ({} below 0 %) in the fitted capacity law and are left out of the residuals",
                c.name(),
                fmt_percent(-ends[j])
            ));
        }
        f.curves.push(cf);
    }
    f.residual = Residual::from_errors(&all);
}

/// Where the curves start and end in the fitted capacity law (SoC, each curve), and the range
/// of SoC they all cover.
fn shared_span(
    curves: &[Curve],
    per_c: &[f64],
) -> Result<(Vec<f64>, Vec<f64>, f64, f64), FitError> {
    let starts: Vec<f64> = curves
        .iter()
        .zip(per_c)
        .map(|(c, p)| 1.0 - c.first_c() * p)
        .collect();
    let ends: Vec<f64> = curves
        .iter()
        .zip(per_c)
        .map(|(c, p)| 1.0 - c.capacity_c() * p)
        .collect();
    // Ends within a micro-SoC of full or empty are rounding of the digitized capacities.
    let snap = |s: f64| {
        if s < 1e-6 {
            0.0
        } else if s > 1.0 - 1e-6 {
            1.0
        } else {
            s
        }
    };
    let hi = snap(starts.iter().fold(1.0, |m: f64, &s| m.min(s)));
    let lo = snap(ends.iter().fold(0.0, |m: f64, &s| m.max(s)));
    if hi - lo < MIN_SPAN {
        return Err(FitError::new(
            "",
            format!(
                "the curves share only the SoC range {} to {} in the fitted capacity law",
                fmt_percent(lo),
                fmt_percent(hi.max(lo))
            ),
        )
        .with_hint("give curves that each run from full to the end of discharge"));
    }
    Ok((starts, ends, lo, hi))
}

/// The OCV and resistance at each SoC of `grid` within `lo..hi` (and at the edges), each by
/// least squares across the curves' voltages at that SoC.
fn fit_rows(
    curves: &[Curve],
    per_c: &[f64],
    grid: &[f64],
    lo: f64,
    hi: f64,
) -> Result<Vec<SocPoint>, FitError> {
    let mut fitted: Vec<f64> = grid
        .iter()
        .copied()
        .filter(|&s| s >= lo - EDGE_TOL && s <= hi + EDGE_TOL)
        .collect();
    for edge in [lo, hi] {
        if grid.iter().all(|g| (g - edge).abs() >= EDGE_TOL) {
            fitted.push(edge);
        }
    }
    fitted.sort_by(f64::total_cmp);
    let currents: Vec<f64> = curves.iter().map(Curve::current_a).collect();
    let rows: Vec<SocPoint> = fitted
        .iter()
        .map(|&s| {
            let volts: Vec<f64> = curves
                .iter()
                .zip(per_c)
                .map(|(c, p)| c.voltage_at((1.0 - s) / p))
                .collect();
            let (ocv_v, resistance_ohm, clamped) = least_squares(&currents, &volts);
            SocPoint {
                soc: s,
                ocv_v,
                resistance_ohm,
                extrapolated: false,
                resistance_clamped: clamped,
                ocv_adjusted: false,
            }
        })
        .collect();
    if rows.len() < 2
        || rows
            .iter()
            .any(|p| !(p.ocv_v.is_finite() && p.resistance_ohm.is_finite()))
    {
        return Err(FitError::new(
            "",
            "the curves give no usable OCV and resistance (too few SoC points or numbers out of range)",
        )
        .with_hint("check the currents and the capacity and voltage units of the curves"));
    }
    Ok(rows)
}

fn check_inputs(curves: &[Curve], opts: &FitOptions) -> Result<(), FitError> {
    let hint = "add a discharge curve of the same cell at another current, such as 0.2 C and 1 C";
    match curves {
        [] => return Err(FitError::new("", "no curves given").with_hint(hint)),
        [one] => {
            return Err(FitError::new(
                one.name(),
                format!(
                    "only one curve (at {}): the fit needs two or more curves at different currents",
                    fmt_eng(one.current_a(), "A")
                ),
            )
            .with_hint(hint));
        }
        _ => {}
    }
    let first = curves[0].current_a();
    if curves
        .iter()
        .all(|c| (c.current_a() - first).abs() <= 1e-9 * first)
    {
        return Err(FitError::new(
            "",
            format!(
                "every curve is at the same current {}: the fit needs two or more different currents",
                fmt_eng(first, "A")
            ),
        )
        .with_hint(hint));
    }
    if !(0.005..=0.5).contains(&opts.soc_step) {
        return Err(FitError::new(
            "",
            format!(
                "the SoC step {} is outside 0.5 % to 50 %",
                fmt_percent(opts.soc_step)
            ),
        ));
    }
    for (what, v) in [
        ("rated current", opts.rated_current_a),
        ("cutoff", opts.cutoff_v),
    ] {
        if v.is_some_and(|x| !(x.is_finite() && x > 0.0)) {
            return Err(FitError::new("", format!("the {what} must be above zero")));
        }
    }
    Ok(())
}

/// 0, step, 2 step, ... below 1, and 1.
fn soc_grid(step: f64) -> Vec<f64> {
    let mut g = Vec::new();
    let mut i = 0.0;
    loop {
        let s = (i * step * 1e9).round() / 1e9;
        if s >= 1.0 - 1e-9 {
            break;
        }
        g.push(s);
        i += 1.0;
    }
    g.push(1.0);
    g
}

/// OCV and R from V_j = OCV - I_j R by least squares; a negative R is held at 0 (then OCV is
/// the mean voltage). Returns (OCV, R, clamped).
fn least_squares(currents: &[f64], volts: &[f64]) -> (f64, f64, bool) {
    let n = currents.len() as f64;
    let im = currents.iter().sum::<f64>() / n;
    let vm = volts.iter().sum::<f64>() / n;
    let sii: f64 = currents.iter().map(|i| (i - im).powi(2)).sum();
    let siv: f64 = currents
        .iter()
        .zip(volts)
        .map(|(i, v)| (i - im) * (v - vm))
        .sum();
    let r = -siv / sii;
    if r < 0.0 {
        (vm, 0.0, true)
    } else {
        (vm + r * im, r, false)
    }
}

/// Adds the grid points outside the fitted range: OCV along the line through the two nearest
/// fitted points (never falling outward, never below 1 mV), resistance held.
fn extrapolate(rows: &mut Vec<SocPoint>, grid: &[f64]) {
    let n = rows.len();
    let (first, last) = (rows[0].soc, rows[n - 1].soc);
    let slope = |a: &SocPoint, b: &SocPoint| ((b.ocv_v - a.ocv_v) / (b.soc - a.soc)).max(0.0);
    let low_slope = slope(&rows[0], &rows[1]);
    let high_slope = slope(&rows[n - 2], &rows[n - 1]);
    let mut extra = Vec::new();
    for &s in grid {
        let from = if s < first - 1e-12 {
            (&rows[0], low_slope)
        } else if s > last + 1e-12 {
            (&rows[n - 1], high_slope)
        } else {
            continue;
        };
        let (p, slope) = from;
        extra.push(SocPoint {
            soc: s,
            ocv_v: (p.ocv_v + slope * (s - p.soc)).max(1e-3),
            resistance_ohm: p.resistance_ohm,
            extrapolated: true,
            resistance_clamped: p.resistance_clamped,
            ocv_adjusted: false,
        });
    }
    rows.extend(extra);
    rows.sort_by(|a, b| a.soc.total_cmp(&b.soc));
}

/// Makes the OCV column non-decreasing by the least-squares monotone fit (pooling adjacent
/// violators); returns the largest change, V.
fn make_monotone(rows: &mut [SocPoint]) -> f64 {
    let mut blocks: Vec<(f64, usize)> = Vec::new();
    for p in rows.iter() {
        blocks.push((p.ocv_v, 1));
        while blocks.len() > 1 {
            let (s1, n1) = blocks[blocks.len() - 1];
            let (s0, n0) = blocks[blocks.len() - 2];
            if s0 / n0 as f64 <= s1 / n1 as f64 {
                break;
            }
            blocks.pop();
            let top = blocks.len() - 1;
            blocks[top] = (s0 + s1, n0 + n1);
        }
    }
    let mut worst: f64 = 0.0;
    let mut i = 0;
    for (sum, n) in blocks {
        let mean = sum / n as f64;
        for p in &mut rows[i..i + n] {
            let change = (mean - p.ocv_v).abs();
            if n > 1 {
                p.ocv_adjusted = change > ADJUST_TOL;
                p.ocv_v = mean;
            }
            worst = worst.max(change);
        }
        i += n;
    }
    worst
}

fn table(rows: &[SocPoint], y: impl Fn(&SocPoint) -> f64) -> Option<Table> {
    Table::new(rows.iter().map(|p| (p.soc, y(p))).collect()).ok()
}

/// The fit of one curve, its voltage errors, and how many points run past empty.
fn curve_fit(f: &Fit, c: &Curve, per_c: f64, start: f64, end: f64) -> (CurveFit, Vec<f64>, usize) {
    let mut errors = Vec::new();
    let mut past = 0;
    for &(q, v) in c.points() {
        let s = 1.0 - q * per_c;
        if s < -PAST_TOL {
            past += 1;
        } else {
            errors.push(v - f.voltage_at(s.max(0.0), c.current_a()));
        }
    }
    let cf = CurveFit {
        name: c.name().to_string(),
        current_a: c.current_a(),
        capacity_c: c.capacity_c(),
        law_capacity_c: 1.0 / per_c,
        model_capacity_c: f.delivered_c(c.current_a()),
        final_v: c.final_v(),
        soc_start: start,
        soc_end: end,
        residual: Residual::from_errors(&errors),
    };
    (cf, errors, past)
}

fn list(socs: &[f64]) -> String {
    socs.iter()
        .map(|&s| fmt_percent(s))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Warnings about extrapolated, clamped and smoothed rows.
fn note_table(f: &mut Fit, adjusted: f64) {
    let pick = |keep: fn(&SocPoint) -> bool| -> Vec<f64> {
        f.table.iter().filter(|p| keep(p)).map(|p| p.soc).collect()
    };
    let extrapolated = pick(|p| p.extrapolated);
    let clamped = pick(|p| p.resistance_clamped && !p.extrapolated);
    let smoothed = pick(|p| p.ocv_adjusted);
    if !extrapolated.is_empty() {
        f.warnings.push(format!(
            "the curves share SoC from {} to {} only; the rows at {} are extrapolated (OCV along the nearest fitted slope, resistance held)",
            fmt_percent(f.soc_min),
            fmt_percent(f.soc_max),
            list(&extrapolated)
        ));
    }
    if !clamped.is_empty() {
        f.warnings.push(format!(
            "the fit gives a negative resistance at {} (a higher current gave a higher voltage there); held at 0: check the curves",
            list(&clamped)
        ));
    }
    if !smoothed.is_empty() {
        f.warnings.push(format!(
            "the fitted OCV falls as SoC rises near {} (by up to {}); those rows are levelled to keep the table non-decreasing",
            list(&smoothed),
            fmt_eng(adjusted, "V")
        ));
    }
}

/// Warnings where the capacity law or the fitted cell misses a curve's capacity.
fn note_capacities(f: &mut Fit) {
    let mut notes = Vec::new();
    for c in &f.curves {
        let law = c.law_capacity_c / c.capacity_c - 1.0;
        if law.abs() > CAPACITY_TOL {
            notes.push(format!(
                "curve `{}`: the fitted capacity law gives {} at {}, {} {} the curve",
                c.name,
                fmt_eng(c.law_capacity_c / 3600.0, "Ah"),
                fmt_eng(c.current_a, "A"),
                fmt_percent(law.abs()),
                if law > 0.0 { "above" } else { "below" }
            ));
        }
        let model = c.model_capacity_c / c.capacity_c - 1.0;
        if model < -CAPACITY_TOL {
            notes.push(format!(
                "curve `{}`: at {} the fitted cell reaches the cutoff {:.3} V after {}, {} short of the curve's {}",
                c.name,
                fmt_eng(c.current_a, "A"),
                f.cutoff_v,
                fmt_eng(c.model_capacity_c / 3600.0, "Ah"),
                fmt_percent(-model),
                fmt_eng(c.capacity_c / 3600.0, "Ah")
            ));
        }
    }
    f.warnings.extend(notes);
}
