//! Measured captures as loads: the example capture is the synthesised one, reading keeps the
//! charge, a square wave runs as its two-mode profile, compression keeps the lowest voltage
//! within its tolerance, bad captures are refused at their line, and `joulepath capture`.

use std::fmt::Write as _;
use std::path::Path;

use joulepath::Design;
use joulepath::capture::{MAX_BYTES, read_capture, read_capture_file};
use joulepath::solve::{RunOptions, run};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

use crate::util::{Test, close, root};

/// The synthesised advertising event of `examples/captures/advert.csv` (not a measurement):
/// sleep, a wake ramp, three transmit bursts with channel changes between them, a receive
/// window, the wind-down and sleep again, sampled every 2 µs with a little noise from a
/// fixed-seed generator.
fn advert_csv() -> String {
    // Levels in mA against time in µs (invented, typical of the part class).
    let level = |t: f64| -> f64 {
        match t {
            t if t < 200.0 => 0.0021,
            t if t < 500.0 => 0.0021 + (t - 200.0) / 300.0 * (3.0 - 0.0021),
            t if t < 700.0 => 3.0,
            t if t < 1100.0 => 8.2,
            t if t < 1250.0 => 3.4,
            t if t < 1650.0 => 8.2,
            t if t < 1800.0 => 3.4,
            t if t < 2200.0 => 8.2,
            t if t < 2350.0 => 3.4,
            t if t < 3350.0 => 6.1,
            t if t < 3600.0 => 2.4 * (-(t - 3350.0) / 60.0).exp() + 0.0021,
            _ => 0.0021,
        }
    };
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2032);
    let noise = Normal::new(0.0, 1.0).expect("unit normal");
    let mut out = String::from(
        "# Synthesised advertising event of an invented radio tag: NOT a measurement.\n\
         # Made by `advert_csv` in tests/capture.rs (fixed seed); see examples/captures/README.md.\n\
         time [ms], current [mA]\n",
    );
    for k in 0..3000 {
        let t = f64::from(k) * 2.0;
        let base = level(t);
        // Noise of 6 µA on the active levels, 2 % in sleep.
        let sigma = if base > 0.01 { 0.006 } else { 0.02 * base };
        let i = (base + sigma * noise.sample(&mut rng)).max(0.0);
        let _ = writeln!(out, "{:.3}, {:.5}", t / 1000.0, i);
    }
    out
}

#[test]
fn example_capture_is_the_synthesised_one() {
    let path = root().join("examples/captures/advert.csv");
    let made = advert_csv();
    if std::env::var_os("JOULEPATH_WRITE_CAPTURE").is_some() {
        std::fs::write(&path, &made).expect("write the example capture");
    }
    let file = std::fs::read_to_string(&path).expect("examples/captures/advert.csv");
    assert!(
        file == made,
        "examples/captures/advert.csv differs from `advert_csv`: run the test with JOULEPATH_WRITE_CAPTURE=1"
    );
}

/// A test cell: linear OCV, an ohmic resistance and a polarization branch, no self-discharge.
fn design_text(cell_r: &str, loads: &str, modes: &str, profile: &str) -> String {
    format!(
        "cells:\n  c: {{ capacity: 10 mAh, ocv: [[0 %, 3.0 V], [100 %, 4.0 V]], resistance: {cell_r}, polarization: {{ resistance: 5 ohm, time_constant: 2 ms }}, cutoff: 3.0 V }}\n\
         battery: {{ cell: c }}\nloads:\n{loads}\nmodes: {modes}\nprofile: {profile}\n"
    )
}

fn in_dir(dir: &Path, text: &str) -> Design {
    Design::from_text_in(text, &[], dir).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

#[test]
fn segments_keep_the_captures_charge() {
    // The example's capture, as the example design compresses it: the segments' charge equals
    // the capture's (sample and hold) to 1e-9.
    let dir = root().join("examples");
    let d = Design::from_file(&dir.join("beacon-capture.yaml")).unwrap();
    let cap = read_capture_file(&dir.join("captures/advert.csv"), false).unwrap();
    let load = &d.loads()[0];
    let c = &load.captured()[0];
    let q: f64 = c
        .segments()
        .iter()
        .map(|&(s, k)| match load.states()[k].1 {
            joulepath::model::Draw::Current(i) => i * s,
            other => panic!("{other:?}"),
        })
        .sum();
    assert!(close(q, cap.charge_c(), 1e-9), "{q} vs {}", cap.charge_c());
    assert!(close(c.duration_s(), 6e-3, 1e-12), "{}", c.duration_s());
    assert!(
        c.bound_v() <= c.tolerance_v(),
        "{} > {}",
        c.bound_v(),
        c.tolerance_v()
    );
    assert!(c.segments().len() < 100, "{} segments", c.segments().len());
    // And the run draws it: 50 captures back to back (nothing else) give 50 times its charge.
    let t = tempfile::tempdir().unwrap();
    std::fs::copy(dir.join("captures/advert.csv"), t.path().join("a.csv")).unwrap();
    let text = design_text(
        "10 ohm",
        "  - { id: r, rail: battery, draw: { ev: { capture: a.csv } } }",
        "{ ev: { r: ev } }",
        "[{ mode: ev, for: capture }]",
    );
    let d = in_dir(t.path(), &text);
    let mut o = RunOptions::reference(&d);
    o.horizon_s = 50.0 * 6e-3;
    let r = run(&d, &o).unwrap();
    assert_eq!(r.end.reason.name(), "horizon");
    assert!(
        close(r.ledger.charge_c, 50.0 * cap.charge_c(), 1e-9),
        "{} vs {}",
        r.ledger.charge_c,
        50.0 * cap.charge_c()
    );
}

#[test]
fn a_square_wave_capture_runs_as_its_two_mode_profile() {
    // 5 mA for 2 ms, 50 µA for 8 ms, sampled every 0.1 ms: the same as two modes alternating.
    let t = tempfile::tempdir().unwrap();
    let mut csv = String::from("time [ms], current [mA]\n");
    for k in 0..100 {
        let ms = f64::from(k) * 0.1;
        let _ = writeln!(csv, "{ms:.1}, {}", if ms < 2.0 - 1e-9 { 5.0 } else { 0.05 });
    }
    std::fs::write(t.path().join("sq.csv"), csv).unwrap();
    let captured = in_dir(
        t.path(),
        &design_text(
            "2 ohm",
            "  - { id: l, rail: battery, draw: { sq: { capture: sq.csv } } }",
            "{ run: { l: sq } }",
            "[{ mode: run, for: 1 h }]",
        ),
    );
    assert_eq!(captured.loads()[0].captured()[0].segments().len(), 2);
    let modes = in_dir(
        t.path(),
        &design_text(
            "2 ohm",
            "  - { id: l, rail: battery, draw: { hi: 5 mA, lo: 50 µA } }",
            "{ hi: { l: hi }, lo: { l: lo } }",
            "[{ repeat: [{ mode: hi, for: 2 ms }, { mode: lo, for: 8 ms }], for: 1 h }]",
        ),
    );
    let a = run(&captured, &RunOptions::for_design(&captured)).unwrap();
    let b = run(&modes, &RunOptions::for_design(&modes)).unwrap();
    assert_eq!(a.end.reason, b.end.reason);
    // The bound: within 0.2 % of the runtime.
    assert!(
        close(a.runtime_s(), b.runtime_s(), 2e-3),
        "{} vs {}",
        a.runtime_s(),
        b.runtime_s()
    );
    eprintln!(
        "square wave: capture {} s, two modes {} s, difference {:.2e}",
        a.runtime_s(),
        b.runtime_s(),
        (a.runtime_s() / b.runtime_s() - 1.0).abs()
    );
}

/// The lowest terminal voltage of a reference run of `d` over `horizon_s`.
fn lowest_voltage(d: &Design, horizon_s: f64) -> f64 {
    let mut o = RunOptions::reference(d);
    o.horizon_s = horizon_s;
    o.trace = true;
    let r = run(d, &o).unwrap();
    r.trace
        .iter()
        .map(|p| p.voltage)
        .fold(f64::INFINITY, f64::min)
}

#[test]
fn a_compressed_pulse_train_keeps_the_lowest_voltage_within_its_tolerance() {
    // Two smooth pulses (every sample different), 1000 samples every 10 µs: with no tolerance
    // every sample that differs from the one before is its own segment (the uncompressed
    // chronological run), with 5 mV a few.
    let t = tempfile::tempdir().unwrap();
    let mut csv = String::from("time [us], current [uA]\n");
    for k in 0..1000 {
        let ms = f64::from(k) * 0.01;
        let i = 20_000.0 * (-((ms - 3.0) / 0.8).powi(2)).exp()
            + 5_000.0 * (-((ms - 7.0) / 0.5).powi(2)).exp()
            + 10.0;
        let _ = writeln!(csv, "{}, {i:.4}", k * 10);
    }
    std::fs::write(t.path().join("p.csv"), csv).unwrap();
    let with = |tol: &str| {
        in_dir(
            t.path(),
            &design_text(
                "10 ohm",
                &format!(
                    "  - {{ id: l, rail: battery, draw: {{ p: {{ capture: p.csv, tolerance: {tol} }}, idle: 10 µA }} }}"
                ),
                "{ pulse: { l: p }, rest: { l: idle } }",
                "[{ mode: pulse, for: capture }, { mode: rest, for: 40 ms }]",
            ),
        )
    };
    let raw = with("0 mV");
    let packed = with("5 mV");
    let (n_raw, n_packed) = (
        raw.loads()[0].captured()[0].segments().len(),
        packed.loads()[0].captured()[0].segments().len(),
    );
    // (Far from the pulses the samples print equal, 10 µA, and merge exactly.)
    assert!(n_raw >= 900, "{n_raw} segments without a tolerance");
    assert!(n_packed < 60, "{n_packed} segments within 5 mV");
    let bound = packed.loads()[0].captured()[0].bound_v();
    assert!(bound <= 5e-3, "{bound}");
    // Ten pulses of the chronological reference.
    let (v_raw, v_packed) = (lowest_voltage(&raw, 0.5), lowest_voltage(&packed, 0.5));
    assert!(
        (v_raw - v_packed).abs() <= 5e-3,
        "lowest voltage {v_raw} uncompressed, {v_packed} in {n_packed} segments"
    );
    eprintln!(
        "pulse train: {n_raw} -> {n_packed} segments, bound {bound:.4} V, lowest voltage {v_raw:.5} V vs {v_packed:.5} V"
    );
}

/// Each file of `tests/data/captures/bad/` says what its error must say (`# expect: ...`) and
/// where (`# at: LINE:COL`).
#[test]
fn bad_captures_are_refused_at_their_place() {
    let dir = root().join("tests/data/captures/bad");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    files.sort();
    assert!(files.len() >= 10, "{files:?}");
    for f in files {
        let text = std::fs::read_to_string(&f).unwrap();
        let want = |key: &str| {
            text.lines()
                .find_map(|l| l.strip_prefix(&format!("# {key}: ")))
                .map(str::trim)
        };
        let expect = want("expect").unwrap_or_else(|| panic!("{}: no `# expect:`", f.display()));
        let e = read_capture_file(&f, false).expect_err(&f.display().to_string());
        assert!(
            e.message().contains(expect),
            "{}: `{}` does not say `{expect}`",
            f.display(),
            e.message()
        );
        assert!(e.hint().is_some(), "{}: no hint", f.display());
        if let Some(at) = want("at") {
            let l = e
                .location()
                .unwrap_or_else(|| panic!("{}: no place", f.display()));
            assert_eq!(format!("{}:{}", l.line, l.col), at, "{}: {e}", f.display());
        }
    }
}

#[test]
fn a_capture_of_10_mib_or_more_is_refused_before_reading() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("big.csv");
    let mut text = String::from("time [us], current [uA]\n");
    let mut k = 0_u64;
    while text.len() <= MAX_BYTES {
        let _ = writeln!(text, "{k}, 12.5");
        k += 1;
    }
    std::fs::write(&path, &text).unwrap();
    let e = read_capture_file(&path, false).unwrap_err();
    assert!(e.message().contains("more than the 10485760 bytes"), "{e}");
    assert_eq!(e.line(), Some(1));
    let e = read_capture(&text, "big.csv", false).unwrap_err();
    assert!(e.message().contains("10 MiB"), "{e}");
}

#[test]
fn captures_in_designs_are_checked() {
    let t = tempfile::tempdir().unwrap();
    let put = |name: &str, text: &str| std::fs::write(t.path().join(name), text).unwrap();
    put("a.csv", "time [ms], current [mA]\n0, 1\n1, 2\n2, 1\n");
    put("b.csv", "time [ms], current [mA]\n0, 1\n1, 2\n2, 1\n3, 1\n");
    put(
        "v.csv",
        "time [ms], current [mA], voltage [V]\n0, 1, 3\n1, 2, 3\n",
    );
    put("bad.csv", "time [ms], current [mA]\n0, 1\n1, x\n");
    let check = |loads: &str, modes: &str, profile: &str| {
        let text = design_text("1 ohm", loads, modes, profile);
        Design::from_text_in(&text, &[], t.path())
            .map(|_| ())
            .map_err(|e| e.to_string())
    };
    let one = |draw: &str| format!("  - {{ id: l, rail: battery, draw: {{ s: {draw} }} }}");
    // A bad row is named with its file, line and column, at the capture's key.
    let e = check(
        &one("{ capture: bad.csv }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(
        e.contains("capture `bad.csv`") && e.contains("line 3, column 4"),
        "{e}"
    );
    assert!(e.contains("loads[0].draw.s.capture"), "{e}");
    let e = check(
        &one("{ capture: none.csv }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(e.contains("cannot read the capture"), "{e}");
    let e = check(
        &one("{ capture: v.csv }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(e.contains("scale: current"), "{e}");
    assert!(
        check(
            &one("{ capture: v.csv, scale: power }"),
            "{ m: { l: s } }",
            "[{ mode: m, for: 1 s }]"
        )
        .is_ok()
    );
    let e = check(
        &one("{ capture: a.csv, scale: power }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(e.contains("needs a voltage column"), "{e}");
    let e = check(
        &one("1 mA"),
        "{ m: { l: s } }",
        "[{ mode: m, for: capture }]",
    )
    .unwrap_err();
    assert!(e.contains("`for: capture` needs a mode"), "{e}");
    let e = check(
        &one("{ capture: a.csv }"),
        "{ m: { l: s } }",
        "[{ repeat: [{ mode: m, for: 1 s }], for: capture }]",
    )
    .unwrap_err();
    assert!(e.contains("belongs to a step with a mode"), "{e}");
    let two = "  - { id: l, rail: battery, draw: { s: { capture: a.csv } } }\n  - { id: k, rail: battery, draw: { s: { capture: b.csv } } }";
    let e = check(two, "{ m: { l: s, k: s } }", "[{ mode: m, for: 1 s }]").unwrap_err();
    assert!(e.contains("must last the same"), "{e}");
    let e = check(
        &one("{ capture: a.csv, tolerance: -1 mV }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(e.contains("negative"), "{e}");
    // Tolerances: a captured draw cannot vary, a captured step's duration can (when given).
    let tol = |extra: &str| {
        let text = format!(
            "{}tolerances:\n  {extra}: ±10 %\n",
            design_text(
                "1 ohm",
                &one("{ capture: a.csv }"),
                "{ m: { l: s } }",
                "[{ mode: m, for: 1 s }, { mode: m, for: capture }]"
            )
        );
        Design::from_text_in(&text, &[], t.path())
            .map(|_| ())
            .map_err(|e| e.to_string())
    };
    assert!(tol("profile[0].for").is_ok());
    let e = tol("profile[1].for").unwrap_err();
    assert!(e.contains("lasts one capture"), "{e}");
    let e = tol("profile[0].repeat[0].for").unwrap_err();
    assert!(e.contains("only its `for` can vary"), "{e}");
    let e = tol("loads.l.draw.s").unwrap_err();
    assert!(e.contains("follows a capture"), "{e}");
    // Without a directory, a capture cannot be read, and the message says how to give one.
    let text = design_text(
        "1 ohm",
        &one("{ capture: a.csv }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    );
    let e = Design::from_text(&text).unwrap_err().to_string();
    assert!(e.contains("not read from a file"), "{e}");
    // Too many segments asks for a larger tolerance.
    let mut saw = String::from("time [us], current [mA]\n");
    for k in 0..5000 {
        let _ = writeln!(saw, "{}, {}", k, if k % 2 == 0 { 1 } else { 9 });
    }
    put("saw.csv", &saw);
    let e = check(
        &one("{ capture: saw.csv }"),
        "{ m: { l: s } }",
        "[{ mode: m, for: 1 s }]",
    )
    .unwrap_err();
    assert!(
        e.contains("more than 2000 segments") && e.contains("raise `tolerance`"),
        "{e}"
    );
}

#[test]
fn two_captured_loads_in_one_mode_share_their_segments_boundaries() {
    let t = tempfile::tempdir().unwrap();
    // l: 2 mA for 1 ms then 0; k: 0 for 0.5 ms then 4 mA for 1.5 ms (both 2 ms long).
    std::fs::write(
        t.path().join("l.csv"),
        "time [ms], current [mA]\n0, 2\n0.5, 2\n1, 0\n1.5, 0\n",
    )
    .unwrap();
    std::fs::write(
        t.path().join("k.csv"),
        "time [ms], current [mA]\n0, 0\n0.5, 4\n1, 4\n1.5, 4\n",
    )
    .unwrap();
    let text = design_text(
        "1 ohm",
        "  - { id: l, rail: battery, draw: { s: { capture: l.csv } } }\n  - { id: k, rail: battery, draw: { s: { capture: k.csv } } }",
        "{ m: { l: s, k: s } }",
        "[{ mode: m, for: 5 ms }]",
    );
    let d = in_dir(t.path(), &text);
    let joulepath::model::Step::Repeat { steps, until } = &d.profile()[0] else {
        panic!("{:?}", d.profile()[0]);
    };
    assert_eq!(*until, joulepath::model::RepeatUntil::Seconds(5e-3));
    // Boundaries at 0.5 ms (k starts) and 1 ms (l stops): three pieces.
    let lens: Vec<f64> = steps.iter().map(joulepath::model::Step::duration).collect();
    assert_eq!(lens.len(), 3, "{lens:?}");
    assert!(
        close(lens[0], 5e-4, 1e-9) && close(lens[1], 5e-4, 1e-9) && close(lens[2], 1e-3, 1e-9),
        "{lens:?}"
    );
    // The budget shows the file's modes only, and the check names the step as written.
    let out = Test::new().design(&text).args(&["check", "{file}"]);
    std::fs::copy(t.path().join("l.csv"), out.dir().join("l.csv")).unwrap();
    std::fs::copy(t.path().join("k.csv"), out.dir().join("k.csv")).unwrap();
    let o = out.expect_code(0);
    assert!(o.stdout.contains("modes: m\n"), "{}", o.stdout);
    assert!(o.stdout.contains("m 5.00 ms (captured)"), "{}", o.stdout);
}

#[test]
fn capture_command_summarizes_and_draws() {
    let with_capture = |args: &[&str]| {
        let t = Test::new().args(args);
        std::fs::copy(
            root().join("examples/captures/advert.csv"),
            t.dir().join("advert.csv"),
        )
        .unwrap();
        t
    };
    let out = with_capture(&["capture", "advert.csv"]).expect_code(0);
    for want in [
        "charge per event",
        "RMS current",
        "peak current",
        "segments",
        "modes:",
        "profile:",
    ] {
        assert!(out.stdout.contains(want), "no `{want}`:\n{}", out.stdout);
    }
    let t = with_capture(&[
        "capture",
        "advert.csv",
        "--format",
        "json",
        "--plot",
        "advert.png",
    ]);
    let j = t.expect_code(0).json();
    let png = std::fs::read(t.dir().join("advert.png")).unwrap();
    assert!(png.starts_with(b"\x89PNG"), "not a PNG");
    let cap = read_capture_file(&root().join("examples/captures/advert.csv"), false).unwrap();
    assert!(close(
        j["charge_c"].as_f64().unwrap(),
        cap.charge_c(),
        1e-12
    ));
    let segs = j["segments"].as_array().unwrap();
    let q: f64 = segs
        .iter()
        .map(|s| s["current_a"].as_f64().unwrap() * s["seconds"].as_f64().unwrap())
        .sum();
    assert!(close(q, cap.charge_c(), 1e-9), "{q}");
    assert!(j["bound_v"].as_f64().unwrap() <= j["tolerance_v"].as_f64().unwrap());
    // The suggested block is a valid design with the capture's charge per event (its values
    // rounded to four digits).
    let suggested = j["suggested"].as_str().unwrap();
    let text = format!(
        "cells:\n  c: {{ capacity: 10 mAh, ocv: [[0 %, 3.0 V], [100 %, 4.0 V]], resistance: 1 ohm, cutoff: 3.0 V }}\nbattery: {{ cell: c }}\n{suggested}"
    );
    let d = Design::from_text(&text).unwrap_or_else(|e| panic!("{e}\n{text}"));
    let joulepath::model::Step::Repeat { steps, .. } = &d.profile()[0] else {
        panic!("{text}");
    };
    let q: f64 = steps
        .iter()
        .map(|s| match s {
            joulepath::model::Step::Hold { mode, seconds } => {
                let st = d.modes()[*mode].load_states()[0].unwrap();
                match d.loads()[0].states()[st].1 {
                    joulepath::model::Draw::Current(i) => i * seconds,
                    other => panic!("{other:?}"),
                }
            }
            other @ joulepath::model::Step::Repeat { .. } => panic!("{other:?}"),
        })
        .sum();
    assert!(close(q, cap.charge_c(), 1e-3), "{q} vs {}", cap.charge_c());
    // A bad file: exit 1, its line shown.
    let bad = Test::new().args(&["capture", "bad.csv"]);
    std::fs::write(
        bad.dir().join("bad.csv"),
        "time [ms], current [mA]\n0, 1\n0, 2\n",
    )
    .unwrap();
    let o = bad.expect_code(1);
    assert!(
        o.stderr.contains("line 3") && o.stderr.contains("not after"),
        "{}",
        o.stderr
    );
}

#[test]
fn fast_solver_agrees_with_the_reference_on_a_captured_design() {
    // DESIGN section 6: within 0.2 % and the same end reason; the example on a 0.5 mAh cell so
    // that the reference, which executes every pass, is quick.
    let dir = root().join("examples");
    let text = std::fs::read_to_string(dir.join("beacon-capture.yaml"))
        .unwrap()
        .replace(
            "  cell: li-mno2-cr2032",
            "  cell: { preset: li-mno2-cr2032, capacity: 0.5 mAh }",
        );
    let d = in_dir(&dir, &text);
    let a = run(&d, &RunOptions::for_design(&d)).unwrap();
    let b = run(&d, &RunOptions::reference(&d)).unwrap();
    assert_eq!(a.end.reason, b.end.reason);
    assert!(
        close(a.runtime_s(), b.runtime_s(), 2e-3),
        "{} vs {}",
        a.runtime_s(),
        b.runtime_s()
    );
}
