//! The duty profile: steps and nested `repeat` blocks.

#[allow(clippy::wildcard_imports)]
use super::*;

impl Lower<'_> {
    pub(super) fn profile(
        &mut self,
        spec: &DesignSpec,
        modes: Option<&[Mode]>,
    ) -> Option<Vec<Step>> {
        if spec.profile.is_empty() {
            self.err(
                "profile",
                "the profile is empty",
                Some("add at least one step, e.g. `profile: [{ mode: run, for: 1 h }]`".into()),
            );
            return None;
        }
        let names: Vec<&str> = spec.modes.keys().map(String::as_str).collect();
        let steps = self.steps(&spec.profile, "profile", &names, 0);
        modes?;
        steps
    }

    pub(super) fn steps(
        &mut self,
        items: &[StepSpec],
        path: &str,
        modes: &[&str],
        depth: usize,
    ) -> Option<Vec<Step>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, s) in items.iter().enumerate() {
            match self.step(s, &format!("{path}[{i}]"), modes, depth) {
                Some(st) => out.push(st),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    pub(super) fn duration(&mut self, q: &Qty, path: &str) -> Option<f64> {
        let v = self.value(q, path, Dim::Time, Bound::AtLeastZero)?;
        if v == 0.0 {
            self.err(
                path,
                "a profile step cannot last zero time",
                Some("give a duration above zero or remove the step".into()),
            );
            return None;
        }
        Some(v)
    }

    /// Profile step `s` at `path`: a mode held for a time or a repeat block, never both.
    pub(super) fn step(
        &mut self,
        s: &StepSpec,
        path: &str,
        modes: &[&str],
        depth: usize,
    ) -> Option<Step> {
        match (&s.mode, &s.repeat) {
            (Some(_), Some(_)) => {
                self.err(
                    path,
                    "a step has both `mode` and `repeat`",
                    Some(
                        "a step is `{ mode: NAME, for: TIME }` or `{ repeat: [...], times: N }`"
                            .into(),
                    ),
                );
                None
            }
            (None, None) => {
                self.err(
                    path,
                    "a step has neither `mode` nor `repeat`",
                    Some("write `{ mode: NAME, for: TIME }`".into()),
                );
                None
            }
            (Some(m), None) => self.hold_step(s, m, path, modes),
            (None, Some(inner)) => self.repeat_step(s, inner, path, modes, depth),
        }
    }

    /// A step `{ mode: m, for: TIME }` at `path` (`for: capture` lasts one capture of the mode);
    /// `modes` are the file's mode names.
    fn hold_step(&mut self, s: &StepSpec, m: &str, path: &str, modes: &[&str]) -> Option<Step> {
        if s.times.is_some() {
            self.err(
                &format!("{path}.times"),
                "`times` belongs to a `repeat` block",
                Some("remove it".into()),
            );
        }
        let mode = modes.iter().position(|n| *n == m);
        // With no modes at all, that one problem is already reported.
        if mode.is_none() && !modes.is_empty() {
            let hint = match did_you_mean(m, modes.iter().copied()) {
                Some(x) => format!("did you mean `{x}`?"),
                None => format!("the modes are {}", backticked(modes)),
            };
            self.err(
                &format!("{path}.mode"),
                format!("unknown mode `{m}`"),
                Some(hint),
            );
        }
        let seconds = match &s.duration {
            Some(q) if q.text().trim() == "capture" => Some(capture::ONE_CAPTURE),
            Some(q) => self.duration(q, &format!("{path}.for")),
            None => {
                self.err(
                    path,
                    format!("the step in mode `{m}` has no duration"),
                    Some("add `for:`, e.g. `for: 10 s`".into()),
                );
                None
            }
        };
        Some(Step::Hold {
            mode: mode?,
            seconds: seconds?,
        })
    }

    /// A block `{ repeat: inner, times: N }` or `{ repeat: inner, for: TIME }` at `path`, nested
    /// `depth` blocks deep (at most `MAX_REPEAT_NESTING`).
    fn repeat_step(
        &mut self,
        s: &StepSpec,
        inner: &[StepSpec],
        path: &str,
        modes: &[&str],
        depth: usize,
    ) -> Option<Step> {
        if depth >= MAX_REPEAT_NESTING {
            self.err(
                path,
                format!("`repeat` blocks are nested deeper than {MAX_REPEAT_NESTING}"),
                Some("merge inner blocks into their parent: a block of blocks repeats the whole sequence".into()),
            );
            return None;
        }
        if inner.is_empty() {
            self.err(
                &format!("{path}.repeat"),
                "the `repeat` block is empty",
                Some("list the steps to repeat".into()),
            );
            return None;
        }
        let steps = self.steps(inner, &format!("{path}.repeat"), modes, depth + 1);
        let until = match (&s.duration, &s.times) {
            (Some(_), Some(_)) => {
                self.err(
                    path,
                    "a `repeat` block has both `for` and `times`",
                    Some("keep one of them".into()),
                );
                None
            }
            (None, None) => {
                self.err(
                    path,
                    "a `repeat` block has neither `for` nor `times`",
                    Some("add `times: N` or `for: TIME`".into()),
                );
                None
            }
            (Some(q), None) if q.text().trim() == "capture" => {
                self.err(
                    &format!("{path}.for"),
                    "`for: capture` belongs to a step with a mode, not to a `repeat` block",
                    Some("give the block a duration, or `times: N`".into()),
                );
                None
            }
            (Some(q), None) => self
                .duration(q, &format!("{path}.for"))
                .map(RepeatUntil::Seconds),
            (None, Some(q)) => self
                .count(Some(q), format_args!("{path}.times"), 1_000_000_000)
                .map(RepeatUntil::Times),
        };
        Some(Step::Repeat {
            steps: steps?,
            until: until?,
        })
    }
}
