//! LED drivers and their LEDs: each LED's law from its forward voltage and dynamic resistance,
//! and each driver's output voltage, the LEDs' voltage at its set current.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::spec::LedSpec;

/// Most LEDs in series in one string.
const MAX_LEDS_IN_SERIES: u64 = 100;

impl Lower<'_> {
    /// Give every LED load its law and every LED driver its output voltage; check that an LED
    /// sits only on an LED driver's rail and that a driver drives exactly one LED load and
    /// nothing else. False when something is wrong (reported).
    pub(super) fn led_strings(
        &mut self,
        spec: &DesignSpec,
        tree: &Tree,
        stages: &mut [Stage],
        loads: &mut [Load],
    ) -> bool {
        let before = self.diags.len();
        let laws = self.led_laws(spec, stages, loads);
        self.driver_setpoints(tree, stages, loads, &laws);
        self.diags.len() == before
    }

    /// Each LED load's law (knee, resistance) from its LED draws, set as its states' draws;
    /// each draw on an LED driver's rail must be an LED, and each LED draw on one, with the same
    /// law in every state. None for a load with no LED (or a problem, reported).
    fn led_laws(
        &mut self,
        spec: &DesignSpec,
        stages: &[Stage],
        loads: &mut [Load],
    ) -> Vec<Option<(f64, f64)>> {
        let rail_name = |stages: &[Stage], rail: usize| {
            rail.checked_sub(1)
                .map_or_else(|| BATTERY.to_string(), |k| stages[k].id.clone())
        };
        let mut laws: Vec<Option<(f64, f64)>> = vec![None; loads.len()];
        for (i, l) in spec.loads.iter().enumerate() {
            let rail = loads[i].rail;
            let driver = rail
                .checked_sub(1)
                .filter(|&k| stages.get(k).is_some_and(|s| s.led_current.is_some()));
            for (name, d) in &l.draw {
                let path = format!("loads[{i}].draw.{name}");
                let DrawSpec::Led(led) = d else {
                    if let Some(k) = driver {
                        self.err(
                            &path,
                            format!(
                                "the load `{}` is on the LED driver `{}`, so it must be an LED",
                                l.id, stages[k].id
                            ),
                            Some("give its draw as an LED, such as `{ forward: 3.0 V, resistance: 1.2 Ω }`, or move the load to a regulator's rail".into()),
                        );
                    }
                    continue;
                };
                let Some(k) = driver else {
                    self.err(
                        &path,
                        format!(
                            "an LED draw needs an LED driver, and the load `{}` is on `{}`",
                            l.id,
                            rail_name(stages, rail)
                        ),
                        Some("put the LED on a stage of `kind: led-driver`, which sets its current, or give the load a current, power or resistance".into()),
                    );
                    continue;
                };
                let i_set = stages[k].led_current.unwrap_or(0.0);
                let Some(law) = self.led_law(led, &path, i_set) else {
                    continue;
                };
                match laws[i] {
                    Some(first) if first != law => {
                        self.err(
                            &path,
                            format!(
                                "the LED `{}` has states with different forward voltages or resistances",
                                l.id
                            ),
                            Some("its driver's output follows from the LED: give every state the same LED, and turn the LED off in a mode by leaving it out".into()),
                        );
                        continue;
                    }
                    _ => laws[i] = Some(law),
                }
                if let Some(s) = loads[i].states.iter_mut().find(|(n, _)| n == name) {
                    s.1 = Draw::Led {
                        knee: law.0,
                        resistance: law.1,
                    };
                }
            }
        }
        laws
    }

    /// Each LED driver's output voltage: its LED load's voltage at the set current (`laws`,
    /// from `led_laws`); a driver feeds no stage and drives exactly one load.
    fn driver_setpoints(
        &mut self,
        tree: &Tree,
        stages: &mut [Stage],
        loads: &[Load],
        laws: &[Option<(f64, f64)>],
    ) {
        for k in 0..stages.len() {
            let Some(i_set) = stages[k].led_current else {
                continue;
            };
            let rail = k + 1;
            for &j in tree.stages_on(rail) {
                self.err(
                    &format!("stages[{j}].input"),
                    format!(
                        "the stage `{}` is fed by the LED driver `{}`, whose output is the current of its LEDs",
                        stages[j].id, stages[k].id
                    ),
                    Some("feed the stage from `battery` or from a regulator".into()),
                );
            }
            let on = tree.loads_on(rail);
            if on.len() != 1 {
                let names: Vec<String> = on.iter().map(|&l| format!("`{}`", loads[l].id)).collect();
                self.err(
                    &format!("stages[{k}]"),
                    if on.is_empty() {
                        format!("the LED driver `{}` drives no LED", stages[k].id)
                    } else {
                        format!(
                            "the LED driver `{}` drives {} loads ({}); it drives exactly one LED load",
                            stages[k].id,
                            on.len(),
                            names.join(", ")
                        )
                    },
                    Some("give the driver one load on its rail with an LED draw, such as `draw: { on: { forward: 3.0 V, resistance: 1.2 Ω } }`; LEDs in series are one load with `count`, another string needs its own driver".into()),
                );
                continue;
            }
            if let Some((knee, r)) = laws[on[0]] {
                // The output where the LED law gives the set current.
                stages[k].setpoint = knee + i_set * r;
            }
        }
    }

    /// One LED draw's law for a string: (knee, resistance) of `count` LEDs in series, each with
    /// `forward` at `at` (default the driver's set current `i_set`) and `resistance`.
    fn led_law(&mut self, led: &LedSpec, path: &str, i_set: f64) -> Option<(f64, f64)> {
        let vf = self.value(
            &led.forward,
            format_args!("{path}.forward"),
            Dim::Voltage,
            Bound::AboveZero,
        );
        let r = self.value(
            &led.resistance,
            format_args!("{path}.resistance"),
            Dim::Resistance,
            Bound::AboveZero,
        );
        let at = self.opt(
            led.at.as_ref(),
            format_args!("{path}.at"),
            Dim::Current,
            Bound::AboveZero,
        );
        let n = self.count(
            led.count.as_ref(),
            format_args!("{path}.count"),
            MAX_LEDS_IN_SERIES,
        );
        let (vf, r, at, n) = (vf?, r?, at?.unwrap_or(i_set), n?);
        let knee = vf - at * r;
        if knee < 0.0 {
            self.err_of(
                DiagnosticKind::OutOfRange,
                path,
                format!(
                    "the LED's forward voltage {} at {} is below its resistance's drop there ({}): its knee would be below 0 V",
                    fmt_eng(vf, "V"),
                    fmt_eng(at, "A"),
                    fmt_eng(at * r, "V")
                ),
                Some("check the forward voltage, the current it is given at (`at`) and the dynamic resistance (the slope of the I-V curve above its knee)".into()),
            );
            return None;
        }
        let n = n as f64;
        Some((n * knee, n * r))
    }
}
