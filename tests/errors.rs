//! Invalid input: the bad-file corpus of `tests/data/bad/`, usage errors, and property tests that
//! no text, however broken, makes the library or the binary panic (DESIGN sections 4 and 7).
//!
//! Each corpus file holds one problem and says at its top what the report must contain:
//!
//! ```text
//! # expect: <fragment of stderr>      (one or more)
//! # path: <YAML path the problem is reported at>
//! # at: <line>:<col>                  (`none` when the file has no place to point at)
//! # problems: <count>                 (default 1)
//! ```

use std::path::{Path, PathBuf};

use joulepath::Design;
use joulepath::report::Format;
use joulepath::report::budget::write_budget;
use joulepath::report::outline::write_outline;
use proptest::prelude::*;
use proptest::test_runner::Config;

use crate::util::{CELL, Output, Test, root};

/// The valid design the mutation tests start from (a copy of conformance case E).
const BASE: &str = include_str!("data/e-boost-loss-shelf.yaml");

/// The base design without its comment lines, so that every edit lands on YAML.
fn base_body() -> String {
    BASE.split_inclusive('\n')
        .filter(|l| !l.starts_with('#'))
        .collect()
}

/// What a corpus file says its report must contain.
#[derive(Debug, Default)]
struct Expect {
    fragments: Vec<String>,
    path: Option<String>,
    /// `Some(None)` for `# at: none`: no diagnostic has a place.
    at: Option<Option<String>>,
    problems: usize,
}

impl Expect {
    fn read(text: &str) -> Self {
        let mut e = Expect {
            problems: 1,
            ..Expect::default()
        };
        for line in text.lines().take_while(|l| l.starts_with('#')) {
            let line = line.trim_start_matches('#').trim();
            let Some((key, value)) = line.split_once(':') else {
                continue;
            };
            let value = value.trim().to_string();
            match key {
                "expect" => e.fragments.push(value),
                "path" => e.path = Some(value),
                "at" if value == "none" => e.at = Some(None),
                "at" => e.at = Some(Some(value)),
                "problems" => e.problems = value.parse().expect("`# problems:` takes a count"),
                _ => {}
            }
        }
        e
    }
}

/// Every `tests/data/bad/*.yaml`, sorted.
fn bad_files() -> Vec<PathBuf> {
    let dir = root().join("tests/data/bad");
    let mut v: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("tests/data/bad/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    v.sort();
    v
}

fn run(args: &[&str]) -> Output {
    Test::new().args(args).run()
}

/// Everything wrong with one run on a corpus file (empty when it is right).
fn judge(file: &Path, command: &str, e: &Expect, out: &Output) -> Vec<String> {
    let shown = file.display().to_string();
    let err = &out.stderr;
    let mut bad = Vec::new();
    if out.code != 1 {
        bad.push(format!("exit code {} (wanted 1)", out.code));
    }
    if !out.stdout.is_empty() {
        bad.push(format!("stdout is not empty:\n{}", out.stdout));
    }
    if err.contains("panicked") {
        bad.push("the binary panicked".into());
    }
    for f in &e.fragments {
        if !err.contains(f.as_str()) {
            bad.push(format!("no {f:?} in stderr"));
        }
    }
    if let Some(p) = &e.path {
        if !err.contains(&format!(": {p}: ")) {
            bad.push(format!("the path `{p}` is not named"));
        }
    }
    let errors: Vec<&str> = err.lines().filter(|l| l.starts_with("error: ")).collect();
    if errors.len() != e.problems {
        bad.push(format!(
            "{} problems reported (wanted {})",
            errors.len(),
            e.problems
        ));
    }
    let plural = if e.problems == 1 { "" } else { "s" };
    let summary = format!(
        "{} problem{plural} in {shown}; nothing was computed",
        e.problems
    );
    if !err.contains(&summary) {
        bad.push(format!("no summary line {summary:?}"));
    }
    match &e.at {
        Some(Some(at)) => {
            if !err.contains(&format!("error: {shown}:{at}: ")) {
                bad.push(format!("the place {shown}:{at} is not given"));
            }
        }
        Some(None) => {}
        // Unless the file says otherwise, every problem is shown with its line and column.
        None => {
            for l in &errors {
                if !has_place(l, &shown) {
                    bad.push(format!("no line:col in {l:?}"));
                }
            }
        }
    }
    if bad.is_empty() {
        return bad;
    }
    vec![format!(
        "{} ({command}):\n  - {}\nstderr:\n{err}",
        file.file_name().unwrap_or_default().to_string_lossy(),
        bad.join("\n  - ")
    )]
}

/// Whether an `error:` line starts with `FILE:LINE:COL: `.
fn has_place(line: &str, file: &str) -> bool {
    let Some(rest) = line.strip_prefix(&format!("error: {file}:")) else {
        return false;
    };
    let mut parts = rest.splitn(3, ':');
    let (Some(l), Some(c), Some(tail)) = (parts.next(), parts.next(), parts.next()) else {
        return false;
    };
    let number = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    number(l) && number(c) && tail.starts_with(' ')
}

#[test]
fn the_corpus_is_large_and_well_formed() {
    let files = bad_files();
    assert!(files.len() >= 25, "only {} bad files", files.len());
    for f in &files {
        let text = std::fs::read_to_string(f).expect("read");
        let e = Expect::read(&text);
        assert!(
            !e.fragments.is_empty(),
            "{}: no `# expect:` line",
            f.display()
        );
        assert!(
            text.starts_with("# expect: "),
            "{}: first line",
            f.display()
        );
    }
}

#[test]
fn every_bad_file_fails_check_and_budget_with_its_message() {
    let mut failures = Vec::new();
    for f in bad_files() {
        let text = std::fs::read_to_string(&f).expect("read");
        let e = Expect::read(&text);
        let file = f.display().to_string();
        for command in ["check", "budget"] {
            let out = run(&[command, &file]);
            failures.extend(judge(&f, command, &e, &out));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn the_library_agrees_with_the_binary_on_the_corpus() {
    for f in bad_files() {
        let text = std::fs::read_to_string(&f).expect("read");
        let e = Expect::read(&text);
        let err = Design::from_text(&text).expect_err(&f.display().to_string());
        let ds = err.diagnostics();
        assert_eq!(ds.len(), e.problems, "{}: {err}", f.display());
        if let Some(p) = &e.path {
            assert!(ds.iter().any(|d| d.path() == p), "{}: {err}", f.display());
        }
        for d in ds {
            let m = d.message();
            assert!(
                !m.is_empty() && !m.starts_with(char::is_uppercase),
                "{}: {m}",
                f.display()
            );
            assert!(!m.ends_with('.'), "{}: {m}", f.display());
            // Every problem says how to fix it.
            assert!(
                d.hint().is_some_and(|h| !h.is_empty()),
                "{}: no fix for {m:?}",
                f.display()
            );
            // In plain words: none of the deserializer's own terms.
            for jargon in [
                "invalid type",
                "unit value",
                "struct ",
                "Spec",
                "sequence",
                "Value::",
            ] {
                assert!(!m.contains(jargon), "{}: {m}", f.display());
            }
        }
    }
}

/// A design with three unrelated mistakes: a missing unit, an unknown rail, a repeated id.
#[test]
fn three_independent_problems_are_reported_in_one_run() {
    let yaml = format!(
        "design: Three mistakes at once
{CELL}battery: {{ cell: test-cell }}
stages:
  - id: ldo-1v8
    kind: linear
    input: battery
    output: 1.8
loads:
  - {{ id: mcu, rail: ldo-1v8, draw: {{ run: 5 mA }} }}
  - {{ id: radio, rail: ldo-1v9, draw: {{ tx: 20 mA }} }}
  - {{ id: mcu, rail: battery, draw: {{ on: 1 mA }} }}
modes: {{ run: {{ mcu: run, radio: tx }} }}
profile: [{{ mode: run, for: 1 h }}]
"
    );
    let t = Test::new().design(&yaml).args(&["check", "{file}"]);
    let out = t.expect_code(1);
    let file = t.file().display().to_string();
    let err = &out.stderr;
    for frag in [
        format!("error: {file}:14:13: stages[0].output: `1.8` has no unit"),
        "loads[1].rail: unknown rail `ldo-1v9`".to_string(),
        "did you mean `ldo-1v8`?".to_string(),
        "loads[2].id: the id `mcu` is used twice".to_string(),
        format!("3 problems in {file}; nothing was computed"),
    ] {
        assert!(err.contains(&frag), "missing {frag:?} in\n{err}");
    }
    assert!(out.stdout.is_empty());
}

/// Structural problems (what the file reader finds) in different sections are all reported too.
#[test]
fn three_structural_problems_are_reported_in_one_run() {
    let yaml = format!(
        "design: Three structural mistakes
{CELL}battery: {{ cell: test-cell, seires: 2 }}
stages:
  - {{ id: a, kind: linaer, input: battery, output: 1.8 V }}
loads:
  - {{ id: mcu, rail: a, draw: {{ run: 5 mA }} }}
modse: {{ run: {{ mcu: run }} }}
profile: [{{ mode: run, for: 1 h }}]
"
    );
    let out = Test::new()
        .design(&yaml)
        .args(&["check", "{file}"])
        .expect_code(1);
    let err = &out.stderr;
    for frag in [
        "battery.seires: unknown key `seires`",
        "did you mean `series`?",
        "stages[0].kind: unknown value `linaer`",
        "did you mean `linear`?",
        "modse: unknown key `modse`",
        "did you mean `modes`?",
        "3 problems in",
    ] {
        assert!(err.contains(frag), "missing {frag:?} in\n{err}");
    }
}

fn two_mode_design() -> String {
    format!(
        "design: Two-mode sensor tag
{CELL}battery: {{ cell: test-cell }}
loads:
  - {{ id: mcu, rail: battery, draw: {{ run: 5 mA, sleep: 3 µA }} }}
modes: {{ run: {{ mcu: run }}, sleep: {{ mcu: sleep }} }}
profile: [{{ mode: run, for: 1 s }}, {{ mode: sleep, for: 1 min }}]
"
    )
}

#[test]
fn an_unknown_mode_is_a_usage_error_with_a_suggestion() {
    let budget = |extra: &[&str]| {
        let mut args = vec!["budget", "{file}"];
        args.extend_from_slice(extra);
        Test::new().design(&two_mode_design()).args(&args)
    };
    let out = budget(&["--mode", "slep"]).expect_code(2);
    assert!(out.stderr.contains("no mode `slep`"), "{}", out.stderr);
    assert!(
        out.stderr.contains("did you mean `sleep`?"),
        "{}",
        out.stderr
    );
    assert!(out.stdout.is_empty());
    let out = budget(&["--mode", "nosuch"]).expect_code(2);
    assert!(out.stderr.contains("no mode `nosuch`"), "{}", out.stderr);
    assert!(
        out.stderr.contains("run") && out.stderr.contains("sleep"),
        "{}",
        out.stderr
    );
    assert!(out.stdout.is_empty());
}

#[test]
fn a_missing_file_cannot_be_read() {
    for command in ["check", "budget"] {
        let out = Test::new().args(&[command, "{file}"]).expect_code(1);
        assert!(out.stderr.contains("cannot read"), "{}", out.stderr);
        assert!(out.stderr.contains("design.yaml"), "{}", out.stderr);
        assert!(out.stdout.is_empty());
    }
}

#[test]
fn a_state_of_charge_outside_0_to_100_percent_is_a_usage_error() {
    let budget = |soc: &str| {
        Test::new()
            .design(&two_mode_design())
            .args(&["budget", "{file}", "--soc", soc])
    };
    for soc in ["150%", "-10 %", "1.5", "half", "30 mA"] {
        let out = budget(soc).expect_code(2);
        assert!(out.stdout.is_empty(), "--soc {soc}");
        assert!(!out.stderr.contains("panicked"), "{}", out.stderr);
    }
    let out = budget("150%").expect_code(2);
    assert!(out.stderr.contains("150%"), "{}", out.stderr);
    budget("30 %").expect_code(0);
}

// ---------------------------------------------------------------------------------------------
// No panic on any input.

/// Tokens the mutations insert or put in place of a token or a value: numbers the unit parser and
/// the solver dislike, YAML syntax, names the checker knows, keys that change a block's meaning.
const TOKENS: &[&str] = &[
    "",
    "-1",
    "0",
    "1e309",
    "-1e309",
    "1e-320 A",
    "nan",
    "inf",
    ".nan",
    "µ",
    "[",
    "]",
    "{",
    "}",
    ",",
    ":",
    "- ",
    "\n",
    "\n  ",
    "\t",
    "'",
    "\"",
    "#",
    "&x",
    "*x",
    "!!binary",
    "~",
    "null",
    "? ",
    "|",
    "0 %",
    "100 %",
    "1e3 %",
    "0 V",
    "-5 mA",
    "1 ma",
    "25 C",
    "0 s",
    "99999999999999999999",
    "18446744073709551616",
    "0x10",
    "battery",
    "off",
    "on",
    "boost-5v",
    "probe-switch",
    "display",
    "measure",
    "shelf",
    "repeat:",
    "times: 0",
    "times: 1000000000",
    "for: 0 s",
    "kind: switch",
    "kind: linear",
    "input: probe-switch",
    "rail: probe",
    "efficiency: [[1 mA, 50 %], [1 mA, 60 %]]",
    "efficiency: [{ vin: 2 V, curve: [[1 mA, 80 %]] }, { vin: 3 V, curve: [[1 µA, 1 %]] }]",
    "- { id: boost-5v, kind: linear, input: boost-5v, output: 1 V }",
    "- { mode: measure, for: 1 ns }",
    "start: 0 %",
    "aging: { capacity: 1 %, resistance: 10000 % }",
    "max_output_current: 1 pA",
    "theta_ja: 1e9 K/W",
];

/// One random edit of a text.
#[derive(Debug, Clone)]
enum Edit {
    /// Delete up to `len` characters from `at`.
    Delete { at: usize, len: usize },
    /// Repeat a line.
    DuplicateLine(usize),
    /// Swap two lines.
    SwapLines(usize, usize),
    /// Replace the token (a run of characters other than blanks and `[]{},`) around `at`.
    ReplaceToken { at: usize, token: &'static str },
    /// Replace what follows the first `: ` on a line.
    ReplaceValue { line: usize, token: &'static str },
    /// Insert a token at `at`.
    Insert { at: usize, token: &'static str },
    /// Replace the `nth` number of the text (its unit stays), wrapping around.
    ReplaceNumber { nth: usize, number: &'static str },
}

/// Numbers that keep a design valid more often than not, but push the solver to its edges.
const NUMBERS: &[&str] = &[
    "0", "1e-300", "1e-30", "1e-12", "0.000001", "0.5", "1", "0.999999", "1.000001", "7", "1e6",
    "1e12", "1e30", "1e300", "-0", "-1e-300",
];

/// Byte ranges of the unsigned decimal numbers of `text` (digits and dots).
fn numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if b[i].is_ascii_digit() && (i == 0 || !b[i - 1].is_ascii_alphanumeric()) {
            let start = i;
            while i < b.len() && (b[i].is_ascii_digit() || b[i] == b'.') {
                i += 1;
            }
            out.push((start, i));
        } else {
            i += 1;
        }
    }
    out
}

fn edit() -> impl Strategy<Value = Edit> {
    let token = || prop::sample::select(TOKENS);
    prop_oneof![
        (any::<usize>(), 1usize..40).prop_map(|(at, len)| Edit::Delete { at, len }),
        any::<usize>().prop_map(Edit::DuplicateLine),
        (any::<usize>(), any::<usize>()).prop_map(|(a, b)| Edit::SwapLines(a, b)),
        (any::<usize>(), token()).prop_map(|(at, token)| Edit::ReplaceToken { at, token }),
        (any::<usize>(), token()).prop_map(|(line, token)| Edit::ReplaceValue { line, token }),
        (any::<usize>(), token()).prop_map(|(at, token)| Edit::Insert { at, token }),
        (any::<usize>(), prop::sample::select(NUMBERS))
            .prop_map(|(nth, number)| Edit::ReplaceNumber { nth, number }),
    ]
}

fn apply(text: &str, e: &Edit) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut lines: Vec<String> = text.split_inclusive('\n').map(str::to_string).collect();
    let n = chars.len();
    let is_delim = |c: char| c.is_whitespace() || "[]{},".contains(c);
    match *e {
        Edit::Delete { at, len } => {
            let start = at % (n + 1);
            let end = (start + len).min(n);
            chars[..start].iter().chain(&chars[end..]).collect()
        }
        Edit::DuplicateLine(i) if !lines.is_empty() => {
            let i = i % lines.len();
            let mut l = lines[i].clone();
            if !l.ends_with('\n') {
                l.push('\n');
            }
            lines.insert(i, l);
            lines.concat()
        }
        Edit::SwapLines(a, b) if !lines.is_empty() => {
            let len = lines.len();
            lines.swap(a % len, b % len);
            lines.concat()
        }
        Edit::ReplaceToken { at, token } if n > 0 => {
            let at = at % n;
            let mut start = at;
            while start > 0 && !is_delim(chars[start - 1]) {
                start -= 1;
            }
            let mut end = at;
            while end < n && !is_delim(chars[end]) {
                end += 1;
            }
            let head: String = chars[..start].iter().collect();
            let tail: String = chars[end..].iter().collect();
            format!("{head}{token}{tail}")
        }
        Edit::ReplaceValue { line, token } => {
            // Only lines that hold a `key: value` pair; the n-th of them, wrapping around.
            let pairs: Vec<usize> = (0..lines.len())
                .filter(|&i| !lines[i].trim_start().starts_with('#') && lines[i].contains(": "))
                .collect();
            if pairs.is_empty() {
                return text.to_string();
            }
            let i = pairs[line % pairs.len()];
            let cut = lines[i].find(": ").map_or(0, |k| k + 2);
            lines[i] = format!("{}{token}\n", &lines[i][..cut]);
            lines.concat()
        }
        Edit::Insert { at, token } => {
            let at = at % (n + 1);
            let head: String = chars[..at].iter().collect();
            let tail: String = chars[at..].iter().collect();
            format!("{head}{token}{tail}")
        }
        Edit::ReplaceNumber { nth, number } => {
            let found = numbers(text);
            if found.is_empty() {
                return text.to_string();
            }
            let (a, b) = found[nth % found.len()];
            format!("{}{number}{}", &text[..a], &text[b..])
        }
        _ => text.to_string(),
    }
}

/// Check a text and, when it is valid, solve and print its budget at the start SoC for every
/// mode: none of it may panic.
fn exercise(text: &str) {
    let Ok(design) = Design::from_text(text) else {
        return;
    };
    let modes: Vec<usize> = (0..design.modes().len()).collect();
    let soc = design.pack().start_soc();
    let result = joulepath::solve::budget(&design, soc, &modes);
    assert_eq!(result.len(), modes.len());
    let mut sink = Vec::new();
    write_outline(&mut sink, &design).expect("outline");
    for format in [Format::Table, Format::Json, Format::Csv] {
        sink.clear();
        write_budget(&mut sink, &design, soc, &result, format).expect("budget report");
    }
}

/// Every diagnostic of an invalid text is a sentence with a place that exists in the text.
fn errors_are_well_formed(text: &str) -> Result<(), TestCaseError> {
    if let Err(e) = Design::from_text(text) {
        prop_assert!(!e.diagnostics().is_empty(), "an error without diagnostics");
        // YAML counts `\r\n`, `\r` and `\n` each as one line break.
        let lines = 1 + text
            .replace("\r\n", "\n")
            .chars()
            .filter(|c| matches!(c, '\n' | '\r'))
            .count();
        for d in e.diagnostics() {
            prop_assert!(!d.message().is_empty());
            if let Some(l) = d.location() {
                prop_assert!(l.line >= 1 && l.col >= 1, "{:?}", l);
                // The parser may point one line past the end at an unexpected end of input.
                prop_assert!(l.line <= lines + 1, "line {} of {lines}: {d}", l.line);
            }
        }
    }
    Ok(())
}

fn config(cases: u32) -> Config {
    Config {
        cases,
        failure_persistence: None,
        ..Config::default()
    }
}

/// Fragments of YAML, to build texts that get further into the reader than random bytes do.
const YAML_PIECES: &[&str] = &[
    "battery: ",
    "cells:\n",
    "  c:\n",
    "    capacity: 1 Ah\n",
    "    ocv: [[0 %, 3 V], [100 %, 4 V]]\n",
    "    resistance: 0.1 ohm\n",
    "    cutoff: 3 V\n",
    "{ cell: c }\n",
    "stages:\n",
    "loads:\n",
    "modes:\n",
    "profile:\n",
    "  - ",
    "id: s",
    "id: l",
    "kind: buck",
    "kind: boost",
    "input: battery",
    "input: s",
    "rail: s",
    "rail: battery",
    "output: 1 V",
    "efficiency: 90 %",
    "on_resistance: 1 Ω",
    "draw: { on: 1 mA }",
    "{ l: on }",
    "{ s: off }",
    "mode: m",
    "for: 1 s",
    "repeat: ",
    "times: 2",
    "m: ",
    ", ",
    "[",
    "]",
    "{",
    "}",
    "\n",
    "  ",
    "- ",
    ": ",
    "1e309",
    "-1",
    "µ",
    "%",
];

proptest! {
    #![proptest_config(config(1024))]

    #[test]
    fn arbitrary_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        let text = String::from_utf8_lossy(&bytes);
        exercise(&text);
        errors_are_well_formed(&text)?;
    }

    #[test]
    fn yaml_like_text_never_panics(pieces in prop::collection::vec(prop::sample::select(YAML_PIECES), 0..60)) {
        let text = pieces.concat();
        exercise(&text);
        errors_are_well_formed(&text)?;
    }
}

proptest! {
    #![proptest_config(config(2048))]

    #[test]
    fn mutated_designs_never_panic(edits in prop::collection::vec(edit(), 1..5)) {
        let mut text = base_body();
        for e in &edits {
            text = apply(&text, e);
        }
        exercise(&text);
        errors_are_well_formed(&text)?;
    }
}

#[test]
fn the_base_design_is_valid() {
    let d = Design::from_text(BASE).expect("the mutation base must be valid");
    assert_eq!(d.modes().len(), 3);
    exercise(BASE);
}

/// The binary too (its error rendering draws source lines and carets) survives mutated files:
/// a fixed set of edits, so the run is repeatable.
#[test]
fn the_binary_survives_mutated_files() {
    // A small linear congruential generator: repeatable without a seed file.
    let mut state: u64 = 0x005e_ed0f_5eed;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 33) as usize
    };
    for case in 0..24 {
        let mut text = base_body();
        for _ in 0..=next() % 3 {
            let token = TOKENS[next() % TOKENS.len()];
            let e = match next() % 7 {
                6 => Edit::ReplaceNumber {
                    nth: next(),
                    number: NUMBERS[next() % NUMBERS.len()],
                },
                0 => Edit::Delete {
                    at: next(),
                    len: 1 + next() % 40,
                },
                1 => Edit::DuplicateLine(next()),
                2 => Edit::SwapLines(next(), next()),
                3 => Edit::ReplaceToken { at: next(), token },
                4 => Edit::ReplaceValue {
                    line: next(),
                    token,
                },
                _ => Edit::Insert { at: next(), token },
            };
            text = apply(&text, &e);
        }
        for command in ["check", "budget"] {
            let out = Test::new().design(&text).args(&[command, "{file}"]).run();
            assert!(
                out.code == 0 || out.code == 1,
                "case {case}, {command}: exit {}\n{text}\nstderr:\n{}",
                out.code,
                out.stderr
            );
            assert!(
                !out.stderr.contains("panicked"),
                "case {case}: {}\n{text}",
                out.stderr
            );
            if out.code == 1 {
                assert!(out.stdout.is_empty(), "case {case}");
                assert!(
                    out.stderr.contains("nothing was computed"),
                    "case {case}: {}",
                    out.stderr
                );
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Bounds on the input itself.

/// The head of a valid design, for files whose profile is generated.
const DEEP_HEAD: &str = "cells:
  c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 3 V }
battery: { cell: c }
loads: [{ id: l, rail: battery, draw: { on: 1 mA } }]
modes: { m: { l: on } }
";

/// Nesting tens of thousands of levels deep (brackets, or `repeat` blocks in flow and block
/// style) is refused before any reader recurses into it: exit 1 with the place, quickly, where
/// it used to overflow the stack (and the full parser took quadratic time).
#[test]
fn deep_nesting_is_refused_quickly_with_its_place() {
    let mut block = format!("{DEEP_HEAD}profile:\n");
    // 2,000 levels: a block-style file this deep is 8 MB (8,000 would pass the 64 MiB read limit).
    for i in 0..2000 {
        let pad = "  ".repeat(i + 1);
        block += &pad;
        block += "- times: 2\n";
        block += &pad;
        block += "  repeat:\n";
    }
    block += &"  ".repeat(2002);
    block += "- { mode: m, for: 1 s }\n";
    let cases = [
        (
            format!("design: {}{}\n", "[".repeat(40_000), "]".repeat(40_000)),
            "1:108",
        ),
        (
            format!("design: {}{}\n", "[".repeat(160_000), "]".repeat(160_000)),
            "1:108",
        ),
        (
            format!(
                "{DEEP_HEAD}profile: {}[{{ mode: m, for: 1 s }}]{}\n",
                "[{ times: 2, repeat: ".repeat(8000),
                "}]".repeat(8000)
            ),
            "6:",
        ),
        (block, "105:103"),
    ];
    for (text, at) in &cases {
        let start = std::time::Instant::now();
        let t = Test::new().design(text).args(&["check", "{file}"]);
        let out = t.expect_code(1);
        let file = t.file().display().to_string();
        assert!(
            start.elapsed().as_secs_f64() < 5.0,
            "took {:?}",
            start.elapsed()
        );
        assert!(
            out.stderr
                .contains("the file is nested too deep: more than 100 levels"),
            "{}",
            out.stderr
        );
        assert!(
            out.stderr.contains(&format!("error: {file}:{at}")),
            "{at}: {}",
            out.stderr
        );
        assert!(out.stderr.contains("fix: "), "{}", out.stderr);
        // The library says the same without the binary.
        let e = Design::from_text(text).expect_err("too deep");
        assert!(e.to_string().contains("nested too deep"), "{e}");
    }
    // A `--set` value nested as deep is refused too.
    let out = Test::new()
        .design(&format!("{DEEP_HEAD}profile: [{{ mode: m, for: 1 s }}]\n"))
        .args(&[
            "budget",
            "{file}",
            "--set",
            &format!("design={}", "[".repeat(40_000)),
        ])
        .run();
    assert!(out.code == 1 || out.code == 2, "{}", out.stderr);
    assert!(out.stderr.contains("nested too deep"), "{}", out.stderr);
}

/// A byte-order mark is read past (places stay right), and a file that is not UTF-8 is refused
/// with the place of its first bad byte and the fix, like any other problem of the file.
#[test]
fn byte_order_marks_and_other_encodings() {
    let body = base_body();
    let with_bom = format!("\u{feff}{body}");
    Test::new()
        .design(&with_bom)
        .args(&["check", "{file}"])
        .expect_code(0);
    let broken = format!("\u{feff}{}", body.replacen("for: ", "for: -", 1));
    let t = Test::new().design(&broken).args(&["check", "{file}"]);
    let out = t.expect_code(1);
    let file = t.file().display().to_string();
    assert!(
        has_place(out.stderr.lines().next().unwrap_or(""), &file),
        "{}",
        out.stderr
    );
    assert!(out.stderr.contains("cannot be negative"), "{}", out.stderr);
    // Latin-1 text: `°` is the single byte 0xB0.
    let t = Test::new();
    let path = t.dir().join("latin1.yaml");
    let mut bytes = b"design: Latin-1 sensor tag\nambient: 25 ".to_vec();
    bytes.push(0xb0);
    bytes.extend_from_slice(b"C\n");
    std::fs::write(&path, &bytes).expect("write");
    let shown = path.display().to_string();
    let out = t.args(&["check", &shown]).expect_code(1);
    for frag in [
        format!("error: {shown}:2:13: the file is not UTF-8 text: byte 0xB0 at line 2, column 13"),
        "fix: save the file as UTF-8".to_string(),
        format!("1 problem in {shown}; nothing was computed"),
    ] {
        assert!(out.stderr.contains(&frag), "no {frag:?} in\n{}", out.stderr);
    }
}

#[test]
fn every_problem_has_a_kind_to_match_on() {
    use joulepath::{Design, DiagnosticKind as K};
    let base = "cells:
  c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 3 V }
battery: { cell: c }
loads: [{ id: lamp, rail: battery, draw: { on: 10 mA } }]
modes: { lit: { lamp: on } }
profile: [{ mode: lit, for: 1 h }]
";
    let kinds = |text: &str| -> Vec<K> {
        match Design::from_text(text) {
            Ok(_) => Vec::new(),
            Err(e) => e
                .diagnostics()
                .iter()
                .map(joulepath::Diagnostic::kind)
                .collect(),
        }
    };
    let cases: [(String, K, &str); 9] = [
        (
            base.replace("on: 10 mA", "on: 10"),
            K::MissingUnit,
            "missing-unit",
        ),
        (
            base.replace("on: 10 mA", "on: 10 mQ"),
            K::UnknownUnit,
            "unknown-unit",
        ),
        (
            base.replace("on: 10 mA", "on: 10 V"),
            K::WrongUnit,
            "wrong-unit",
        ),
        (
            format!("{base}ambient: -300 °C\n"),
            K::OutOfRange,
            "out-of-range",
        ),
        (
            base.replace("rail: battery", "rail: bus"),
            K::UnknownId,
            "unknown-id",
        ),
        (
            base.replace("modes:", "moods:"),
            K::UnknownKey,
            "unknown-key",
        ),
        (
            format!("{base}tolerances: {{ loads.lamp.draw.off: ±5 % }}\n"),
            K::UnknownPath,
            "unknown-path",
        ),
        (
            base.replace("modes: { lit", "modes: [{ lit"),
            K::Syntax,
            "syntax",
        ),
        (
            format!("{base}ambient: 20 °C\nambient: 25 °C\n"),
            K::DuplicateKey,
            "duplicate-key",
        ),
    ];
    for (text, kind, code) in cases {
        let got = kinds(&text);
        assert!(
            got.contains(&kind),
            "wanted {kind:?} in {got:?} for\n{text}"
        );
        assert_eq!(kind.code(), code);
    }
    // Nesting too deep is refused before any reader runs.
    let deep = format!("design: {}{}\n", "[".repeat(200), "]".repeat(200));
    assert!(kinds(&deep).contains(&K::TooDeep));
}
