//! Stages: setpoints, loss models and efficiency curves, the keys each kind takes.

#[allow(clippy::wildcard_imports)]
use super::*;

impl Lower<'_> {
    pub(super) fn range(
        &mut self,
        v: Option<&Vec<Qty>>,
        path: impl Display,
    ) -> Option<(Option<f64>, Option<f64>)> {
        let Some(v) = v else {
            return Some((None, None));
        };
        if v.len() != 2 {
            self.err(
                &path.to_string(),
                format!("a range has {} values, not 2", v.len()),
                Some("write `[min, max]`, e.g. `[1.7 V, 3.6 V]`".into()),
            );
            return None;
        }
        let lo = self.value(
            &v[0],
            format_args!("{path}[0]"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let hi = self.value(
            &v[1],
            format_args!("{path}[1]"),
            Dim::Voltage,
            Bound::AboveZero,
        );
        let (lo, hi) = (lo?, hi?);
        if lo >= hi {
            self.err(
                &path.to_string(),
                format!(
                    "the minimum {} is not below the maximum {}",
                    fmt_eng(lo, "V"),
                    fmt_eng(hi, "V")
                ),
                Some("write `[min, max]`".into()),
            );
            return None;
        }
        Some((Some(lo), Some(hi)))
    }

    pub(super) fn stages(&mut self, specs: &[StageSpec]) -> Option<Vec<Stage>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, s) in specs.iter().enumerate() {
            match self.stage(s, &format!("stages[{i}]")) {
                Some(st) => out.push(st),
                None => ok = false,
            }
        }
        let max = crate::solve::MAX_RAIL_BUFFERS;
        if let Some(i) = specs
            .iter()
            .enumerate()
            .filter(|(_, s)| s.buffer.is_some())
            .nth(max)
            .map(|(i, _)| i)
        {
            self.err(
                &format!("stages[{i}].buffer"),
                format!("more than {max} stages have a buffer capacitor on their rail"),
                Some(format!(
                    "keep the {max} that matter; a capacitor behind a regulating stage only leaks"
                )),
            );
            ok = false;
        }
        ok.then_some(out)
    }

    pub(super) fn not_for(
        &mut self,
        present: bool,
        path: &str,
        key: &str,
        kind: &str,
        which: &str,
    ) {
        if present {
            let a = if kind.starts_with("LED") { "an" } else { "a" };
            self.err(
                &format!("{path}.{key}"),
                format!("`{key}` does not apply to {a} {kind} stage"),
                Some(format!("`{key}` applies to {which}; remove it here")),
            );
        }
    }

    /// Stage `s` at `path` checked into the model: every key it has is read and checked (each
    /// problem reported, in the order of the keys below), none if any is wrong.
    pub(super) fn stage(&mut self, s: &StageSpec, path: &str) -> Option<Stage> {
        let kind = match s.kind {
            StageKindSpec::Buck => StageKind::Buck,
            StageKindSpec::Boost => StageKind::Boost,
            StageKindSpec::BuckBoost => StageKind::BuckBoost,
            StageKindSpec::Linear => StageKind::Linear,
            StageKindSpec::Switch => StageKind::Switch,
            StageKindSpec::LedDriver => led_topology(s),
        };
        let led = s.kind == StageKindSpec::LedDriver;
        let kn = if led { "LED driver" } else { kind.name() };
        let before = self.diags.len();
        let led_current = self.led_driver_keys(s, path, led.then_some(kind), kn);
        let setpoint = self.setpoint(s, path, kind, led, kn);
        let loss = self.loss_model(s, kind, path);
        let supply = self.stage_supply(s, path);
        self.keys_of_kind(s, path, kind, led, kn);
        let paths = self.stage_paths(s, path, kind, led);
        let buffer = self.stage_buffer(s, path, kind, led, kn);
        let theta = self.opt(
            s.theta_ja.as_ref(),
            format_args!("{path}.theta_ja"),
            Dim::ThermalResistance,
            Bound::AboveZero,
        );
        let tj_max = self.opt(
            s.tj_max.as_ref(),
            format_args!("{path}.tj_max"),
            Dim::Temperature,
            Bound::Any,
        );
        if s.id.trim().is_empty() {
            self.err(
                &format!("{path}.id"),
                "the id is empty",
                Some("give the stage a short name such as `buck-3v3`".into()),
            );
        }
        if self.diags.len() > before {
            return None;
        }
        let (supply, paths, buffer) = (supply?, paths?, buffer?);
        Some(Stage {
            id: s.id.clone(),
            kind,
            input: 0,
            setpoint: setpoint?,
            loss: loss?,
            quiescent: supply.quiescent,
            shutdown: supply.shutdown,
            input_min: supply.input_min,
            input_max: supply.input_max,
            max_output_current: supply.max_output_current,
            input_current_limit: paths.input_current_limit,
            dropout: paths.dropout,
            bypass_drop: paths.bypass_drop,
            bypass_resistance: paths.bypass_resistance,
            quiescent_from_output: s.quiescent_from == Some(QuiescentFromSpec::Output),
            on_resistance: paths.on_resistance,
            theta_ja: theta?,
            tj_max: tj_max?.unwrap_or(125.0),
            led_current: led_current?,
            buffer,
        })
    }

    /// The buffer capacitor on stage `s`'s output rail, if it has one: only a switching stage
    /// with an `input_current_limit` takes one (the stage recharges it at its limit, the limit
    /// being the limiter), and it has no `current_limit` of its own; `None` after an error.
    fn stage_buffer(
        &mut self,
        s: &StageSpec,
        path: &str,
        kind: StageKind,
        led: bool,
        kn: &str,
    ) -> Option<Option<Buffer>> {
        let Some(b) = &s.buffer else {
            return Some(None);
        };
        let at = format!("{path}.buffer");
        if led || !kind.is_switching() {
            self.err(
                &at,
                format!("a {kn} stage takes no buffer capacitor on its output rail"),
                Some(
                    "a rail's buffer sits behind a switching stage (buck, boost, buck-boost) \
                     with an `input_current_limit`; to buffer the cells' pulses, put it across \
                     the pack (`battery.buffer`)"
                        .into(),
                ),
            );
            return None;
        }
        if s.input_current_limit.is_none() {
            self.err(
                &at,
                format!(
                    "the stage `{}` has a buffer capacitor but no `input_current_limit`",
                    s.id
                ),
                Some(
                    "the stage recharges its rail's capacitor at its input current limit: add \
                     e.g. `input_current_limit: 10 mA` (without a limit the capacitor would sit \
                     at the setpoint and only leak; leave the buffer out then)"
                        .into(),
                ),
            );
            return None;
        }
        if b.current_limit.is_some() {
            self.err(
                &format!("{at}.current_limit"),
                "a stage's buffer capacitor has no current limit of its own",
                Some(
                    "the stage's `input_current_limit` limits what it draws to recharge the \
                     capacitor; remove `current_limit` here"
                        .into(),
                ),
            );
            return None;
        }
        self.buffer(b, &at).map(Some)
    }

    /// The output setpoint of stage `s` (a `kind` stage, `kn` in messages): its `output`, 0 for
    /// a switch (whose output follows its input) and for an LED driver (set from its LEDs'
    /// voltage once the loads are known); none after an error.
    fn setpoint(
        &mut self,
        s: &StageSpec,
        path: &str,
        kind: StageKind,
        led: bool,
        kn: &str,
    ) -> Option<f64> {
        match (&s.output, kind) {
            // Set from the LED string's voltage at the set current, once the loads are known.
            (None, _) if led => Some(0.0),
            (Some(_), _) if led => {
                self.err(
                    &format!("{path}.output"),
                    "an LED driver sets its current, not its output voltage: the LEDs' forward voltage gives that",
                    Some("remove `output` and give the LED current, such as `current: 350 mA`".into()),
                );
                None
            }
            (Some(_), StageKind::Switch) => {
                self.err(
                    &format!("{path}.output"),
                    "a switch has no setpoint: its output follows its input",
                    Some("remove `output`".into()),
                );
                None
            }
            (None, StageKind::Switch) => Some(0.0),
            (Some(q), _) => self.value(
                q,
                format_args!("{path}.output"),
                Dim::Voltage,
                Bound::AboveZero,
            ),
            (None, _) => {
                self.err(
                    path,
                    format!("the {kn} stage `{}` has no `output` setpoint", s.id),
                    Some("add e.g. `output: 3.3 V`".into()),
                );
                None
            }
        }
    }

    /// The keys of stage `s` every kind takes that bound its supply: `quiescent`, `shutdown`
    /// (0 when absent), `input_range` and `max_output_current`; none after an error (every key
    /// is still checked).
    fn stage_supply(&mut self, s: &StageSpec, path: &str) -> Option<StageSupply> {
        let quiescent = self.opt(
            s.quiescent.as_ref(),
            format_args!("{path}.quiescent"),
            Dim::Current,
            Bound::AtLeastZero,
        );
        let shutdown = self.opt(
            s.shutdown.as_ref(),
            format_args!("{path}.shutdown"),
            Dim::Current,
            Bound::AtLeastZero,
        );
        let range = self.range(s.input_range.as_ref(), format_args!("{path}.input_range"));
        let max_out = self.opt(
            s.max_output_current.as_ref(),
            format_args!("{path}.max_output_current"),
            Dim::Current,
            Bound::AboveZero,
        );
        let (input_min, input_max) = range?;
        Some(StageSupply {
            quiescent: quiescent?.unwrap_or(0.0),
            shutdown: shutdown?.unwrap_or(0.0),
            input_min,
            input_max,
            max_output_current: max_out?,
        })
    }

    /// Refuse each key stage `s` has that its kind does not take (`dropout`, `bypass_drop`,
    /// `on_resistance`, `bypass_resistance`, `quiescent_from`, `input_current_limit`), with the
    /// kinds that take it.
    fn keys_of_kind(&mut self, s: &StageSpec, path: &str, kind: StageKind, led: bool, kn: &str) {
        let takes_dropout = matches!(kind, StageKind::Buck | StageKind::Linear) && !led;
        self.not_for(
            !takes_dropout && s.dropout.is_some(),
            path,
            "dropout",
            kn,
            if led {
                "buck and linear regulators (an LED driver's is `headroom`)"
            } else {
                "buck and linear stages"
            },
        );
        let switching = "switching stages (buck, boost, buck-boost)";
        for (present, key, which) in [
            (
                kind != StageKind::Boost && s.bypass_drop.is_some(),
                "bypass_drop",
                "boost stages",
            ),
            (
                kind != StageKind::Switch && s.on_resistance.is_some(),
                "on_resistance",
                "switch stages",
            ),
            (
                kind != StageKind::Boost && s.bypass_resistance.is_some(),
                "bypass_resistance",
                "boost stages",
            ),
            (
                !kind.is_switching() && s.quiescent_from.is_some(),
                "quiescent_from",
                switching,
            ),
            (
                !kind.is_switching() && s.input_current_limit.is_some(),
                "input_current_limit",
                switching,
            ),
        ] {
            self.not_for(present, path, key, kn, which);
        }
    }

    /// The keys of stage `s` of `kind` that shape its current path: `input_current_limit`,
    /// `bypass_resistance`, `dropout` (an LED driver's `headroom`; 0.2 V for a linear stage,
    /// 0.1 V for the others by default), `bypass_drop` (0.4 V, or 0 for a synchronous bypass
    /// given by `bypass_resistance` alone) and `on_resistance` (which a switch needs); none
    /// after an error (every key is still checked).
    fn stage_paths(
        &mut self,
        s: &StageSpec,
        path: &str,
        kind: StageKind,
        led: bool,
    ) -> Option<StagePaths> {
        let input_limit = self.opt(
            s.input_current_limit.as_ref(),
            format_args!("{path}.input_current_limit"),
            Dim::Current,
            Bound::AboveZero,
        );
        let bypass_r = self.opt(
            s.bypass_resistance.as_ref(),
            format_args!("{path}.bypass_resistance"),
            Dim::Resistance,
            Bound::AtLeastZero,
        );
        let (dropout_key, dropout_q) = if led {
            ("headroom", s.headroom.as_ref())
        } else {
            ("dropout", s.dropout.as_ref())
        };
        let dropout = self.opt(
            dropout_q,
            format_args!("{path}.{dropout_key}"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let bypass = self.opt(
            s.bypass_drop.as_ref(),
            format_args!("{path}.bypass_drop"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let ron = match (&s.on_resistance, kind) {
            (None, StageKind::Switch) => {
                self.err(
                    path,
                    format!("the switch `{}` has no `on_resistance`", s.id),
                    Some("add e.g. `on_resistance: 80 mΩ`".into()),
                );
                None
            }
            (q, _) => self.opt(
                q.as_ref(),
                format_args!("{path}.on_resistance"),
                Dim::Resistance,
                Bound::AtLeastZero,
            ),
        };
        let dropout_default = if kind == StageKind::Linear { 0.2 } else { 0.1 };
        Some(StagePaths {
            input_current_limit: input_limit?,
            bypass_resistance: bypass_r?.unwrap_or(0.0),
            dropout: dropout?.unwrap_or(dropout_default),
            // A synchronous pass-through (`bypass_resistance` alone) has no diode drop.
            bypass_drop: bypass?.unwrap_or(if s.bypass_resistance.is_some() {
                0.0
            } else {
                0.4
            }),
            on_resistance: ron?.unwrap_or(0.0),
        })
    }

    /// The keys only an LED driver takes (`current`, `topology`, `headroom`): its set current
    /// (none for another stage), or none after an error.
    fn led_driver_keys(
        &mut self,
        s: &StageSpec,
        path: &str,
        topology: Option<StageKind>,
        kn: &str,
    ) -> Option<Option<f64>> {
        let Some(topology) = topology else {
            for (present, key) in [
                (s.current.is_some(), "current"),
                (s.topology.is_some(), "topology"),
                (s.headroom.is_some(), "headroom"),
            ] {
                self.not_for(present, path, key, kn, "LED drivers (`kind: led-driver`)");
            }
            return Some(None);
        };
        self.not_for(
            !matches!(topology, StageKind::Buck | StageKind::Linear) && s.headroom.is_some(),
            path,
            "headroom",
            &format!("{} LED driver", topology.name()),
            "linear and buck LED drivers",
        );
        let Some(q) = &s.current else {
            self.err(
                path,
                format!("the LED driver `{}` has no `current`", s.id),
                Some("add the LED current it holds, such as `current: 350 mA`".into()),
            );
            return None;
        };
        self.value(
            q,
            format_args!("{path}.current"),
            Dim::Current,
            Bound::AboveZero,
        )
        .map(Some)
    }
}

/// The regulator kind an LED driver regulates like: its `topology` (linear by default).
fn led_topology(s: &StageSpec) -> StageKind {
    match s.topology {
        None | Some(LedTopologySpec::Linear) => StageKind::Linear,
        Some(LedTopologySpec::Buck) => StageKind::Buck,
        Some(LedTopologySpec::Boost) => StageKind::Boost,
        Some(LedTopologySpec::BuckBoost) => StageKind::BuckBoost,
    }
}

/// A stage's supply keys, checked (`Lower::stage_supply`).
struct StageSupply {
    quiescent: f64,
    shutdown: f64,
    input_min: Option<f64>,
    input_max: Option<f64>,
    max_output_current: Option<f64>,
}

/// A stage's current-path keys, checked, defaults applied (`Lower::stage_paths`).
struct StagePaths {
    input_current_limit: Option<f64>,
    bypass_resistance: f64,
    dropout: f64,
    bypass_drop: f64,
    on_resistance: f64,
}
