//! The keys of a cell, each checked: open-circuit voltage, capacity, resistance, cutoff,
//! polarization, Peukert exponent, pulse limit, self-discharge, size and temperature table.

use super::cell::chemistry;
#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::SelfDischargeLaw;
use crate::spec::SelfDischargeSpec;

/// The temperature of a self-discharge rate given without one, °C (the reference of the
/// presets' other values).
const REFERENCE_C: f64 = 25.0;

impl Lower<'_> {
    /// Report that cell `name` at `path` lacks `key`, with an `example` value to add.
    fn missing_key(&mut self, path: &str, name: &str, key: &str, example: &str) {
        self.err(
            path,
            format!("cell `{name}` has no `{key}`"),
            Some(format!("add `{key}: {example}`")),
        );
    }

    /// Cell `name`'s open-circuit voltage table (`ocv`, required): `Some(None)` when missing or
    /// unreadable; `None` when it falls as the state of charge rises, which stops the cell's
    /// checks.
    #[allow(clippy::option_option)]
    pub(super) fn cell_ocv(
        &mut self,
        name: &str,
        c: &CellSpec,
        path: &str,
    ) -> Option<Option<Table>> {
        let Some(rows) = &c.ocv else {
            self.missing_key(path, name, "ocv", "[[0 %, 3.0 V], [100 %, 4.2 V]]");
            return Some(None);
        };
        let t = self.soc_table(rows, &format!("{path}.ocv"), Dim::Voltage, Bound::AboveZero);
        if let Some(t) = &t {
            if !t.is_non_decreasing() {
                self.err(
                    &format!("{path}.ocv"),
                    format!("the open-circuit voltage of cell `{name}` falls as the state of charge rises"),
                    Some("check the rows for a typing error: OCV must not fall from one SoC to a higher one".into()),
                );
                return None;
            }
        }
        Some(t)
    }

    /// Cell `name`'s capacity as charge, C (`capacity`, required, above zero): a capacity in Wh
    /// becomes charge through the mean of `ocv` over the full range.
    pub(super) fn cell_capacity(
        &mut self,
        name: &str,
        c: &CellSpec,
        path: &str,
        ocv: Option<&Table>,
    ) -> Option<f64> {
        let capacity = match &c.capacity {
            Some(q) => {
                match self.quantity(
                    q,
                    format_args!("{path}.capacity"),
                    &[Dim::Charge, Dim::Energy],
                ) {
                    Some(v) if v.value() > 0.0 => Some(v),
                    Some(_) => {
                        self.err(
                            &format!("{path}.capacity"),
                            "the capacity must be above zero",
                            Some("give the rated capacity, such as `600 mAh` or `2.2 Wh`".into()),
                        );
                        None
                    }
                    None => None,
                }
            }
            None => {
                self.missing_key(path, name, "capacity", "600 mAh");
                None
            }
        };
        match (capacity, ocv) {
            (Some(q), _) if q.dim() == Dim::Charge => Some(q.value()),
            (Some(q), Some(t)) => Some(q.value() / t.mean(0.0, 1.0)),
            _ => None,
        }
    }

    /// Cell `name`'s internal resistance (`resistance`, required): a constant or a table against
    /// the state of charge.
    pub(super) fn cell_resistance(
        &mut self,
        name: &str,
        c: &CellSpec,
        path: &str,
    ) -> Option<Table> {
        match &c.resistance {
            Some(ResistanceSpec::Constant(q)) => self
                .value(
                    q,
                    format_args!("{path}.resistance"),
                    Dim::Resistance,
                    Bound::AtLeastZero,
                )
                .map(Table::constant),
            Some(ResistanceSpec::Table(rows)) => self.soc_table(
                rows,
                &format!("{path}.resistance"),
                Dim::Resistance,
                Bound::AtLeastZero,
            ),
            None => {
                self.missing_key(path, name, "resistance", "150 mΩ");
                None
            }
        }
    }

    /// Cell `name`'s cutoff voltage (`cutoff`, required), which must be below the full-charge
    /// voltage of `ocv` (a cutoff at or above it is reported but still returned).
    pub(super) fn cell_cutoff(
        &mut self,
        name: &str,
        c: &CellSpec,
        path: &str,
        ocv: Option<&Table>,
    ) -> Option<f64> {
        let cutoff = match &c.cutoff {
            Some(q) => self.value(
                q,
                format_args!("{path}.cutoff"),
                Dim::Voltage,
                Bound::AboveZero,
            ),
            None => {
                self.missing_key(path, name, "cutoff", "3.0 V");
                None
            }
        };
        if let (Some(cut), Some(t)) = (cutoff, ocv) {
            if cut >= t.at(1.0) {
                self.err(
                    &format!("{path}.cutoff"),
                    format!(
                        "the cutoff {} is not below the full-charge OCV {}",
                        fmt_eng(cut, "V"),
                        fmt_eng(t.at(1.0), "V")
                    ),
                    Some("the cutoff is the end-of-discharge voltage under load".into()),
                );
            }
        }
        cutoff
    }

    /// A cell's polarization branch (`polarization: { resistance, time_constant }`): `Some(None)`
    /// without one, none after an error.
    #[allow(clippy::option_option)]
    pub(super) fn polarization(&mut self, c: &CellSpec, path: &str) -> Option<Option<(f64, f64)>> {
        let Some(p) = &c.polarization else {
            return Some(None);
        };
        let r = self.value(
            &p.resistance,
            format_args!("{path}.polarization.resistance"),
            Dim::Resistance,
            Bound::AtLeastZero,
        );
        let tau = self.value(
            &p.time_constant,
            format_args!("{path}.polarization.time_constant"),
            Dim::Time,
            Bound::AboveZero,
        );
        r.zip(tau).map(Some)
    }

    /// A cell's Peukert exponent (`peukert`, 1 by default, within [1, 2]).
    pub(super) fn peukert(&mut self, c: &CellSpec, path: &str) -> Option<f64> {
        let Some(q) = &c.peukert else {
            return Some(1.0);
        };
        match self.quantity(q, format_args!("{path}.peukert"), &[Dim::Number]) {
            Some(k) if (1.0..=2.0).contains(&k.value()) => Some(k.value()),
            Some(_) => {
                self.err(
                    &format!("{path}.peukert"),
                    format!("the Peukert exponent `{}` is outside [1, 2]", q.text()),
                    Some("typical values are 1.0 to 1.3; 1 means no rate effect".into()),
                );
                None
            }
            None => None,
        }
    }

    /// A cell's pulse limit: `max_pulse_current` with its `max_pulse_length`, both or neither,
    /// the pulse current at least the continuous one.
    pub(super) fn max_pulse(
        &mut self,
        c: &CellSpec,
        path: &str,
        continuous: Option<f64>,
    ) -> Option<Option<(f64, f64)>> {
        let current = self.opt(
            c.max_pulse_current.as_ref(),
            format_args!("{path}.max_pulse_current"),
            Dim::Current,
            Bound::AboveZero,
        )?;
        let length = self.opt(
            c.max_pulse_length.as_ref(),
            format_args!("{path}.max_pulse_length"),
            Dim::Time,
            Bound::AboveZero,
        )?;
        match (current, length) {
            (None, None) => Some(None),
            (Some(_), None) => {
                self.err(
                    &format!("{path}.max_pulse_current"),
                    "the cell gives `max_pulse_current` without `max_pulse_length`",
                    Some("add the longest pulse the limit allows, such as `max_pulse_length: 100 ms`".into()),
                );
                None
            }
            (None, Some(_)) => {
                self.err(
                    &format!("{path}.max_pulse_length"),
                    "the cell gives `max_pulse_length` without `max_pulse_current`",
                    Some("add the pulse limit, such as `max_pulse_current: 15 mA`, or remove the length".into()),
                );
                None
            }
            (Some(i), Some(t)) => match continuous {
                Some(max) if i < max => {
                    self.err(
                        &format!("{path}.max_pulse_current"),
                        format!(
                            "the pulse limit {} is below the continuous limit {}",
                            fmt_eng(i, "A"),
                            fmt_eng(max, "A")
                        ),
                        Some("a pulse may draw at least what the cell gives continuously: check both values".into()),
                    );
                    None
                }
                _ => Some(Some((i, t))),
            },
        }
    }

    /// A cell's self-discharge: its rate per second, the temperature of that rate (°C) and its
    /// law against temperature. A plain rate is held at every temperature (DESIGN section 5);
    /// a mapping gives the rate at `at` (25 °C by default) and follows `doubles_every`,
    /// `activation_energy` or, with neither, the chemistry's default.
    pub(super) fn self_discharge(
        &mut self,
        c: &CellSpec,
        path: &str,
    ) -> Option<(f64, f64, SelfDischargeLaw)> {
        let p = format!("{path}.self_discharge");
        let s = match &c.self_discharge {
            None => return Some((0.0, REFERENCE_C, SelfDischargeLaw::Constant)),
            Some(SelfDischargeSpec::Constant(q)) => {
                let rate = self.value(q, &p, Dim::Rate, Bound::AtLeastZero)?;
                return Some((rate, REFERENCE_C, SelfDischargeLaw::Constant));
            }
            Some(SelfDischargeSpec::AtTemperature(s)) => s,
        };
        let rate = self.value(
            &s.rate,
            format_args!("{p}.rate"),
            Dim::Rate,
            Bound::AtLeastZero,
        );
        let at = match &s.at {
            None => Some(REFERENCE_C),
            Some(q) => self.value(q, format_args!("{p}.at"), Dim::Temperature, Bound::Any),
        };
        let law = match (&s.doubles_every, &s.activation_energy) {
            (Some(_), Some(_)) => {
                self.err(
                    &p,
                    "the self-discharge gives both `doubles_every` and `activation_energy`",
                    Some("keep one of them: they are two ways to say the same dependence".into()),
                );
                None
            }
            (Some(q), None) => self
                .temperature_step(q, &format!("{p}.doubles_every"))
                .map(|every_k| SelfDischargeLaw::Doubling { every_k }),
            (None, Some(q)) => self
                .value(
                    q,
                    format_args!("{p}.activation_energy"),
                    Dim::MolarEnergy,
                    Bound::AboveZero,
                )
                .map(|ea_j_per_mol| SelfDischargeLaw::Arrhenius { ea_j_per_mol }),
            (None, None) => match chemistry(c.chemistry).self_discharge_doubling_k() {
                Some(every_k) => Some(SelfDischargeLaw::Doubling { every_k }),
                None => {
                    self.err(
                        &p,
                        "chemistry `other` has no default temperature dependence of self-discharge",
                        Some(
                            "give `doubles_every: 10 °C` or `activation_energy: 50 kJ/mol`, set \
the cell's `chemistry`, or write the rate alone (`self_discharge: 1 %/year`) to hold it at every \
temperature"
                                .into(),
                        ),
                    );
                    None
                }
            },
        };
        Some((rate?, at?, law?))
    }

    /// A rise in temperature (`10 °C` or `10 K`, the same step) from 1 to 100 °C.
    fn temperature_step(&mut self, q: &Qty, path: &str) -> Option<f64> {
        let v = self.quantity(q, path, &[Dim::Temperature])?.value();
        // The kelvin is read as a temperature (0 K = -273.15 °C); a step in kelvin is the same
        // number of degrees Celsius.
        let step = if q.text().trim_end().ends_with('K') {
            v + 273.15
        } else {
            v
        };
        if (1.0..=100.0).contains(&step) {
            Some(step)
        } else {
            self.err_of(
                DiagnosticKind::OutOfRange,
                path,
                format!("the step `{}` is outside 1 to 100 °C", q.text()),
                Some("give the rise in temperature that doubles the rate, such as `10 °C`".into()),
            );
            None
        }
    }

    /// A cell's outer size: two lengths (a cylinder's diameter and height) or three (a box's
    /// length, width and height), each above zero.
    pub(super) fn size(&mut self, lengths: Option<&[Qty]>, path: &str) -> Option<Option<CellSize>> {
        let Some(lengths) = lengths else {
            return Some(None);
        };
        if !matches!(lengths.len(), 2 | 3) {
            self.err(
                &format!("{path}.size"),
                format!("the size has {} values, not 2 or 3", lengths.len()),
                Some(
                    "give `[diameter, height]` of a cylinder, such as `[14.5 mm, 50.5 mm]`, or \
                     `[length, width, height]` of a pouch or prismatic cell"
                        .into(),
                ),
            );
            return None;
        }
        let mut v = Vec::with_capacity(3);
        for (i, q) in lengths.iter().enumerate() {
            v.push(self.value(
                q,
                format_args!("{path}.size[{i}]"),
                Dim::Length,
                Bound::AboveZero,
            ));
        }
        let v: Vec<f64> = v.into_iter().collect::<Option<_>>()?;
        Some(Some(match v[..] {
            [d, h] => CellSize::Cylinder {
                diameter_m: d,
                height_m: h,
            },
            [l, w, h] => CellSize::Box {
                length_m: l,
                width_m: w,
                height_m: h,
            },
            _ => return None,
        }))
    }

    /// A cell's `temperature` table: its capacity and resistance factors against temperature.
    pub(super) fn temperature(&mut self, c: &CellSpec, path: &str) -> Option<(Table, Table)> {
        let Some(rows) = &c.temperature else {
            return Some((Table::constant(1.0), Table::constant(1.0)));
        };
        let mut cap = Vec::new();
        let mut res = Vec::new();
        let mut ats = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            let p = format!("{path}.temperature[{i}]");
            let at = self.value(
                &row.at,
                format_args!("{p}.at"),
                Dim::Temperature,
                Bound::Any,
            );
            let cf = match &row.capacity {
                None => Some(None),
                Some(q) => self
                    .fraction(q, format_args!("{p}.capacity"), 0.0, false, 2.0)
                    .map(Some),
            };
            let rf = match &row.resistance {
                None => Some(None),
                Some(q) => self
                    .fraction(q, format_args!("{p}.resistance"), 0.0, false, 100.0)
                    .map(Some),
            };
            // A row that gives one factor only is a point of that factor's table alone: the
            // other follows its own rows there, not a reset to 100 %.
            match (at, cf, rf) {
                (Some(t), Some(cf), Some(rf)) => {
                    ats.push((t, 0.0));
                    cap.extend(cf.map(|f| (t, f)));
                    res.extend(rf.map(|f| (t, f)));
                }
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        let table = |points: Vec<(f64, f64)>| {
            if points.is_empty() {
                Ok(Table::constant(1.0))
            } else {
                Table::new(points)
            }
        };
        match (Table::new(ats), table(cap), table(res)) {
            (Ok(_), Ok(a), Ok(b)) => Some((a, b)),
            _ => {
                self.err(
                    &format!("{path}.temperature"),
                    "the temperature table is empty or gives the same temperature twice",
                    Some("keep one row per temperature".into()),
                );
                None
            }
        }
    }
}
