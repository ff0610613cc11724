//! Reading benchmark: the time to read and check a design file (`Design::from_text`: YAML, serde
//! types, checker, built design), for every bundled example and for generated trees.
//!
//! Targets: every file of `examples/` in under 1 ms, the generated 1,000-stage, 10,000-load
//! design (about 1.6 MB) in under 300 ms. Times are medians after a warm-up. The step of reading
//! the YAML text into its tree (`spec::parse`, no checker) is shown beside, so that a slow-down
//! can be put on the reader or on the checker.
//!
//! Run with `cargo bench --bench read`; plain numbers after it pick the generated sizes
//! (default 100 and 1000 stages).

use std::hint::black_box;
use std::time::{Duration, Instant};

use joulepath::Design;

#[path = "common/generate.rs"]
mod generate;
use generate::generate;

/// Target for each bundled example.
const EXAMPLE_TARGET_MS: f64 = 1.0;
/// Target for the generated design at [`TARGET_N`] stages.
const TREE_TARGET_MS: f64 = 300.0;
/// The generated size the tree target is judged at.
const TARGET_N: usize = 1000;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let sizes: Vec<usize> = {
        let picked: Vec<usize> = args.iter().skip(1).filter_map(|a| a.parse().ok()).collect();
        if picked.is_empty() {
            vec![100, TARGET_N]
        } else {
            picked
        }
    };
    let mut failed = Vec::new();

    println!("joulepath read benchmark: Design::from_text, medians after a warm-up\n");
    println!(
        "{:<28} {:>10} {:>12} {:>14}",
        "file", "bytes", "YAML (ms)", "read+check (ms)"
    );
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .expect("examples/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no examples found");
    for f in &files {
        let text = std::fs::read_to_string(f).expect("read example");
        let name = f
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .to_string();
        let (yaml, full) = time_both(&text, 200);
        println!(
            "{name:<28} {:>10} {:>12.3} {:>14.3}",
            text.len(),
            ms(yaml),
            ms(full)
        );
        if ms(full) >= EXAMPLE_TARGET_MS {
            failed.push(format!(
                "{name}: {:.3} ms, target under {EXAMPLE_TARGET_MS} ms",
                ms(full)
            ));
        }
    }
    for &n in &sizes {
        let text = generate(n);
        let reps = if n > 1000 { 5 } else { 9 };
        let (yaml, full) = time_both(&text, reps);
        let name = format!("generated, {n} stages");
        println!(
            "{name:<28} {:>10} {:>12.3} {:>14.3}",
            text.len(),
            ms(yaml),
            ms(full)
        );
        if n == TARGET_N && ms(full) >= TREE_TARGET_MS {
            failed.push(format!(
                "{name}: {:.1} ms, target under {TREE_TARGET_MS} ms",
                ms(full)
            ));
        }
    }
    println!();
    if failed.is_empty() {
        println!(
            "PASS every example under {EXAMPLE_TARGET_MS} ms; {TARGET_N} stages under {TREE_TARGET_MS} ms (where measured)"
        );
    } else {
        for f in &failed {
            println!("FAIL {f}");
        }
        std::process::exit(1);
    }
}

/// Median times of reading `text` into the serde types (`spec::parse`) and of the whole
/// `Design::from_text`.
fn time_both(text: &str, reps: usize) -> (Duration, Duration) {
    // Every input here is valid: a failure is a fault of the benchmark's inputs.
    Design::from_text(text).unwrap_or_else(|e| panic!("invalid design: {e}"));
    let yaml = median_time(reps, || {
        let p = joulepath::spec::parse(black_box(text)).expect("valid");
        black_box(p.spec.loads.len());
    });
    let full = median_time(reps, || {
        let d = Design::from_text(black_box(text)).expect("valid");
        black_box(d.stages.len());
    });
    (yaml, full)
}

fn median_time(reps: usize, mut f: impl FnMut()) -> Duration {
    // Warm-up: caches, page faults, allocator pools.
    f();
    let mut t: Vec<Duration> = (0..reps)
        .map(|_| {
            let start = Instant::now();
            f();
            start.elapsed()
        })
        .collect();
    t.sort();
    t[t.len() / 2]
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}
