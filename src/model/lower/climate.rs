//! The checker's rules for an ambient that changes along the run.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::Climate;
use crate::spec::ClimateSpec;

/// Default time of the warmest hour of the day, s after midnight: 15:00 (common practice, no
/// source: the air is warmest in the middle of the afternoon).
const WARMEST_DEFAULT_S: f64 = 15.0 * 3600.0;

impl Lower<'_> {
    /// The mean ambient and its climate, from `ambient:` given as a mapping.
    pub(super) fn climate(&mut self, c: &ClimateSpec) -> Option<(f64, Climate)> {
        if let Some(file) = &c.file {
            return self.recorded_ambient(c, file);
        }
        if c.repeat.is_some() {
            self.err(
                "ambient.repeat",
                "`repeat` belongs to a recorded ambient (`file`)",
                Some(
                    "remove `repeat`, or give the temperatures over time as `file: temps.csv`"
                        .into(),
                ),
            );
            return None;
        }
        let mean = self.climate_mean(c);
        let start_month = match &c.start_month {
            None => Some(0),
            Some(q) => self
                .count(Some(q), "ambient.start_month", 12)
                .map(|m| m as usize - 1),
        };
        let daily_range = self.daily_range(c);
        let warmest = self.warmest(c);
        let ((mean, monthly_c), start_month, daily_range_c, warmest_s) =
            (mean?, start_month?, daily_range?, warmest?);
        let climate = Climate::new(monthly_c, start_month, daily_range_c, warmest_s);
        // Every temperature the run can see stays physical.
        let (lo, hi) = climate.range(f64::INFINITY);
        if mean + lo < -273.15 || mean + hi > 200.0 {
            self.err_of(
                DiagnosticKind::OutOfRange,
                "ambient",
                format!(
                    "the climate reaches {:.1} °C to {:.1} °C, outside -273.15 °C to 200 °C",
                    mean + lo,
                    mean + hi
                ),
                Some("check the monthly means and the daily range".into()),
            );
            return None;
        }
        Some((mean, climate))
    }

    /// A climate's mean: `mean` (no yearly cycle) or `monthly` (twelve means), exactly one;
    /// the mean, and each month's mean less it (none for `mean`).
    fn climate_mean(&mut self, c: &ClimateSpec) -> Option<(f64, Option<[f64; 12]>)> {
        match (&c.mean, &c.monthly) {
            (Some(_), Some(_)) => {
                self.err(
                "ambient",
                "`mean` and `monthly` both give the mean ambient",
                Some("keep `monthly` (twelve means, January first) for a yearly cycle, or `mean` for none".into()),
            );
                None
            }
            (None, None) => {
                self.err(
                "ambient",
                "a climate needs `mean` or `monthly`",
                Some("add `mean: 20 °C`, or `monthly: [...]` with twelve temperatures, January first".into()),
            );
                None
            }
            (Some(q), None) => self
                .value(q, "ambient.mean", Dim::Temperature, Bound::Any)
                .map(|m| (m, None)),
            (None, Some(list)) => self.monthly(list),
        }
    }

    /// A climate's daily swing, warmest less coldest hour (`daily_range`, 0 by default, at most
    /// 100 °C).
    fn daily_range(&mut self, c: &ClimateSpec) -> Option<f64> {
        match &c.daily_range {
            None => Some(0.0),
            Some(q) => {
                let v = self.value(
                    q,
                    "ambient.daily_range",
                    Dim::Temperature,
                    Bound::AtLeastZero,
                );
                match v {
                    Some(r) if r <= 100.0 => Some(r),
                    Some(_) => {
                        self.err_of(
                        DiagnosticKind::OutOfRange,
                        "ambient.daily_range",
                        format!("a daily range of `{}` is beyond 100 °C", q.text()),
                        Some("give the warmest less the coldest hour of a day in °C, such as `10 °C`".into()),
                    );
                        None
                    }
                    None => None,
                }
            }
        }
    }

    /// The warmest hour of a climate's day (`warmest`, s after midnight, 15:00 by default).
    fn warmest(&mut self, c: &ClimateSpec) -> Option<f64> {
        match &c.warmest {
            None => Some(WARMEST_DEFAULT_S),
            Some(q) => match self.value(q, "ambient.warmest", Dim::Time, Bound::AtLeastZero) {
                Some(t) if t < 86_400.0 => Some(t),
                Some(_) => {
                    self.err_of(
                    DiagnosticKind::OutOfRange,
                    "ambient.warmest",
                    format!("`{}` is not a time of day", q.text()),
                    Some("give the hours after midnight, from `0 h` to under `24 h`, such as `15 h`".into()),
                );
                    None
                }
                None => None,
            },
        }
    }

    /// A recorded ambient: the file's time-weighted mean and the series around it. The file is
    /// read relative to the design file's directory, as captures are.
    fn recorded_ambient(&mut self, c: &ClimateSpec, file: &str) -> Option<(f64, Climate)> {
        let others = [
            ("mean", c.mean.is_some()),
            ("monthly", c.monthly.is_some()),
            ("start_month", c.start_month.is_some()),
            ("daily_range", c.daily_range.is_some()),
            ("warmest", c.warmest.is_some()),
        ];
        let given: Vec<&str> = others.iter().filter(|(_, g)| *g).map(|(k, _)| *k).collect();
        if !given.is_empty() {
            self.err(
                &format!("ambient.{}", given[0]),
                format!(
                    "`{}` cannot be given with `file`: the file gives the ambient at every time",
                    given.join("`, `")
                ),
                Some("keep `file` (and `repeat`) for a recorded ambient, or remove `file` for a climate of cycles".into()),
            );
            return None;
        }
        match self.source.ambient(file, c.repeat.unwrap_or(false)) {
            Ok((mean, series)) => Some((mean, Climate::recorded(series))),
            Err(errors) => {
                for d in errors {
                    let at = d.location().map_or_else(String::new, |l| {
                        format!(" (line {}, column {})", l.line, l.col)
                    });
                    let msg = if d.message().starts_with("line ") || at.is_empty() {
                        format!("ambient file `{file}`: {}", d.message())
                    } else {
                        format!("ambient file `{file}`{at}: {}", d.message())
                    };
                    self.err("ambient.file", msg, d.hint().map(str::to_string));
                }
                None
            }
        }
    }

    /// Twelve monthly means: their mean, and each less it.
    fn monthly(&mut self, list: &[Qty]) -> Option<(f64, Option<[f64; 12]>)> {
        if list.len() != 12 {
            self.err_of(
                DiagnosticKind::Invalid,
                "ambient.monthly",
                format!("{} monthly temperatures given, not 12", list.len()),
                Some("give one mean temperature for each month, January first".into()),
            );
            return None;
        }
        let mut m = [0.0; 12];
        let mut ok = true;
        for (i, q) in list.iter().enumerate() {
            match self.value(
                q,
                format_args!("ambient.monthly[{i}]"),
                Dim::Temperature,
                Bound::Any,
            ) {
                Some(v) => m[i] = v,
                None => ok = false,
            }
        }
        if !ok {
            return None;
        }
        let mean = m.iter().sum::<f64>() / 12.0;
        for v in &mut m {
            *v -= mean;
        }
        Some((mean, Some(m)))
    }
}
