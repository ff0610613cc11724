//! A converter's losses: `efficiency` (a constant, a curve against output current, or curves
//! per input voltage) or `loss` (a drop and a resistance), the keys only switching stages take.

#[allow(clippy::wildcard_imports)]
use super::*;

impl Lower<'_> {
    /// The loss model of stage `s` of `kind`: none for a linear stage or a switch (which take no
    /// `efficiency` or `loss`), else exactly one of `loss` (drop and resistance terms) and
    /// `efficiency` (a constant, a curve or curves per input voltage); none after an error.
    pub(super) fn loss_model(
        &mut self,
        s: &StageSpec,
        kind: StageKind,
        path: &str,
    ) -> Option<LossModel> {
        if !kind.is_switching() {
            for (present, key) in [
                (s.efficiency.is_some(), "efficiency"),
                (s.loss.is_some(), "loss"),
            ] {
                if present {
                    self.err(
                        &format!("{path}.{key}"),
                        format!(
                            "a {} stage takes no `{key}`: its loss follows from its currents",
                            kind.name()
                        ),
                        Some(format!("remove `{key}`")),
                    );
                }
            }
            return Some(LossModel::None);
        }
        match (&s.efficiency, &s.loss) {
            (Some(_), Some(_)) => {
                self.err(
                    path,
                    format!(
                        "the {} stage `{}` has both `efficiency` and `loss`",
                        kind.name(),
                        s.id
                    ),
                    Some("keep exactly one of `efficiency` and `loss`".into()),
                );
                None
            }
            (None, None) => {
                self.err(
                    path,
                    format!("the {} stage `{}` has neither `efficiency` nor `loss`", kind.name(), s.id),
                    Some("add `efficiency: 90 %`, an efficiency curve, or `loss: { drop: 0.05 V, resistance: 0.2 Ω }`".into()),
                );
                None
            }
            (None, Some(l)) => {
                let drop = self.opt(
                    l.drop.as_ref(),
                    format_args!("{path}.loss.drop"),
                    Dim::Voltage,
                    Bound::AtLeastZero,
                );
                let r = self.opt(
                    l.resistance.as_ref(),
                    format_args!("{path}.loss.resistance"),
                    Dim::Resistance,
                    Bound::AtLeastZero,
                );
                Some(LossModel::Terms {
                    drop: drop?.unwrap_or(0.0),
                    resistance: r?.unwrap_or(0.0),
                })
            }
            (Some(Efficiency::Constant(q)), None) => self
                .fraction(q, format_args!("{path}.efficiency"), 0.0, false, 1.0)
                .map(LossModel::Constant),
            (Some(Efficiency::Curve(rows)), None) => {
                let c = self.curve(rows, &format!("{path}.efficiency"))?;
                Some(LossModel::Curves(vec![(None, c)]))
            }
            (Some(Efficiency::PerVin(list)), None) => self.per_vin_curves(list, path),
        }
    }

    /// Efficiency curves per input voltage (`efficiency: [{ vin, curve }, ...]`) of the stage at
    /// `path`, sorted by `vin`: at least one, each at its own input voltage.
    fn per_vin_curves(&mut self, list: &[VinCurveSpec], path: &str) -> Option<LossModel> {
        let mut curves = Vec::new();
        for (i, vc) in list.iter().enumerate() {
            let p = format!("{path}.efficiency[{i}]");
            let v = self.value(
                &vc.vin,
                format_args!("{p}.vin"),
                Dim::Voltage,
                Bound::AboveZero,
            );
            let c = self.curve(&vc.curve, &format!("{p}.curve"));
            if let (Some(v), Some(c)) = (v, c) {
                curves.push((Some(v), c));
            }
        }
        if curves.len() != list.len() {
            return None;
        }
        if curves.is_empty() {
            self.err(
                &format!("{path}.efficiency"),
                "the list of efficiency curves is empty",
                Some("give at least one `{ vin: 3 V, curve: [[1 mA, 75 %], [100 mA, 90 %]] }`, or a constant such as `90 %`".into()),
            );
            return None;
        }
        curves.sort_by(|a, b| a.0.unwrap_or(0.0).total_cmp(&b.0.unwrap_or(0.0)));
        if curves.windows(2).any(|w| w[0].0 == w[1].0) {
            self.err(
                &format!("{path}.efficiency"),
                "two efficiency curves are at the same input voltage",
                Some("keep one curve per `vin`".into()),
            );
            return None;
        }
        Some(LossModel::Curves(curves))
    }

    /// An efficiency curve at `path`: rows `[output current, efficiency]`, every row checked.
    pub(super) fn curve(&mut self, rows: &[Vec<Qty>], path: &str) -> Option<EffCurve> {
        let mut pts = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            if row.len() != 2 {
                self.err(
                    &format!("{path}[{i}]"),
                    format!("a row has {} values, not 2", row.len()),
                    Some(
                        "write each row as `[output current, efficiency]`, e.g. `[10 mA, 84 %]`"
                            .into(),
                    ),
                );
                ok = false;
                continue;
            }
            let i_out = self.value(
                &row[0],
                format_args!("{path}[{i}][0]"),
                Dim::Current,
                Bound::AboveZero,
            );
            let eta = self.fraction(&row[1], format_args!("{path}[{i}][1]"), 0.0, false, 1.0);
            match (i_out, eta) {
                (Some(a), Some(b)) => pts.push((a, b)),
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        match EffCurve::new(&pts) {
            Ok(c) => Some(c),
            Err(e) => {
                self.err(
                    path,
                    e,
                    Some(
                        "give each output current once, e.g. `[[1 mA, 72 %], [10 mA, 84 %]]`"
                            .into(),
                    ),
                );
                None
            }
        }
    }
}
