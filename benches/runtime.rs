//! Performance of the discharge simulation (`cargo bench --bench runtime`).
//!
//! Targets: the coin-cell example (a one-second cycle, months of runtime) in under 20 ms
//! in-process with the fast solver and at least 1,000 times faster than the chronological
//! reference at equal accuracy (0.2 %); a generated 1,000-stage, 10,000-load design with a
//! three-phase cycle in under 2 s, with the cost linear in the tree size.
//!
//! `-- --quick` skips the chronological reference run of the coin-cell example (about three
//! minutes on a 2-core machine).

use std::time::{Duration, Instant};

use joulepath::Design;
use joulepath::solve::{RunOptions, RunResult, run};

#[path = "common/generate.rs"]
mod generate;
use generate::generate;

const COIN_TARGET_MS: f64 = 20.0;
const SPEEDUP_TARGET: f64 = 1000.0;
const AGREEMENT: f64 = 2e-3;
const TREE_TARGET_S: f64 = 2.0;

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let root = env!("CARGO_MANIFEST_DIR");
    let mut verdicts = Vec::new();

    // The coin-cell tag.
    let text =
        std::fs::read_to_string(format!("{root}/examples/coin-cell-tag.yaml")).expect("example");
    let d = Design::from_text(&text).expect("valid example");
    let opt = RunOptions::for_design(&d);
    let (fast_time, fast) = median(15, || run(&d, &opt).expect("fast run"));
    println!(
        "coin-cell tag, fast solver: {:.2} ms per run, runtime {:.1} d, end {} at {:.2} % SoC",
        ms(fast_time),
        fast.runtime_s() / 86_400.0,
        fast.end.reason.name(),
        100.0 * fast.end.soc
    );
    verdicts.push(verdict(
        ms(fast_time) < COIN_TARGET_MS,
        &format!(
            "coin-cell example in {:.2} ms (target < {COIN_TARGET_MS} ms)",
            ms(fast_time)
        ),
    ));
    if quick {
        println!("(chronological reference skipped: --quick)");
    } else {
        let o = RunOptions::reference(&d);
        let t = Instant::now();
        let reference = run(&d, &o).expect("reference run");
        let ref_time = t.elapsed();
        let diff = (fast.runtime_s() - reference.runtime_s()) / reference.runtime_s();
        let speedup = ref_time.as_secs_f64() / fast_time.as_secs_f64();
        println!(
            "coin-cell tag, chronological reference: {:.1} s, runtime {:.1} d, end {}; fast - reference = {:+.4} %; speed-up {speedup:.0}x",
            ref_time.as_secs_f64(),
            reference.runtime_s() / 86_400.0,
            reference.end.reason.name(),
            100.0 * diff
        );
        verdicts.push(verdict(
            diff.abs() <= AGREEMENT && reference.end.reason == fast.end.reason,
            &format!(
                "fast solver within {:.4} % of the reference, same end reason",
                100.0 * diff.abs()
            ),
        ));
        verdicts.push(verdict(
            speedup >= SPEEDUP_TARGET,
            &format!("fast solver {speedup:.0} times faster than the reference (target >= {SPEEDUP_TARGET})"),
        ));
    }

    // Every bundled example: the fast solver against the chronological reference.
    if !quick {
        println!();
        let mut files: Vec<_> = std::fs::read_dir(format!("{root}/examples"))
            .expect("examples/")
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
            .collect();
        files.sort();
        for f in files {
            let d = Design::from_file(&f).expect("valid example");
            let opt = RunOptions::for_design(&d);
            let t = Instant::now();
            let fast = run(&d, &opt).expect("fast run");
            let fast_time = t.elapsed();
            let o = RunOptions::reference(&d);
            let t = Instant::now();
            let reference = run(&d, &o).expect("reference run");
            let ref_time = t.elapsed();
            let diff = (fast.runtime_s() - reference.runtime_s()) / reference.runtime_s();
            let name = f
                .file_name()
                .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
            println!(
                "{name}: fast {:.1} ms, reference {:.2} s, runtime {:.2} d vs {:.2} d ({:+.4} %), end {} / {}",
                ms(fast_time),
                ref_time.as_secs_f64(),
                fast.runtime_s() / 86_400.0,
                reference.runtime_s() / 86_400.0,
                100.0 * diff,
                fast.end.reason.name(),
                reference.end.reason.name()
            );
            verdicts.push(verdict(
                diff.abs() <= AGREEMENT && fast.end.reason == reference.end.reason,
                &format!(
                    "{name}: fast solver within {:.4} % of the reference, same end reason",
                    100.0 * diff.abs()
                ),
            ));
        }
    }

    // Generated trees with a three-phase cycle.
    println!();
    println!(
        "{:>7} {:>7} {:>12} {:>12} {:>14} {:>10}",
        "stages", "loads", "parse ms", "runtime s", "runtime (d)", "end"
    );
    let mut per_stage = Vec::new();
    for n in [100, 300, 1000, 3000] {
        let text = three_phase(&generate(n), n);
        let t = Instant::now();
        let d = Design::from_text(&text).expect("generated design is valid");
        let parse = t.elapsed();
        let opt = RunOptions::for_design(&d);
        let (time, r) = median(3, || run(&d, &opt).expect("fast run"));
        println!(
            "{n:>7} {:>7} {:>12.1} {:>12.3} {:>14.2} {:>10}",
            10 * n,
            ms(parse),
            time.as_secs_f64(),
            r.runtime_s() / 86_400.0,
            r.end.reason.name()
        );
        per_stage.push((n, time.as_secs_f64() / n as f64));
        if n == 1000 {
            verdicts.push(verdict(
                time.as_secs_f64() < TREE_TARGET_S,
                &format!("1,000-stage design with a three-phase cycle in {:.3} s (target < {TREE_TARGET_S} s)", time.as_secs_f64()),
            ));
        }
    }
    // Linear cost: the time per stage stays flat once the tree outgrows the CPU caches (from
    // 100 to 1000 stages it roughly doubles as the walk starts missing the caches; a quadratic
    // term would multiply it by 3 from 1000 to 3000).
    let per = |n: usize| {
        per_stage
            .iter()
            .find(|p| p.0 == n)
            .map_or(f64::NAN, |p| p.1)
    };
    let ratio = per(3000) / per(1000);
    verdicts.push(verdict(
        ratio < 1.5,
        &format!("cost per stage at 3000 stages is {ratio:.2} x that at 1000 (linear: < 1.5)"),
    ));
    println!();
    for v in verdicts {
        println!("{v}");
    }
}

/// The same design with its profile replaced by a three-phase cycle, and its pack scaled with
/// the tree (10 strings per 100 stages) so that every size runs about as long: the cost per
/// stage then compares like with like.
fn three_phase(text: &str, n: usize) -> String {
    let cut = text.find("\nprofile:\n").expect("a profile");
    let body = text[..cut].replace(
        "  parallel: 10\n",
        &format!("  parallel: {}\n", (n / 10).max(1)),
    );
    format!(
        "{body}\nprofile:\n  - {{ mode: burst, for: 20 ms }}\n  - {{ mode: active, for: 2 s }}\n  - {{ mode: sleep, for: 30 s }}\n"
    )
}

fn median(reps: usize, mut f: impl FnMut() -> RunResult) -> (Duration, RunResult) {
    let mut last = f();
    let mut times = Vec::with_capacity(reps);
    for _ in 0..reps {
        let t = Instant::now();
        last = std::hint::black_box(f());
        times.push(t.elapsed());
    }
    times.sort();
    (times[times.len() / 2], last)
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn verdict(pass: bool, what: &str) -> String {
    format!("{}: {what}", if pass { "PASS" } else { "FAIL" })
}
