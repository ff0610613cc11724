//! The `tolerances:` block: each path resolved to the value of the checked design it varies
//! ([`Knob`], in `knob_path.rs`), each spread read in that value's unit ([`Dist`]).

use super::knob_path::knob;
#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::tolerance::{Dist, Knob, Tolerance};
use crate::spec::ToleranceSpec;
use crate::units::parse_fraction;

/// Most values a design may vary.
pub(crate) const MAX_TOLERANCES: usize = 200;
/// Most choices of one `pick`.
const MAX_PICKS: usize = 1000;

impl Lower<'_> {
    /// Every tolerance of `spec` against the checked design `d`.
    pub(super) fn tolerances(&mut self, spec: &DesignSpec, d: &Design) -> Option<Vec<Tolerance>> {
        if spec.tolerances.len() > MAX_TOLERANCES {
            self.err(
                "tolerances",
                format!(
                    "{} values vary; at most {MAX_TOLERANCES} can",
                    spec.tolerances.len()
                ),
                Some("keep the values that matter most".into()),
            );
            return None;
        }
        let pack_cell = match &spec.battery.cell {
            CellRef::Name(n) => n.as_str(),
            CellRef::Inline(_) => d.pack.cell.name.as_str(),
        };
        let mut out: Vec<Tolerance> = Vec::new();
        let mut ok = true;
        for (path, t) in &spec.tolerances {
            let at = format!("tolerances.{path}");
            let knob = match knob(d, pack_cell, path) {
                Ok(k) => k,
                Err((msg, hint)) => {
                    self.err_of(DiagnosticKind::UnknownPath, &at, msg, Some(hint));
                    ok = false;
                    continue;
                }
            };
            if let Some(other) = out.iter().find(|o| o.knob == knob) {
                self.err(
                    &at,
                    format!("`{path}` names the same value as `{}`", other.path),
                    Some("keep one of the two lines".into()),
                );
                ok = false;
                continue;
            }
            let nominal = knob.get(d);
            if !nominal.is_finite() {
                self.err(
                    &at,
                    format!("`{path}` has no single value in this design to vary"),
                    Some(knob.absent_hint().unwrap_or("a curve or table cannot vary as one number; vary a value the design gives as one number (a constant efficiency, `loss.drop`, a polarization the cell has)").into()),
                );
                ok = false;
                continue;
            }
            match self.dist(t, &knob, d, nominal, &at) {
                Some(dist) => out.push(Tolerance {
                    path: path.clone(),
                    knob,
                    dist,
                    nominal,
                }),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    /// A value of a spread in the knob's unit (`relative`: a percentage is of `of`).
    fn spread_value(&mut self, q: &Qty, dim: Dim, of: Option<f64>, at: &str) -> Option<f64> {
        let text = q.text().trim();
        if let Some(of) = of.filter(|_| text.ends_with('%')) {
            return match parse_fraction(text) {
                Ok(f) => Some(f * of.abs()),
                Err(e) => {
                    self.err(at, e.to_string(), e.hint());
                    None
                }
            };
        }
        // A temperature band in kelvin is a difference, not an absolute temperature.
        if dim == Dim::Temperature && of.is_some() && text.ends_with('K') {
            return self.quantity(q, at, &[dim]).map(|v| v.value() + 273.15);
        }
        self.quantity(q, at, &[dim]).map(Quantity::value)
    }

    /// The spread `t` of a value `knob` of `d` (nominal `nominal`) in the value's unit: its
    /// values read and checked, those it gives as its own within the value's physical range.
    fn dist(
        &mut self,
        t: &ToleranceSpec,
        knob: &Knob,
        d: &Design,
        nominal: f64,
        at: &str,
    ) -> Option<Dist> {
        let dim = knob.dim(d);
        let dist = self.spread_dist(t, dim, nominal, at)?;
        self.own_values_physical(t, &dist, knob.range(), dim, at)
            .then_some(dist)
    }

    /// The spread `t` read in the unit of `dim`: a band `±x` around `nominal` (a normal with
    /// sigma a third of it), a normal, a uniform between two bounds or a pick among choices.
    fn spread_dist(&mut self, t: &ToleranceSpec, dim: Dim, nominal: f64, at: &str) -> Option<Dist> {
        Some(match t {
            ToleranceSpec::Band(q) => {
                let band = self.spread_value(q, dim, Some(nominal), at)?;
                if band.is_nan() || band <= 0.0 {
                    self.err(
                        at,
                        format!("the band `±{}` varies nothing", q.text()),
                        Some("give a band above zero, or remove the line".into()),
                    );
                    return None;
                }
                Dist::Normal {
                    mean: nominal,
                    sigma: band / 3.0,
                }
            }
            ToleranceSpec::Normal { mean, sigma } => {
                let mean = self.spread_value(mean, dim, None, at)?;
                let sigma = self.spread_value(sigma, dim, Some(mean), at)?;
                if sigma.is_nan() || sigma <= 0.0 {
                    self.err(
                        at,
                        "`sigma` must be above zero",
                        Some(
                            "give the standard deviation, e.g. `sigma: 4 mA` or `sigma: 5 %`"
                                .into(),
                        ),
                    );
                    return None;
                }
                Dist::Normal { mean, sigma }
            }
            ToleranceSpec::Uniform(b) => {
                if b.len() != 2 {
                    self.err(
                        at,
                        format!("a uniform spread has two bounds, found {}", b.len()),
                        Some("write `[LOW, HIGH]`, e.g. `[18 µA, 35 µA]`".into()),
                    );
                    return None;
                }
                let lo = self.spread_value(&b[0], dim, None, at)?;
                let hi = self.spread_value(&b[1], dim, None, at)?;
                if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
                    self.err(at, format!("the bounds `[{}, {}]` are not low then high", b[0].text(), b[1].text()), Some("write the lower bound first; for a fixed value, change the design instead".into()));
                    return None;
                }
                Dist::Uniform { lo, hi }
            }
            ToleranceSpec::Pick(v) => {
                if v.is_empty() || v.len() > MAX_PICKS {
                    self.err(
                        at,
                        format!("a pick has 1 to {MAX_PICKS} choices, found {}", v.len()),
                        Some("list the values, e.g. `{ pick: [1 h, 2 h, 4 h] }`".into()),
                    );
                    return None;
                }
                let mut out = Vec::with_capacity(v.len());
                for q in v {
                    out.push(self.spread_value(q, dim, None, at)?);
                }
                Dist::Pick(out)
            }
        })
    }

    /// Whether the values spread `t` gives as its own (a mean, bounds, choices; read into
    /// `dist`) are physical: within `range`, and whole where the value is; each problem
    /// reported.
    fn own_values_physical(
        &mut self,
        t: &ToleranceSpec,
        dist: &Dist,
        range: crate::model::Range,
        dim: Dim,
        at: &str,
    ) -> bool {
        // The values a spread gives as its own (a mean, bounds, choices) must be physical.
        let (own, texts): (Vec<f64>, Vec<&str>) = match (dist, t) {
            (Dist::Normal { mean, .. }, ToleranceSpec::Normal { mean: q, .. }) => {
                (vec![*mean], vec![q.text()])
            }
            (Dist::Uniform { lo, hi }, ToleranceSpec::Uniform(q)) => {
                (vec![*lo, *hi], q.iter().map(Qty::text).collect())
            }
            (Dist::Pick(v), ToleranceSpec::Pick(q)) => {
                (v.clone(), q.iter().map(Qty::text).collect())
            }
            _ => (Vec::new(), Vec::new()),
        };
        if let Some(k) = own.iter().position(|v| !range.contains(*v)) {
            self.err(
                at,
                format!(
                    "`{}` is outside what this value can be: it {}",
                    texts[k],
                    range_words(range, dim)
                ),
                Some("give values the design could have".into()),
            );
            return false;
        }
        if range.whole && own.iter().any(|v| v.fract() != 0.0) {
            self.err(
                at,
                "this value is a whole number",
                Some("give whole numbers, e.g. `{ pick: [1, 2] }`".into()),
            );
            return false;
        }
        true
    }
}

/// What a range allows, in words and in the value's unit.
fn range_words(r: crate::model::Range, dim: Dim) -> String {
    let show = |v: f64| match dim {
        Dim::Fraction => fmt_percent(v),
        Dim::Temperature => crate::units::fmt_celsius(v),
        Dim::Number => format!("{v}"),
        _ => fmt_eng(v, ""),
    };
    match (r.lo == 0.0, r.lo_closed, r.hi >= f64::MAX) {
        (true, true, true) => "cannot be negative".into(),
        (true, false, true) => "must be above zero".into(),
        (_, closed, true) => format!(
            "must be {} {}",
            if closed { "at least" } else { "above" },
            show(r.lo)
        ),
        (_, closed, false) => format!(
            "must be {} {} and at most {}",
            if closed { "at least" } else { "above" },
            show(r.lo),
            show(r.hi)
        ),
    }
}
