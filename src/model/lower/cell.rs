//! Cells and the pack: tables against state of charge, presets and their overrides, the
//! temperature table, series and parallel.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::pack::Buffer;
use crate::spec::BufferSpec;

impl Lower<'_> {
    pub(super) fn soc_table(
        &mut self,
        rows: &[Vec<Qty>],
        path: &str,
        dim: Dim,
        bound: Bound,
    ) -> Option<Table> {
        let mut pts = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            let p = format!("{path}[{i}]");
            if row.len() != 2 {
                self.err(
                    &p,
                    format!("a row has {} values, not 2", row.len()),
                    Some(format!("write each row as `[SoC, {}]`", dim.example())),
                );
                ok = false;
                continue;
            }
            let s = self.fraction(&row[0], format_args!("{p}[0]"), 0.0, true, 1.0);
            let v = self.value(&row[1], format_args!("{p}[1]"), dim, bound);
            match (s, v) {
                (Some(s), Some(v)) => pts.push((s, v)),
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        let has = |x: f64| pts.iter().any(|p| (p.0 - x).abs() < 1e-12);
        if !has(0.0) || !has(1.0) {
            self.err(
                path,
                "a state-of-charge table needs a point at 0 % and one at 100 %".to_string(),
                Some("add the missing end rows".into()),
            );
            return None;
        }
        let repeated = pts.iter().enumerate().find_map(|(i, a)| {
            pts[..i]
                .iter()
                .position(|b| b.0.total_cmp(&a.0).is_eq())
                .map(|j| (j, i, a.0))
        });
        match Table::new(pts) {
            Ok(t) => Some(t),
            Err(TableError::Repeated(_)) => {
                let (j, i, soc) = repeated.unwrap_or((0, 0, 0.0));
                self.err(
                    &format!("{path}[{i}]"),
                    format!(
                        "rows {j} and {i} of the table both give the state of charge {}",
                        fmt_percent(soc)
                    ),
                    Some("keep one row per SoC".into()),
                );
                None
            }
            Err(_) => {
                self.err(
                    path,
                    "the table is empty",
                    Some(format!(
                        "give rows `[SoC, {}]` from 0 % to 100 %",
                        dim.example()
                    )),
                );
                None
            }
        }
    }

    /// A cell: a custom one, or a built-in preset with the keys `c` gives overriding its own.
    pub(super) fn cell(&mut self, name: &str, c: &CellSpec, path: &str) -> Option<Cell> {
        let Some(p) = &c.preset else {
            return self.custom_cell(name, c, path);
        };
        let base = match presets::spec(p) {
            Some(Ok(base)) => base,
            Some(Err(message)) => {
                self.err(&format!("{path}.preset"), message, None);
                return None;
            }
            None => {
                self.err(
                    &format!("{path}.preset"),
                    format!("unknown cell preset `{p}`"),
                    Some(Preset::suggestion(p)),
                );
                return None;
            }
        };
        let merged = overlay(c, &base);
        let before = self.diags.len();
        let cell = self.custom_cell(name, &merged, path).map(|c| Cell {
            from_preset: true,
            ..c
        });
        // A problem with a value the preset gave (a rule across keys, such as the cutoff against
        // an overriding OCV table) says where that value came from.
        let given = given_keys(c);
        for d in &mut self.diags[before..] {
            let key = d
                .path()
                .strip_prefix(path)
                .unwrap_or("")
                .trim_start_matches('.')
                .split(['.', '['])
                .next()
                .unwrap_or("");
            if !key.is_empty() && !given.contains(&key) {
                *d = Diagnostic::new(
                    d.path(),
                    format!("{} (`{key}` comes from preset `{p}`)", d.message()),
                )
                .with_hint(match d.hint() {
                    Some(h) => format!("{h}; give `{key}:` here to replace the preset's"),
                    None => format!("give `{key}:` here to replace the preset's"),
                })
                .at(d.location());
            }
        }
        cell
    }

    /// A cell from its own keys (a custom cell, or a preset merged with its overrides).
    pub(super) fn custom_cell(&mut self, name: &str, c: &CellSpec, path: &str) -> Option<Cell> {
        let ocv = self.cell_ocv(name, c, path)?;
        let capacity_c = self.cell_capacity(name, c, path, ocv.as_ref());
        let resistance = self.cell_resistance(name, c, path);
        let cutoff = self.cell_cutoff(name, c, path, ocv.as_ref());
        let rated = match (&c.rated_current, capacity_c) {
            (Some(q), _) => self.value(
                q,
                format_args!("{path}.rated_current"),
                Dim::Current,
                Bound::AboveZero,
            ),
            (None, Some(cap)) => {
                Some(cap / (chemistry(c.chemistry).default_rating_hours() * 3600.0))
            }
            (None, None) => None,
        };
        let polarization = self.polarization(c, path);
        let peukert = self.peukert(c, path);
        let rate_window = self.opt(
            c.rate_window.as_ref(),
            format_args!("{path}.rate_window"),
            Dim::Time,
            Bound::AtLeastZero,
        );
        let max_current = self.opt(
            c.max_current.as_ref(),
            format_args!("{path}.max_current"),
            Dim::Current,
            Bound::AboveZero,
        );
        let max_pulse = self.max_pulse(c, path, max_current.flatten());
        let self_discharge = self.self_discharge(c, path);
        let mass = self.opt(
            c.mass.as_ref(),
            format_args!("{path}.mass"),
            Dim::Mass,
            Bound::AboveZero,
        );
        let size = self.size(c.size.as_deref(), path);
        let temps = self.temperature(c, path);
        let (temp_capacity, temp_resistance) = temps?;
        let self_discharge = self_discharge?;
        let chemistry = chemistry(c.chemistry);
        Some(Cell {
            name: name.to_string(),
            from_preset: false,
            chemistry,
            capacity_c: capacity_c?,
            rated_current_a: rated?,
            ocv: ocv?,
            resistance: resistance?,
            polarization: polarization?,
            peukert: peukert?,
            rate_window_s: rate_window?.unwrap_or_else(|| chemistry.rate_window_s()),
            cutoff_v: cutoff?,
            max_current_a: max_current?,
            max_pulse: max_pulse?,
            self_discharge_per_s: self_discharge.0,
            self_discharge_ref_c: self_discharge.1,
            self_discharge_law: self_discharge.2,
            temp_capacity,
            temp_resistance,
            mass_kg: mass?,
            size: size?,
        })
    }

    pub(super) fn pack(&mut self, spec: &DesignSpec, cell: Option<Cell>) -> Option<Pack> {
        let b = &spec.battery;
        let series = self.count(b.series.as_ref(), "battery.series", 1000);
        let parallel = self.count(b.parallel.as_ref(), "battery.parallel", 1000);
        let start = match &b.start {
            None => Some(1.0),
            Some(q) => self.fraction(q, "battery.start", 0.0, true, 1.0),
        };
        let (mut ac, mut ar) = (Some(1.0), Some(1.0));
        if let Some(a) = &b.aging {
            if let Some(q) = &a.capacity {
                ac = self.fraction(q, "battery.aging.capacity", 0.0, false, 1.0);
            }
            if let Some(q) = &a.resistance {
                ar = self.fraction(q, "battery.aging.resistance", 0.0, false, 100.0);
            }
        }
        let buffer = match &b.buffer {
            None => Some(None),
            Some(spec) => self.buffer(spec, "battery.buffer").map(Some),
        };
        Some(Pack {
            buffer: buffer?,
            cell: cell?,
            series: u32::try_from(series?).ok()?,
            parallel: u32::try_from(parallel?).ok()?,
            start_soc: start?,
            aging_capacity: ac?,
            aging_resistance: ar?,
        })
    }
}

impl Lower<'_> {
    /// A buffer capacitor written at `path` (`battery.buffer`, or a stage's).
    pub(super) fn buffer(&mut self, b: &BufferSpec, path: &str) -> Option<Buffer> {
        let c = self.value(
            &b.capacitance,
            format_args!("{path}.capacitance"),
            Dim::Capacitance,
            Bound::AboveZero,
        );
        let esr = self.opt(
            b.esr.as_ref(),
            format_args!("{path}.esr"),
            Dim::Resistance,
            Bound::AtLeastZero,
        );
        let leak = self.opt(
            b.leakage.as_ref(),
            format_args!("{path}.leakage"),
            Dim::Current,
            Bound::AtLeastZero,
        );
        let limit = self.opt(
            b.current_limit.as_ref(),
            format_args!("{path}.current_limit"),
            Dim::Current,
            Bound::AboveZero,
        );
        Some(Buffer {
            capacitance: c?,
            esr: esr?.unwrap_or(0.0),
            leakage: leak?.unwrap_or(0.0),
            current_limit: limit?,
        })
    }
}

fn overlay(over: &CellSpec, base: &CellSpec) -> CellSpec {
    let pick = |a: &Option<Qty>, b: &Option<Qty>| a.clone().or_else(|| b.clone());
    CellSpec {
        preset: None,
        description: over
            .description
            .clone()
            .or_else(|| base.description.clone()),
        chemistry: over.chemistry.or(base.chemistry),
        capacity: pick(&over.capacity, &base.capacity),
        rated_current: pick(&over.rated_current, &base.rated_current),
        ocv: over.ocv.clone().or_else(|| base.ocv.clone()),
        resistance: over.resistance.clone().or_else(|| base.resistance.clone()),
        polarization: over
            .polarization
            .clone()
            .or_else(|| base.polarization.clone()),
        peukert: pick(&over.peukert, &base.peukert),
        rate_window: pick(&over.rate_window, &base.rate_window),
        cutoff: pick(&over.cutoff, &base.cutoff),
        max_current: pick(&over.max_current, &base.max_current),
        max_pulse_current: pick(&over.max_pulse_current, &base.max_pulse_current),
        max_pulse_length: pick(&over.max_pulse_length, &base.max_pulse_length),
        self_discharge: over
            .self_discharge
            .clone()
            .or_else(|| base.self_discharge.clone()),
        temperature: over
            .temperature
            .clone()
            .or_else(|| base.temperature.clone()),
        mass: pick(&over.mass, &base.mass),
        size: over.size.clone().or_else(|| base.size.clone()),
    }
}

pub(super) fn given_keys(c: &CellSpec) -> Vec<&'static str> {
    [
        ("chemistry", c.chemistry.is_some()),
        ("capacity", c.capacity.is_some()),
        ("rated_current", c.rated_current.is_some()),
        ("ocv", c.ocv.is_some()),
        ("resistance", c.resistance.is_some()),
        ("polarization", c.polarization.is_some()),
        ("peukert", c.peukert.is_some()),
        ("rate_window", c.rate_window.is_some()),
        ("cutoff", c.cutoff.is_some()),
        ("max_current", c.max_current.is_some()),
        ("max_pulse_current", c.max_pulse_current.is_some()),
        ("max_pulse_length", c.max_pulse_length.is_some()),
        ("self_discharge", c.self_discharge.is_some()),
        ("temperature", c.temperature.is_some()),
        ("mass", c.mass.is_some()),
        ("size", c.size.is_some()),
    ]
    .into_iter()
    .filter_map(|(k, given)| given.then_some(k))
    .collect()
}

pub(super) fn chemistry(c: Option<ChemistrySpec>) -> Chemistry {
    match c.unwrap_or(ChemistrySpec::Other) {
        ChemistrySpec::LiIon => Chemistry::LiIon,
        ChemistrySpec::Lifepo4 => Chemistry::LiFePo4,
        ChemistrySpec::Nimh => Chemistry::NiMh,
        ChemistrySpec::Alkaline => Chemistry::Alkaline,
        ChemistrySpec::LiMno2 => Chemistry::LiMnO2,
        ChemistrySpec::LiSocl2 => Chemistry::LiSoCl2,
        ChemistrySpec::LeadAcid => Chemistry::LeadAcid,
        ChemistrySpec::Other => Chemistry::Other,
    }
}
