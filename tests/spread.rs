//! `spread`: the Monte Carlo over a design's tolerances, its statistics against closed forms,
//! the swings, the corners, determinism across threads, and the command line.

use joulepath::Design;
use joulepath::model::{Dist, Knob};
use joulepath::solve::EndReason;
use joulepath::spread::{SpreadOptions, spread};
use statrs::distribution::{ContinuousCDF, Normal};

use crate::util::{Test, root};

/// A cell with a flat open-circuit voltage and no resistance, one constant-current load held
/// in one-hour steps: the product runs Q / I and stops empty (the definition of capacity,
/// Q = I t).
fn q_over_i(capacity: &str, loads: &str, tolerances: &str) -> Design {
    let text = format!(
        "cells:
  flat: {{ capacity: {capacity}, ocv: [[0 %, 3 V], [100 %, 3 V]], resistance: 0 ohm, cutoff: 2 V }}
battery: {{ cell: flat }}
loads:
{loads}
modes: {{ on: {{ a: on, b: on }} }}
profile: [{{ mode: on, for: 1 h }}]
tolerances:
{tolerances}
"
    );
    Design::from_text(&text).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

/// A design without tolerances.
const PLAIN: &str = "
cells:
  c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 3 V]], resistance: 0 ohm, cutoff: 2 V }
battery: { cell: c }
loads: [{ id: lamp, rail: battery, draw: { on: 10 mA } }]
modes: { lit: { lamp: on } }
profile: [{ mode: lit, for: 1 h }]
";

const TWO_LOADS: &str = "  - { id: a, rail: battery, draw: { on: 80 mA } }
  - { id: b, rail: battery, draw: { on: 20 mA } }";

fn opts(d: &Design, samples: usize) -> SpreadOptions {
    let mut o = SpreadOptions::for_design(d);
    o.samples = samples;
    o.seed = 7;
    o
}

#[test]
fn q_over_i_with_normal_capacity_matches_the_closed_form_percentiles() {
    // T = Q / I with Q normal (mean 1 Ah, band ±15 % = 3 sigma, truncated at the band): T is
    // normal with mean 10 h and sigma 0.5 h, truncated at ±3 sigma. Its p-quantile is
    // mu + sigma z with z = Phi^-1(Phi(-3) + p (1 - 2 Phi(-3))) (the quantile of a truncated
    // normal; Johnson, Kotz and Balakrishnan, "Continuous Univariate Distributions", vol. 1,
    // ch. 13.10), Phi from the statrs crate.
    let d = q_over_i("1 Ah", TWO_LOADS, "  cells.flat.capacity: ±15 %");
    let n = 4000;
    let s = spread(&d, &opts(&d, n)).expect("spread");
    assert_eq!(s.failed, 0);
    assert!(s.ends.iter().all(|(e, _)| *e == EndReason::Empty));
    let std = Normal::new(0.0, 1.0).expect("normal");
    let tail = std.cdf(-3.0);
    let (mu, sigma) = (10.0, 0.5);
    for (p, got) in [
        (0.05, s.summary.p5),
        (0.5, s.summary.p50),
        (0.95, s.summary.p95),
    ] {
        let z = std.inverse_cdf(tail + p * (1.0 - 2.0 * tail));
        let want = mu + sigma * z;
        // Sampling error of a sample quantile: sqrt(p (1 - p) / N) / f(x_p), f the density there
        // (asymptotic normality of sample quantiles; David and Nagaraja, "Order Statistics",
        // 3rd ed., section 10.2). With N = 4000: 0.034 sigma at P5 and P95, 0.020 sigma at the
        // median. Allowed: four of them.
        let density =
            (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt() / sigma / (1.0 - 2.0 * tail);
        let se = (p * (1.0 - p) / n as f64).sqrt() / density;
        let got_h = got / 3600.0;
        assert!(
            (got_h - want).abs() < 4.0 * se,
            "P{}: {got_h} h, closed form {want} h (sampling error {se} h)",
            p * 100.0
        );
    }
    // The mean of the runtimes: 10 h within four standard errors (sigma / sqrt(N)).
    assert!((s.summary.mean / 3600.0 - mu).abs() < 4.0 * sigma / (n as f64).sqrt());
    // No draw lies beyond the band.
    assert!(s.summary.min / 3600.0 >= mu - 3.0 * sigma - 1e-9);
    assert!(s.summary.max / 3600.0 <= mu + 3.0 * sigma + 1e-9);
}

#[test]
fn uniform_and_pick_draws_have_the_closed_form_moments() {
    let d = q_over_i(
        "1 Ah",
        TWO_LOADS,
        "  loads.a.draw.on: [60 mA, 100 mA]\n  loads.b.draw.on: { pick: [10 mA, 20 mA, 40 mA] }",
    );
    let n = 6000;
    let s = spread(&d, &opts(&d, n)).expect("spread");
    let nf = n as f64;
    // Uniform on [a, b]: mean (a + b) / 2, variance (b - a)^2 / 12 (any statistics text, e.g.
    // Feller, "An Introduction to Probability Theory", vol. 2, I.1).
    let (a, b) = (0.060, 0.100);
    let xs: Vec<f64> = s.samples.iter().map(|o| o.values[0]).collect();
    let mean = xs.iter().sum::<f64>() / nf;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (nf - 1.0);
    let want_var = (b - a) * (b - a) / 12.0;
    // Standard errors: sqrt(var / N) for the mean; sqrt((mu4 - sigma^4) / N) for the variance,
    // with mu4 = (b - a)^4 / 80 for the uniform.
    let se_mean = (want_var / nf).sqrt();
    let se_var = (((b - a).powi(4) / 80.0 - want_var * want_var) / nf).sqrt();
    assert!((mean - 0.5 * (a + b)).abs() < 4.0 * se_mean, "mean {mean}");
    assert!(
        (var - want_var).abs() < 4.0 * se_var,
        "variance {var} vs {want_var}"
    );
    assert!(xs.iter().all(|&x| (a..=b).contains(&x)));
    // Pick of three: each choice with probability 1/3, standard error sqrt(p (1 - p) / N)
    // (binomial proportion).
    let picks: Vec<f64> = s.samples.iter().map(|o| o.values[1]).collect();
    for c in [0.010, 0.020, 0.040] {
        let share = picks.iter().filter(|&&x| (x - c).abs() < 1e-15).count() as f64 / nf;
        let se = (1.0 / 3.0 * 2.0 / 3.0 / nf).sqrt();
        assert!(
            (share - 1.0 / 3.0).abs() < 4.0 * se,
            "choice {c}: share {share}"
        );
    }
    assert!(picks.iter().all(|x| [0.010, 0.020, 0.040].contains(x)));
    // Each unit's runtime is its own Q / I.
    for o in s.samples.iter().take(50) {
        let t = 3600.0 / (o.values[0] + o.values[1]);
        let got = *o.runtime.as_ref().expect("runtime");
        assert!((got - t).abs() <= 1e-6 * t, "{got} vs Q/I {t}");
    }
}

#[test]
fn the_swing_ranks_values_as_the_hand_derivative_does() {
    // T = Q / (Ia + Ib). Linearised (first-order Taylor), the swing of a value over its band
    // ±d is 2 d |dT/dx|: Q ±10 % of 1 Ah -> 2 x 0.1 Ah / 0.1 A = 2 h; Ia = 80 mA ±5 %
    // -> 2 x Q x 4 mA / (0.1 A)^2 = 0.8 h; Ib = 20 mA ±30 % -> 2 x Q x 6 mA / (0.1 A)^2 = 1.2 h.
    // Order: capacity, then b, then a; more capacity lengthens, more current shortens.
    let d = q_over_i(
        "1 Ah",
        TWO_LOADS,
        "  loads.a.draw.on: ±5 %\n  cells.flat.capacity: ±10 %\n  loads.b.draw.on: ±30 %",
    );
    let s = spread(&d, &opts(&d, 400)).expect("spread");
    let order: Vec<&str> = s.swings.iter().map(|x| x.path.as_str()).collect();
    assert_eq!(
        order,
        ["cells.flat.capacity", "loads.b.draw.on", "loads.a.draw.on"]
    );
    let hand = [2.0, 1.2, 0.8];
    for (x, h) in s.swings.iter().zip(hand) {
        // The exact swing of Q / I over a ±d band differs from the linear one by O(d^2).
        let got = x.delta_s().abs() / 3600.0;
        assert!((got - h).abs() < 0.1 * h, "{}: {got} h, hand {h} h", x.path);
    }
    assert!(s.swings[0].delta_s() > 0.0 && s.swings[0].rank_correlation.expect("rho") > 0.5);
    assert!(s.swings[1].delta_s() < 0.0 && s.swings[1].rank_correlation.expect("rho") < 0.0);
}

#[test]
fn corners_bound_every_sample_of_a_monotone_design() {
    let d = q_over_i(
        "1 Ah",
        TWO_LOADS,
        "  loads.a.draw.on: [60 mA, 100 mA]\n  cells.flat.capacity: ±10 %\n  loads.b.draw.on: { pick: [10 mA, 40 mA] }",
    );
    let mut o = opts(&d, 1500);
    o.corners = true;
    let s = spread(&d, &o).expect("spread");
    let c = s.corners.as_ref().expect("corners");
    let worst = *c.worst.runtime.as_ref().expect("worst");
    let best = *c.best.runtime.as_ref().expect("best");
    // Closed forms: worst 0.9 Ah / 140 mA, best 1.1 Ah / 70 mA.
    assert!((worst / 3600.0 - 0.9 / 0.140).abs() < 1e-6);
    assert!((best / 3600.0 - 1.1 / 0.070).abs() < 1e-6);
    for x in &s.samples {
        let t = *x.runtime.as_ref().expect("runtime");
        assert!(
            worst <= t * (1.0 + 1e-9) && t <= best * (1.0 + 1e-9),
            "{t} outside [{worst}, {best}]"
        );
    }
}

#[test]
fn the_same_seed_gives_the_same_numbers_on_one_and_two_threads() {
    let text = std::fs::read_to_string(root().join("examples/soil-probe.yaml")).expect("example");
    let d = Design::from_text(&text).expect("valid");
    let o = opts(&d, 24);
    let on = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool")
            .install(|| spread(&d, &o).expect("spread"))
    };
    let (one, two) = (on(1), on(2));
    assert_eq!(one, two);
    // Another seed draws other units.
    let mut other = o;
    other.seed = 8;
    assert_ne!(spread(&d, &other).expect("spread").samples, one.samples);
}

#[test]
fn tolerances_are_read_into_knobs_and_spreads() {
    let text = std::fs::read_to_string(root().join("examples/soil-probe.yaml")).expect("example");
    let d = Design::from_text(&text).expect("valid");
    let t = &d.tolerances();
    assert_eq!(t.len(), 6);
    assert_eq!(*t[0].knob(), Knob::StageQuiescent(0));
    assert_eq!(
        *t[0].dist(),
        Dist::Uniform {
            lo: 0.6e-6,
            hi: 1.2e-6
        }
    );
    assert_eq!(*t[2].knob(), Knob::LoadDraw(2, 0));
    // ±10 % of 35 mA is three standard deviations.
    assert_eq!(
        *t[2].dist(),
        Dist::Normal {
            mean: 0.035,
            sigma: 0.035 * 0.1 / 3.0
        }
    );
    assert_eq!(*t[4].knob(), Knob::Ambient);
    assert_eq!(*t[5].knob(), Knob::StepFor(vec![0, 3]));
    assert_eq!(*t[5].dist(), Dist::Pick(vec![120.0, 300.0, 600.0]));
}

#[test]
fn bad_tolerances_are_reported_with_their_place_and_fix() {
    let base = "cells:
  c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 3 V]], resistance: 0 ohm, cutoff: 2 V }
battery: { cell: c }
stages: [{ id: reg, kind: linear, input: battery, output: 1.8 V }]
loads: [{ id: lamp, rail: reg, draw: { on: 10 mA } }]
modes: { lit: { lamp: on } }
profile: [{ mode: lit, for: 1 h }]
tolerances:
";
    for (line, fragment) in [
        ("  loads.lamp.draw.onn: ±5 %", "did you mean `on`?"),
        ("  loads.lmp.draw.on: ±5 %", "did you mean `lamp`?"),
        ("  cells.c.capacity: 5 %", "a sign `±`"),
        ("  cells.c.capacity: [2 Ah, 1 Ah]", "not low then high"),
        ("  cells.c.capacity: [1 V, 2 V]", "voltage"),
        (
            "  stages.reg.quiescent: [-1 µA, 2 µA]",
            "outside what this value can be",
        ),
        ("  stages.reg.efficiency: ±5 %", "no single value"),
        ("  profile[3].for: ±5 %", "does not exist"),
        ("  profile[0].times: { pick: [1, 2] }", "has no `times`"),
        ("  cells.c.capacity: { normal: 1 Ah }", "needs its `sigma`"),
        ("  battery.series: { pick: [1, 2.5] }", "whole number"),
        ("  ambient: ±0 °C", "varies nothing"),
    ] {
        let out = Test::new()
            .design(&format!("{base}{line}\n"))
            .args(&["check", "{file}"])
            .expect_code(1);
        assert!(
            out.stderr.contains(fragment),
            "`{line}`: wanted `{fragment}` in\n{}",
            out.stderr
        );
        assert!(
            out.stderr.contains("tolerances"),
            "`{line}`: no place in\n{}",
            out.stderr
        );
    }
}

#[test]
fn the_command_writes_tables_json_and_csv() {
    let example = root().join("examples/soil-probe.yaml");
    let file = example.display().to_string();
    let table = Test::new()
        .args(&[
            "spread",
            &file,
            "--samples",
            "40",
            "--target",
            "3y",
            "--corners",
        ])
        .expect_code(0);
    for part in [
        "5th percentile",
        "median",
        "swing",
        "worst",
        "best",
        "Caution",
    ] {
        assert!(
            table.stdout.contains(part),
            "no `{part}` in\n{}",
            table.stdout
        );
    }
    let json = Test::new()
        .args(&[
            "spread",
            &file,
            "--samples",
            "40",
            "--seed",
            "3",
            "--format",
            "json",
        ])
        .expect_code(0)
        .json();
    assert_eq!(json["samples"], 40);
    assert_eq!(json["runtimes_s"].as_array().expect("runtimes").len(), 40);
    let p5 = json["p5_s"].as_f64().expect("p5");
    let p95 = json["p95_s"].as_f64().expect("p95");
    assert!(p5 > 0.0 && p5 <= json["p50_s"].as_f64().expect("p50") && p95 >= p5);
    assert_eq!(json["sensitivity"].as_array().expect("swings").len(), 6);
    let csv = Test::new()
        .args(&["spread", &file, "--samples", "5", "--format", "csv"])
        .expect_code(0);
    let lines: Vec<&str> = csv.stdout.lines().collect();
    assert_eq!(lines.len(), 6);
    assert!(lines[0].starts_with("sample,runtime_s,end,stages.ldo-3v0.quiescent"));
}

#[test]
fn a_design_without_tolerances_or_with_a_fixed_ambient_is_a_usage_error() {
    let out = Test::new()
        .design(PLAIN)
        .args(&["spread", "{file}"])
        .expect_code(2);
    assert!(out.stderr.contains("tolerances"), "{}", out.stderr);
    let soil = root()
        .join("examples/soil-probe.yaml")
        .display()
        .to_string();
    let out = Test::new()
        .args(&["spread", &soil, "--ambient", "0 °C"])
        .expect_code(2);
    assert!(out.stderr.contains("--set ambient"), "{}", out.stderr);
    Test::new()
        .args(&["spread", &soil, "--samples", "0"])
        .expect_code(2);
}

#[test]
fn the_command_draws_the_histogram_and_the_tornado_beside_its_output() {
    let soil = root()
        .join("examples/soil-probe.yaml")
        .display()
        .to_string();
    let t = Test::new().args(&[
        "spread",
        &soil,
        "--samples",
        "30",
        "--target",
        "3y",
        "--histogram",
        "h.svg",
        "--tornado",
        "t.png",
    ]);
    let out = t.expect_code(0);
    assert!(out.stdout.contains("5th percentile"), "{}", out.stdout);
    let svg = std::fs::read_to_string(t.dir().join("h.svg")).expect("histogram written");
    roxmltree::Document::parse(&svg).expect("the histogram parses");
    assert!(svg.contains("P50 "), "no median in the histogram");
    let png = std::fs::read(t.dir().join("t.png")).expect("tornado written");
    let img = image::load_from_memory_with_format(&png, image::ImageFormat::Png).expect("PNG");
    assert_eq!((img.width(), img.height()), (1200, 800));
    // One picture alone, and the output to a file.
    let t = Test::new().args(&[
        "spread",
        &soil,
        "--samples",
        "10",
        "--tornado",
        "t.svg",
        "-o",
        "out.txt",
    ]);
    t.expect_code(0);
    assert!(t.dir().join("t.svg").is_file() && t.dir().join("out.txt").is_file());
    assert!(!t.dir().join("h.svg").exists());
    // A picture format the extension does not name is a usage error, found before anything
    // runs: no file at all.
    for bad in [["--histogram", "h.pdf"], ["--tornado", "t"]] {
        let t = Test::new().args(&[
            "spread",
            &soil,
            "--samples",
            "10",
            bad[0],
            bad[1],
            "-o",
            "o",
        ]);
        let out = t.expect_code(2);
        assert!(out.stderr.contains(".svg"), "{}", out.stderr);
        assert_eq!(
            std::fs::read_dir(t.dir()).unwrap().count(),
            0,
            "files written"
        );
    }
    // A design without tolerances still fails as before, with no picture.
    let t = Test::new()
        .design(PLAIN)
        .args(&["spread", "{file}", "--histogram", "h.svg"]);
    t.expect_code(2);
    assert!(!t.dir().join("h.svg").exists());
}

#[test]
fn the_report_has_a_spread_section_for_a_design_with_tolerances() {
    let soil = root()
        .join("examples/soil-probe.yaml")
        .display()
        .to_string();
    let t = Test::new().args(&[
        "report",
        &soil,
        "--samples",
        "30",
        "--seed",
        "4",
        "--target",
        "3 y",
        "-o",
        "r.html",
    ]);
    t.expect_code(0);
    let html = std::fs::read_to_string(t.dir().join("r.html")).expect("report");
    assert!(html.contains("<h2>Spread across units</h2>"));
    assert!(html.contains("Across 30 simulated units"));
    assert!(html.contains("Units reaching 3.00 y"));
    assert!(html.contains("seed 4"));
    // The ambient varies in the tolerances: `--ambient` leaves the report whole and says why
    // the spread did not run.
    let t = Test::new().args(&[
        "report",
        &soil,
        "--samples",
        "10",
        "--ambient",
        "0 °C",
        "-o",
        "r.html",
    ]);
    t.expect_code(0);
    let html = std::fs::read_to_string(t.dir().join("r.html")).expect("report");
    assert!(html.contains("did not run"), "no note");
    assert!(html.contains("--set ambient"));
    let t = Test::new()
        .design(PLAIN)
        .args(&["report", "{file}", "-o", "r.html"]);
    t.expect_code(0);
    let html = std::fs::read_to_string(t.dir().join("r.html")).expect("report");
    assert!(!html.contains("Spread across units") && !html.contains("id=\"spread\""));
    Test::new()
        .args(&["report", &soil, "--samples", "0", "-o", "r.html"])
        .expect_code(2);
}
