//! Throughput of the fast solver, the budget of a Monte Carlo run (`cargo bench --bench
//! throughput`).
//!
//! Targets: 10,000 samples of every bundled example in under 2 s on a 2-core machine, that is at
//! least 2,500 runs per second per core of each example (0.4 ms a run); the aim is 20,000 per
//! second per core (50 µs). Each example's design is read once and run many times with
//! `RunOptions::for_design`; the work counts of a run show where its time goes. Every run of an
//! example must give the same result, bit for bit, on one thread or two (a Monte Carlo sample is
//! reproducible from its seed).
//!
//! `-- --quick` measures for a shorter time per example; `JOULEPATH_BENCH_ONLY=TEXT` only the
//! examples whose file name holds TEXT; `JOULEPATH_BENCH_RUNS=N` runs each example N times and
//! measures nothing (for `perf stat -e instructions:u`, which a busy machine does not disturb).

use std::time::{Duration, Instant};

use joulepath::Design;
use joulepath::solve::{RunOptions, RunResult, run, run_counted};

/// Samples per example in the Monte Carlo budget.
const SAMPLES: f64 = 10_000.0;
/// Time for `SAMPLES` of every example, on `CORES` cores, s.
const BUDGET_S: f64 = 2.0;
const CORES: f64 = 2.0;
/// Least runs per second per core of each example (the budget spread evenly).
const TARGET_PER_S: f64 = 2_500.0;
/// What the solver aims at.
const AIM_PER_S: f64 = 20_000.0;

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let window = Duration::from_millis(if quick { 300 } else { 1500 });
    let root = env!("CARGO_MANIFEST_DIR");
    let mut files: Vec<_> = std::fs::read_dir(format!("{root}/examples"))
        .expect("examples/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    files.sort();
    // `JOULEPATH_BENCH_ONLY=coin` measures the examples whose file name holds that text (to
    // profile one).
    if let Ok(only) = std::env::var("JOULEPATH_BENCH_ONLY") {
        files.retain(|f| f.to_string_lossy().contains(&only));
    }

    println!(
        "{:<24} {:>9} {:>9} {:>11} {:>8} {:>8} {:>6} {:>6} {:>8} {:>10} {:>8}",
        "example",
        "µs/run",
        "runs/s",
        "10k, 1 core",
        "points",
        "passes",
        "spec",
        "skips",
        "steps",
        "runtime d",
        "end"
    );
    // `JOULEPATH_BENCH_REFERENCE=FILE`: also compare each example with the chronological
    // reference, whose runtimes are kept in FILE (computed once: minutes).
    let reference = std::env::var("JOULEPATH_BENCH_REFERENCE").ok();
    let fixed_runs: Option<u32> = std::env::var("JOULEPATH_BENCH_RUNS")
        .ok()
        .and_then(|v| v.parse().ok());
    let mut verdicts = Vec::new();
    let mut total_s = 0.0;
    // The longest an example's samples take on one core.
    let mut longest_s: f64 = 0.0;
    let mut slowest = f64::INFINITY;
    for f in &files {
        let name = f
            .file_name()
            .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
        let d = Design::from_file(f).expect("valid example");
        let opt = RunOptions::for_design(&d);
        let (first, counts) = run_counted(&d, &opt);
        let first = first.expect("fast run");
        let agreement = reference.as_ref().map(|cache| {
            let (t, reason) = reference_of(cache, &name, &d);
            let diff = (first.runtime_s() - t) / t;
            let ok = diff.abs() <= 2e-3 && reason == first.end.reason.name();
            verdicts.push(verdict(
                ok,
                &format!(
                    "{name}: within {:.5} % of the chronological reference (0.2 %), end {} / {reason}",
                    100.0 * diff.abs(),
                    first.end.reason.name()
                ),
            ));
            diff
        });
        if let Some(n) = fixed_runs {
            // A fixed number of runs and nothing else, for a count of instructions
            // (`perf stat -e instructions:u`) that a busy machine does not disturb.
            for _ in 0..n {
                check(&run(&d, &opt).expect("fast run"), &first, &name);
            }
            println!(
                "{name}: {n} runs; points {}, passes {}, skips {}, runtime {:.9e} s, end {}",
                counts.points,
                counts.passes,
                counts.skips,
                first.runtime_s(),
                first.end.reason.name()
            );
            if let Some(diff) = agreement {
                println!("  fast - reference = {:+.6} %", 100.0 * diff);
            }
            continue;
        }
        let per_run = time_runs(&d, &opt, window, &first, &name);
        same_on_two_threads(&d, &opt, &first, &name);
        let per_s = 1.0 / per_run;
        slowest = slowest.min(per_s);
        total_s += SAMPLES * per_run;
        longest_s = longest_s.max(SAMPLES * per_run);
        println!(
            "{name:<24} {:>9.1} {:>9.0} {:>10.2}s {:>8} {:>8} {:>6} {:>6} {:>8} {:>10.2} {:>8}",
            1e6 * per_run,
            per_s,
            SAMPLES * per_run,
            counts.points,
            counts.passes,
            counts.speculative_passes,
            counts.skips,
            counts.steps,
            first.runtime_s() / 86_400.0,
            first.end.reason.name()
        );
        if let Some(diff) = agreement {
            println!("{:<24} fast - reference = {:+.5} %", "", 100.0 * diff);
        }
        verdicts.push(verdict(
            per_s >= TARGET_PER_S,
            &format!(
                "{name}: {per_s:.0} runs/s on one core (target >= {TARGET_PER_S:.0}, aim {AIM_PER_S:.0})"
            ),
        ));
    }
    let on_cores = total_s / CORES;
    println!();
    println!(
        "{SAMPLES:.0} samples of each of the {} examples: {total_s:.2} s on one core, {on_cores:.2} s on {CORES:.0}",
        files.len()
    );
    // The target reads per example: 10,000 samples of any one example within the budget on
    // both cores, which is the 2,500 runs a second a core above. All the examples together
    // are printed above for information.
    let longest_on_cores = longest_s / CORES;
    verdicts.push(verdict(
        longest_on_cores < BUDGET_S,
        &format!(
            "{SAMPLES:.0} samples of any one example in at most {longest_on_cores:.2} s on {CORES:.0} cores (target < {BUDGET_S} s)"
        ),
    ));
    verdicts.push(verdict(
        slowest >= AIM_PER_S,
        &format!("slowest example {slowest:.0} runs/s (aim >= {AIM_PER_S:.0}; not required)"),
    ));
    println!();
    for v in verdicts {
        println!("{v}");
    }
}

/// Seconds per run of `d` (CPU time of the thread where the system gives it), measured over
/// about `window` (the median of batches), checking every run against `first`.
fn time_runs(d: &Design, opt: &RunOptions, window: Duration, first: &RunResult, name: &str) -> f64 {
    // A batch of about a tenth of the window.
    let t = Instant::now();
    let mut n = 0u32;
    while t.elapsed() < window / 10 || n == 0 {
        check(&run(d, opt).expect("fast run"), first, name);
        n += 1;
    }
    let mut batches = Vec::new();
    let start = Instant::now();
    while start.elapsed() < window || batches.len() < 5 {
        let t = Instant::now();
        let cpu = cpu_s();
        for _ in 0..n {
            let r = std::hint::black_box(run(d, opt).expect("fast run"));
            check(&r, first, name);
        }
        // The thread's own CPU time where the system gives it (a machine shared with builds
        // stretches the wall-clock time), else the wall clock.
        let spent = match (cpu, cpu_s()) {
            (Some(a), Some(b)) => b - a,
            _ => t.elapsed().as_secs_f64(),
        };
        batches.push(spent / f64::from(n));
    }
    batches.sort_by(f64::total_cmp);
    batches[batches.len() / 2]
}

/// CPU time of this thread so far, s (Linux: /proc/thread-self/schedstat, nanoseconds on the
/// CPU first).
fn cpu_s() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = text.split_whitespace().next()?.parse().ok()?;
    Some(ns * 1e-9)
}

/// The chronological reference's runtime and end reason for example `name`, from the file
/// `cache` (lines `name runtime reason`), computed and added there when missing.
fn reference_of(cache: &str, name: &str, d: &Design) -> (f64, String) {
    let known = std::fs::read_to_string(cache).unwrap_or_default();
    for line in known.lines() {
        let mut w = line.split_whitespace();
        if w.next() == Some(name) {
            if let (Some(t), Some(r)) = (w.next().and_then(|t| t.parse().ok()), w.next()) {
                return (t, r.to_string());
            }
        }
    }
    let r = run(d, &RunOptions::reference(d)).expect("reference run");
    let line = format!("{name} {:e} {}\n", r.runtime_s(), r.end.reason.name());
    std::fs::write(cache, known + &line).expect("write the reference cache");
    (r.runtime_s(), r.end.reason.name().to_string())
}

/// Two threads at once give `first` too.
fn same_on_two_threads(d: &Design, opt: &RunOptions, first: &RunResult, name: &str) {
    std::thread::scope(|s| {
        let a = s.spawn(|| run(d, opt).expect("fast run"));
        let b = s.spawn(|| run(d, opt).expect("fast run"));
        check(&a.join().expect("thread"), first, name);
        check(&b.join().expect("thread"), first, name);
    });
}

/// The same result bit for bit.
fn check(r: &RunResult, first: &RunResult, name: &str) {
    let same = r.end == first.end
        && r.ledger == first.ledger
        && r.peaks == first.peaks
        && r.violations == first.violations;
    assert!(same, "{name}: a run gave a different result");
}

fn verdict(pass: bool, what: &str) -> String {
    format!("{}: {what}", if pass { "PASS" } else { "FAIL" })
}
