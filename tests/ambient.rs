//! A recorded ambient (`ambient: { file: temps.csv }`): its runs against hand computations and
//! the chronological reference, and bad files refused at their place.

use std::fmt::Write as _;
use std::path::Path;

use joulepath::Design;
use joulepath::model::{MAX_AMBIENT_BYTES, MAX_AMBIENT_ROWS, read_ambient, read_ambient_file};
use joulepath::solve::{RunOptions, RunResult, run};

use crate::util::{Test, close, root};

/// A 1 Ah cell on a steady 10 mA load whose capacity is 100 % at 25 °C and 60 % at -20 °C
/// (linear between), flat at 3.0 V, under `ambient` (text of the `ambient:` key).
fn text(ambient: &str) -> String {
    format!(
        "ambient: {ambient}\ncells:\n  c:\n    capacity: 1 Ah\n    ocv: [[0 %, 3.0 V], [100 %, 3.0 V]]\n    resistance: 0 ohm\n    cutoff: 2.0 V\n    temperature:\n      - {{ at: 25 °C, capacity: 100 %, resistance: 100 % }}\n      - {{ at: -20 °C, capacity: 60 %, resistance: 100 % }}\nbattery: {{ cell: c }}\nloads: [{{ id: l, rail: battery, draw: {{ on: 10 mA }} }}]\nmodes: {{ on: {{ l: on }} }}\nprofile: [{{ mode: on, for: 1 h }}]\n"
    )
}

/// The design under `ambient`, with `csv` written as `t.csv` beside it.
fn with_file(dir: &Path, ambient: &str, csv: &str) -> Result<Design, joulepath::error::Error> {
    std::fs::write(dir.join("t.csv"), csv).unwrap();
    Design::from_text_in(&text(ambient), &[], dir)
}

fn fast(d: &Design) -> RunResult {
    run(d, &RunOptions::for_design(d)).expect("the run gives a result")
}

#[test]
fn a_constant_file_runs_exactly_as_a_constant_ambient() {
    let t = tempfile::tempdir().unwrap();
    let csv = "time [h], temperature [°C]\n0, 2.5\n10, 2.5\n24, 2.5\n";
    let file = with_file(t.path(), "{ file: t.csv }", csv).unwrap();
    let plain = Design::from_text(&text("2.5 °C")).unwrap();
    assert_eq!(file.ambient_c().to_bits(), 2.5_f64.to_bits());
    let (a, b) = (fast(&file), fast(&plain));
    assert_eq!(a.runtime_s().to_bits(), b.runtime_s().to_bits());
    // 1 Ah x 80 % / 10 mA = 80 h at 2.5 °C, halfway down the table (hand computation).
    assert!(close(b.runtime_s(), 80.0 * 3600.0, 1e-9));
    assert_eq!(a.ambient_range_c, Some((2.5, 2.5)));
    let repeated = with_file(t.path(), "{ file: t.csv, repeat: true }", csv).unwrap();
    assert_eq!(
        fast(&repeated).runtime_s().to_bits(),
        b.runtime_s().to_bits()
    );
}

/// The file's temperature at `t` seconds: straight lines between the rows, starting again after
/// the last (the test's own reading of the rows, in seconds).
fn two_level(rows: &[(f64, f64)], repeat: bool, t: f64) -> f64 {
    let last = rows[rows.len() - 1];
    let t = if repeat { t.rem_euclid(last.0) } else { t };
    if t >= last.0 {
        return last.1;
    }
    let k = rows.iter().position(|r| r.0 > t).unwrap();
    let (a, b) = (rows[k - 1], rows[k]);
    a.1 + (b.1 - a.1) * (t - a.0) / (b.0 - a.0)
}

/// The end of a 10 mA run from 1 Ah whose capacity factor is linear in T,
/// f = 0.6 + 0.4 (T + 20) / 45: where integral I / (Q f(T(t))) dt reaches 1, by the midpoint
/// rule over 1 s (hand computation).
fn hand_runtime(temp: &dyn Fn(f64) -> f64) -> f64 {
    let factor = |c: f64| 0.6 + 0.4 * ((c + 20.0) / 45.0).clamp(0.0, 1.0);
    let (q, i, h) = (3600.0, 0.01, 1.0);
    let (mut used, mut t) = (0.0, 0.0);
    loop {
        let rate = i / (q * factor(temp(t + 0.5 * h)));
        if used + rate * h >= 1.0 {
            return t + (1.0 - used) / rate;
        }
        used += rate * h;
        t += h;
    }
}

#[test]
fn half_the_time_cold_against_a_hand_computation() {
    // Ten hours at 25 °C, a minute's ramp, ten hours at -20 °C, a minute back, repeated: the
    // charge goes at I / Q warm and I / (0.6 Q) cold. Without the ramps: three periods of 20 h
    // use 3 x (0.1 + 0.1667) = 0.8, the next 10 h warm 0.1, and the last 0.1 goes cold in 6 h:
    // 76 h.
    let rows_min = [
        (0.0, 25.0),
        (600.0, 25.0),
        (601.0, -20.0),
        (1200.0, -20.0),
        (1201.0, 25.0),
    ];
    let mut csv = String::from("# ten hours warm, ten cold\ntime [min], temperature [°C]\n");
    for (t, c) in rows_min {
        let _ = writeln!(csv, "{t}, {c}");
    }
    let rows: Vec<(f64, f64)> = rows_min.iter().map(|&(t, c)| (t * 60.0, c)).collect();
    let t = tempfile::tempdir().unwrap();
    let d = with_file(t.path(), "{ file: t.csv, repeat: true }", &csv).unwrap();
    let r = fast(&d);
    let want = hand_runtime(&|s| two_level(&rows, true, s));
    assert!(close(want, 76.0 * 3600.0, 2e-3), "{} h", want / 3600.0);
    assert!(
        close(r.runtime_s(), want, 1e-3),
        "{} h vs {} h",
        r.runtime_s() / 3600.0,
        want / 3600.0
    );
    let (lo, hi) = r.ambient_range_c.expect("a climate");
    assert!(close(lo, -20.0, 1e-9) && close(hi, 25.0, 1e-9), "{lo} {hi}");
    // The chronological reference agrees (0.2 %, as for every climate).
    let e = run(&d, &RunOptions::reference(&d)).unwrap();
    assert!(
        close(r.runtime_s(), e.runtime_s(), 2e-3),
        "{} vs {}",
        r.runtime_s(),
        e.runtime_s()
    );
    // Without `repeat` the last temperature (25 °C) holds after 20 h: 0.1 + 0.1667 used by
    // then, the rest warm, 20 h + 73.3 h.
    let held = with_file(t.path(), "{ file: t.csv }", &csv).unwrap();
    let want = hand_runtime(&|s| two_level(&rows, false, s));
    assert!(
        close(want, (20.0 + 73.333) * 3600.0, 2e-3),
        "{} h",
        want / 3600.0
    );
    assert!(close(fast(&held).runtime_s(), want, 1e-3));
}

#[test]
fn a_kelvin_file_in_days_reads_as_celsius_in_seconds() {
    let (mean, r) = read_ambient(
        "temperature [K]; time [d]\n273.15; 0\n293.15; 1\n273.15; 2\n",
        "k.csv",
        false,
    )
    .unwrap();
    // Time-weighted mean of a triangle from 0 °C to 20 °C and back: 10 °C.
    assert!((mean - 10.0).abs() < 1e-9, "{mean}");
    assert!((mean + r.at(0.5 * 86_400.0) - 10.0).abs() < 1e-9);
    assert!((mean + r.at(5.0 * 86_400.0)).abs() < 1e-9);
    assert_eq!(r.len(), 3);
}

/// Each file of `tests/data/ambient/bad/` says what its error must say (`# expect: ...`,
/// `# expect-also: ...` for a second bad row) and where (`# at: LINE:COL`).
#[test]
fn bad_ambient_files_are_refused_at_their_place() {
    let dir = root().join("tests/data/ambient/bad");
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
        let errors = read_ambient_file(&f, false).expect_err(&f.display().to_string());
        let e = &errors[0];
        assert!(
            e.message().contains(expect),
            "{}: `{}` does not say `{expect}`",
            f.display(),
            e.message()
        );
        assert!(
            errors.iter().all(|e| e.hint().is_some()),
            "{}: no hint",
            f.display()
        );
        if let Some(also) = want("expect-also") {
            assert!(
                errors.iter().any(|e| e.message().contains(also)),
                "{}: {errors:?}",
                f.display()
            );
        }
        if let Some(at) = want("at") {
            let l = e
                .location()
                .unwrap_or_else(|| panic!("{}: no place", f.display()));
            assert_eq!(format!("{}:{}", l.line, l.col), at, "{}: {e}", f.display());
        }
    }
}

#[test]
fn an_ambient_file_is_bounded_in_bytes_and_rows() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("big.csv");
    let mut text = String::from("time [s], temperature [°C]\n");
    let mut k = 0_u64;
    while text.len() <= MAX_AMBIENT_BYTES {
        let _ = writeln!(text, "{k}, 12.5");
        k += 1;
    }
    std::fs::write(&path, &text).unwrap();
    let e = read_ambient_file(&path, false).unwrap_err();
    assert!(
        e[0].message().contains("more than the 4194304 bytes"),
        "{e:?}"
    );
    let mut rows = String::from("time [s], temperature [°C]\n");
    for k in 0..=MAX_AMBIENT_ROWS {
        let _ = writeln!(rows, "{k},1");
    }
    assert!(rows.len() < MAX_AMBIENT_BYTES);
    let e = read_ambient(&rows, "rows.csv", false).unwrap_err();
    assert!(e[0].message().contains("more than 200000 rows"), "{e:?}");
    // Many bad rows: ten listed, the rest counted.
    let mut bad = String::from("time [s], temperature [°C]\n");
    for k in 0..25 {
        let _ = writeln!(bad, "{k}, hot");
    }
    let e = read_ambient(&bad, "bad.csv", false).unwrap_err();
    assert_eq!(e.len(), 11, "{e:?}");
    assert!(e[10].message().contains("15 more bad rows"), "{e:?}");
}

#[test]
fn a_recorded_ambient_in_a_design_is_checked() {
    let t = tempfile::tempdir().unwrap();
    let good = "time [h], temperature [°C]\n0, 20\n1, 21\n";
    let msg = |r: Result<Design, joulepath::error::Error>| r.unwrap_err().to_string();
    // The file gives the ambient at every time: no cycle beside it.
    let e = msg(with_file(t.path(), "{ file: t.csv, mean: 5 °C }", good));
    assert!(e.contains("`mean` cannot be given with `file`"), "{e}");
    let e = msg(Design::from_text(&text("{ mean: 5 °C, repeat: true }")));
    assert!(e.contains("`repeat` belongs to a recorded ambient"), "{e}");
    // Text that did not come from a file has no directory to read from.
    let e = msg(Design::from_text(&text("{ file: t.csv }")));
    assert!(e.contains("the design was not read from a file"), "{e}");
    let e = msg(with_file(t.path(), "{ file: missing.csv }", good));
    assert!(e.contains("cannot read the ambient file"), "{e}");
    // A bad row is named in the design's error, with its line.
    let e = msg(with_file(
        t.path(),
        "{ file: t.csv }",
        "time [h], temperature [°C]\n0, 20\n1, 900\n",
    ));
    assert!(e.contains("ambient file `t.csv`: line 3, column 4"), "{e}");
    let e = msg(with_file(
        t.path(),
        "{ file: t.csv, repeat: yes please }",
        good,
    ));
    assert!(e.contains("repeat"), "{e}");
}

#[test]
fn the_command_line_reads_the_file_beside_the_design_and_refuses_a_bad_one() {
    let t = Test::new()
        .design(&text("{ file: t.csv, repeat: true }"))
        .args(&["runtime", "{file}"]);
    std::fs::write(
        t.dir().join("t.csv"),
        "time [h], temperature [°C]\n0, 25\n12, -20\n24, 25\n",
    )
    .unwrap();
    let out = t.expect_code(0);
    assert!(
        out.stdout.contains("-20.0 °C to 25.0 °C ambient"),
        "{}",
        out.stdout
    );
    let check = Test::new()
        .design(&text("{ file: t.csv, repeat: true }"))
        .args(&["check", "{file}"]);
    std::fs::write(
        check.dir().join("t.csv"),
        "time [h], temperature [°C]\n0, 25\n24, 5\n",
    )
    .unwrap();
    let out = check.expect_code(0);
    assert!(out.stdout.contains("15.0 °C ambient"), "{}", out.stdout);
    assert!(
        out.stdout
            .contains("a recorded series of 2 rows around that mean, repeated"),
        "{}",
        out.stdout
    );
    std::fs::write(
        t.dir().join("t.csv"),
        "time [h], temperature [°C]\n0, 25\n0, 20\n",
    )
    .unwrap();
    let out = t.expect_code(1);
    assert!(
        out.stderr.contains("not after the row before"),
        "{}",
        out.stderr
    );
}
