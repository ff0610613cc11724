//! Loads, ids, rails and the tree, and the modes that set load states and turn stages off.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::spec::LoadSpec;

impl Lower<'_> {
    /// Every load of `spec` checked into the model (each problem reported); none if any is
    /// wrong.
    pub(super) fn loads(&mut self, spec: &DesignSpec) -> Option<Vec<Load>> {
        let mut out = Vec::with_capacity(spec.loads.len());
        let mut ok = true;
        for (i, l) in spec.loads.iter().enumerate() {
            match self.load(i, l) {
                Some(x) => out.push(x),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    /// Load `l`, the `i`th: its voltage range, its states' draws, its default state and its
    /// id; none after a problem (reported). Its rail is set later, from the tree.
    fn load(&mut self, i: usize, l: &LoadSpec) -> Option<Load> {
        // Paths are written only for a message: ten thousand loads check in milliseconds.
        let path = || format!("loads[{i}]");
        let before = self.diags.len();
        let range = self.range(
            l.voltage_range.as_ref(),
            format_args!("loads[{i}].voltage_range"),
        );
        let mut states = Vec::with_capacity(l.draw.len());
        if l.draw.is_empty() {
            self.err(
                &format!("{}.draw", path()),
                format!("the load `{}` has no states", l.id),
                Some("add e.g. `draw: { run: 6 mA }`".into()),
            );
        }
        for (name, q) in &l.draw {
            if let Some(draw) = self.load_draw(i, name, q) {
                states.push((String::clone(name), draw));
            }
        }
        let default = match l.default.as_deref() {
            None | Some("off") => None,
            Some(d) => {
                let k = states.iter().position(|(n, _)| n == d);
                if k.is_none() {
                    self.unknown_state(&format!("{}.default", path()), &l.id, d, &states);
                }
                k
            }
        };
        if l.id.trim().is_empty() {
            self.err(
                &format!("{}.id", path()),
                "the id is empty",
                Some("give the load a short name such as `mcu`".into()),
            );
        }
        if self.diags.len() > before {
            return None;
        }
        let (v_min, v_max) = range?;
        Some(Load {
            id: l.id.clone(),
            rail: 0,
            v_min,
            v_max,
            file_states: states.len(),
            states,
            default,
            captured: Vec::new(),
        })
    }

    /// The draw of state `name` of the `i`th load: a current, power or resistance above zero;
    /// a capture's mean and an LED's law are set later (once the pack, the rails and the
    /// drivers are known). None when the state is left out (a problem, reported).
    fn load_draw(&mut self, i: usize, name: &str, q: &DrawSpec) -> Option<Draw> {
        let p = || format!("loads[{i}].draw.{name}");
        if name == "off" {
            self.err(
                &p(),
                "`off` is a state every load has, drawing nothing",
                Some("name this state differently".into()),
            );
            return None;
        }
        // A capture's draw is its mean, set once the pack and the rail are known.
        let q = match q {
            DrawSpec::Value(q) => q,
            DrawSpec::Capture(_) => return Some(Draw::Current(0.0)),
            // An LED's law is set with its driver's current (`led_strings`).
            DrawSpec::Led(_) => {
                return Some(Draw::Led {
                    knee: 0.0,
                    resistance: f64::INFINITY,
                });
            }
        };
        let v = self.quantity(
            q,
            format_args!("loads[{i}].draw.{name}"),
            &[Dim::Current, Dim::Power, Dim::Resistance],
        )?;
        let draw = match v.dim() {
            Dim::Current => Draw::Current(v.value()),
            Dim::Power => Draw::Power(v.value()),
            _ => Draw::Resistance(v.value()),
        };
        let bad = match draw {
            Draw::Resistance(r) => r <= 0.0,
            Draw::Current(x) | Draw::Power(x) => x < 0.0,
            Draw::Led { .. } => false,
        };
        if bad {
            self.err(
                &p(),
                format!("the draw `{}` must be above zero", q.text()),
                Some("give a current, power or resistance above zero, such as `6 mA`; for no draw leave the state out and use `off`".into()),
            );
            return None;
        }
        Some(draw)
    }

    pub(super) fn unknown_state(
        &mut self,
        path: &str,
        load: &str,
        state: &str,
        states: &[(String, Draw)],
    ) {
        let names: Vec<&str> = states.iter().map(|s| s.0.as_str()).chain(["off"]).collect();
        let hint = match did_you_mean(state, names.iter().copied()) {
            Some(s) => format!(
                "did you mean `{s}`? The states of `{load}` are {}",
                backticked(&names)
            ),
            None => format!("the states of `{load}` are {}", backticked(&names)),
        };
        self.err_of(
            DiagnosticKind::UnknownId,
            path,
            format!("the load `{load}` has no state `{state}`"),
            Some(hint),
        );
    }

    pub(super) fn unique_ids(&mut self, spec: &DesignSpec) {
        // Where an id is: (`stages` or `loads`, index); its path is written only for a message.
        let mut seen: FastMap<&str, (&str, usize)> = FastMap::default();
        seen.reserve(spec.stages.len() + spec.loads.len());
        let ids = spec
            .stages
            .iter()
            .enumerate()
            .map(|(i, s)| (s.id.as_str(), ("stages", i)))
            .chain(
                spec.loads
                    .iter()
                    .enumerate()
                    .map(|(i, l)| (l.id.as_str(), ("loads", i))),
            );
        let at = |(list, i): (&str, usize)| format!("{list}[{i}].id");
        for (id, place) in ids {
            if id == BATTERY {
                self.err(
                    &at(place),
                    "`battery` is reserved for the pack's own rail",
                    Some("choose another id".into()),
                );
            } else if let Some(&first) = seen.get(id) {
                let msg = format!("the id `{id}` is used twice (first at {})", at(first));
                self.err(
                    &at(place),
                    msg,
                    Some("ids must be unique across stages and loads".into()),
                );
            } else {
                seen.insert(id, place);
            }
        }
    }

    /// The rail called `name`: 0 for the battery, `k + 1` for stage `k`.
    pub(super) fn rail(
        &mut self,
        spec: &DesignSpec,
        stage_ids: &FastMap<&str, usize>,
        name: &str,
        path: impl Display,
    ) -> Option<usize> {
        if name == BATTERY {
            return Some(0);
        }
        if let Some(&k) = stage_ids.get(name) {
            return Some(k + 1);
        }
        let hint = if spec.loads.iter().any(|l| l.id == name) {
            format!("`{name}` is a load; a rail is `battery` or a stage id")
        } else {
            let names: Vec<&str> = std::iter::once(BATTERY)
                .chain(spec.stages.iter().map(|s| s.id.as_str()))
                .collect();
            match did_you_mean(name, names.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("the rails are {}", backticked(&names)),
            }
        };
        self.err_of(
            DiagnosticKind::UnknownId,
            &path.to_string(),
            format!("unknown rail `{name}`"),
            Some(hint),
        );
        None
    }

    pub(super) fn tree(
        &mut self,
        spec: &DesignSpec,
        stage_ids: &FastMap<&str, usize>,
    ) -> Option<(Tree, Vec<usize>, Vec<usize>)> {
        let mut ok = true;
        let mut inputs = Vec::with_capacity(spec.stages.len());
        for (i, s) in spec.stages.iter().enumerate() {
            match self.rail(spec, stage_ids, &s.input, format_args!("stages[{i}].input")) {
                Some(r) if r == i + 1 => {
                    self.err(
                        &format!("stages[{i}].input"),
                        format!("the stage `{}` feeds itself", s.id),
                        Some("its input must be `battery` or another stage".into()),
                    );
                    ok = false;
                }
                Some(r) => inputs.push(r),
                None => ok = false,
            }
        }
        let mut rails = Vec::with_capacity(spec.loads.len());
        for (i, l) in spec.loads.iter().enumerate() {
            match self.rail(spec, stage_ids, &l.rail, format_args!("loads[{i}].rail")) {
                Some(r) => rails.push(r),
                None => ok = false,
            }
        }
        if !ok {
            return None;
        }
        match Tree::build(&inputs, &rails) {
            Ok(t) => Some((t, inputs, rails)),
            Err(errs) => {
                for e in errs {
                    match e {
                        TreeError::Cycle(stages) => {
                            let mut names: Vec<&str> =
                                stages.iter().map(|&k| spec.stages[k].id.as_str()).collect();
                            names.push(names[0]);
                            self.err(
                                &format!("stages[{}].input", stages[0]),
                                format!("stages feed each other in a loop: {}", names.join(" -> ")),
                                Some("every chain of stages must start at `battery`".into()),
                            );
                        }
                        TreeError::TooDeep(k) => self.err(
                            &format!("stages[{k}].input"),
                            format!(
                                "the chain of stages down to `{}` is deeper than {MAX_DEPTH}",
                                spec.stages[k].id
                            ),
                            Some(
                                "feed some of the stages from `battery` or from a stage higher up"
                                    .into(),
                            ),
                        ),
                    }
                }
                None
            }
        }
    }

    pub(super) fn modes(
        &mut self,
        spec: &DesignSpec,
        stage_ids: &FastMap<&str, usize>,
    ) -> Option<Vec<Mode>> {
        if spec.modes.is_empty() {
            self.err("", "the design has no `modes`", Some("add at least one, e.g. `modes: { run: {} }` (loads then take their `default` state)".into()));
            return None;
        }
        let load_ids = index_of(spec.loads.iter().map(|l| l.id.as_str()));
        // States are indexed as in the lowered load: file order, `off` excluded.
        let defaults: Vec<Option<usize>> = spec
            .loads
            .iter()
            .map(|l| {
                let d = l.default.as_ref()?;
                l.draw.keys().filter(|k| *k != "off").position(|s| s == d)
            })
            .collect();
        let mut out = Vec::new();
        let mut ok = true;
        for (name, entries) in &spec.modes {
            let mut load_states = defaults.clone();
            let mut stage_on = vec![true; spec.stages.len()];
            for (key, value) in entries.iter().flatten() {
                // Written only for a message.
                let p = || format!("modes.{name}.{key}");
                if let Some(&li) = load_ids.get(key.as_str()) {
                    let l = &spec.loads[li];
                    ok &= self.mode_load_state(l, name, key, value, &mut load_states[li]);
                } else if let Some(&si) = stage_ids.get(key.as_str()) {
                    match value.as_str() {
                        "off" => stage_on[si] = false,
                        "on" => stage_on[si] = true,
                        _ => {
                            self.err(
                                &p(),
                                format!("a stage is `on` or `off` in a mode, not `{value}`"),
                                Some(format!("write `{key}: off` to turn the stage off")),
                            );
                            ok = false;
                        }
                    }
                } else {
                    self.unknown_mode_key(spec, name, key, &p());
                    ok = false;
                }
            }
            out.push(Mode {
                name: name.clone(),
                load_states,
                stage_on,
                rail_draws: Vec::new(),
                longest_hold_s: f64::INFINITY,
                part_of: None,
            });
        }
        ok.then_some(out)
    }

    /// Set `state` (a load's state in mode `mode`) to `value`, a state of load `l` (`key` in
    /// the mode) or `off`. False when `l` has no such state (reported).
    fn mode_load_state(
        &mut self,
        l: &LoadSpec,
        mode: &str,
        key: &str,
        value: &str,
        state: &mut Option<usize>,
    ) -> bool {
        if value == "off" {
            *state = None;
            return true;
        }
        let states = || l.draw.keys().filter(|k| *k != "off");
        if let Some(k) = states().position(|s| s == value) {
            *state = Some(k);
            true
        } else {
            let named: Vec<(String, Draw)> =
                states().map(|s| (s.clone(), Draw::Current(0.0))).collect();
            self.unknown_state(&format!("modes.{mode}.{key}"), key, value, &named);
            false
        }
    }

    /// Report `key` of mode `name` (at `path`), which names neither a load nor a stage.
    fn unknown_mode_key(&mut self, spec: &DesignSpec, name: &str, key: &str, path: &str) {
        let names: Vec<&str> = spec
            .loads
            .iter()
            .map(|l| l.id.as_str())
            .chain(spec.stages.iter().map(|s| s.id.as_str()))
            .collect();
        let hint = match did_you_mean(key, names.iter().copied()) {
            Some(s) => format!("did you mean `{s}`?"),
            None => "a mode names loads (with a state) and stages (with `off`)".to_string(),
        };
        self.err_of(
            DiagnosticKind::UnknownId,
            path,
            format!("mode `{name}` names `{key}`, which is neither a load nor a stage"),
            Some(hint),
        );
    }
}
