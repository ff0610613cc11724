//! Throughput of the Monte Carlo (`cargo bench --bench spread`).
//!
//! Target: 10,000 samples of every bundled example in under 2 s on a 2-core machine (at least
//! 2,500 runtime solves per second per core), aiming at 20,000 solves per second per core. The
//! design is read and checked once; each sample applies its values to a copy of the model.
//!
//! `-- --samples N` changes the number of samples (default 10,000).

use std::time::Instant;

use joulepath::Design;
use joulepath::spread::{SpreadOptions, spread};

const TARGET_S: f64 = 2.0;
const SAMPLES: usize = 10_000;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let samples = args
        .iter()
        .position(|a| a == "--samples")
        .and_then(|i| args.get(i + 1))
        .and_then(|s| s.parse().ok())
        .unwrap_or(SAMPLES);
    let root = env!("CARGO_MANIFEST_DIR");
    let mut files: Vec<_> = std::fs::read_dir(format!("{root}/examples"))
        .expect("examples/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    files.sort();
    let cores = rayon::current_num_threads();
    println!("{samples} samples per example on {cores} threads");
    let mut all_ok = true;
    for f in &files {
        let name = f
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        let d = Design::from_file(f).expect("valid example");
        if d.tolerances().is_empty() {
            println!("{name:<20} no tolerances: skipped");
            continue;
        }
        let mut o = SpreadOptions::for_design(&d);
        o.samples = samples;
        let t = Instant::now();
        let s = spread(&d, &o).expect("spread");
        let secs = t.elapsed().as_secs_f64();
        // Swings run two more solves per varied value, and the design as written one.
        let solves = samples + 2 * d.tolerances().len() + 1;
        let per_core = solves as f64 / secs / cores as f64;
        let scaled = secs * SAMPLES as f64 / samples as f64;
        let ok = scaled < TARGET_S;
        all_ok &= ok;
        println!(
            "{name:<20} {secs:>8.3} s  {:>9.0} solves/s/core  P50 {:.4e} s  10,000 samples in {scaled:.2} s: {}",
            per_core,
            s.summary.p50,
            if ok { "PASS" } else { "FAIL" }
        );
    }
    println!(
        "target: 10,000 samples of every example in under {TARGET_S} s: {}",
        if all_ok { "PASS" } else { "FAIL" }
    );
}
