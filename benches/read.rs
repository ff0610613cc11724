//! Reading benchmark: the time to read and check a design file (`Design::from_text`: YAML, serde
//! types, checker, built design), for every bundled example and for generated trees.
//!
//! Targets: every file of `examples/` in under 1 ms, the generated 1,000-stage, 10,000-load
//! design (about 1.6 MB) in under 300 ms. Times are medians after a warm-up. The step of reading
//! the YAML text into its tree (`spec::parse`, no checker) is shown beside, so that a slow-down
//! can be put on the reader or on the checker.
//!
//! On a machine shared with other work the wall-clock medians grow with the load; the mean CPU
//! time the thread itself spent (from `/proc/thread-self/schedstat`, Linux) is shown beside them
//! and is what the targets are judged on where it can be read. All times in milliseconds.
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
        "{:<28} {:>10} {:>10} {:>12} {:>12}",
        "file", "bytes", "YAML", "read+check", "(CPU, mean)"
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
        let (yaml, full) = time_both(&text, &dir, 200);
        print_row(&name, text.len(), yaml, full);
        if ms(full.judged()) >= EXAMPLE_TARGET_MS {
            failed.push(format!(
                "{name}: {:.3} ms, target under {EXAMPLE_TARGET_MS} ms",
                ms(full.judged())
            ));
        }
    }
    for &n in &sizes {
        let text = generate(n);
        let reps = if n > 1000 { 5 } else { 9 };
        let (yaml, full) = time_both(&text, &dir, reps);
        let name = format!("generated, {n} stages");
        print_row(&name, text.len(), yaml, full);
        if n == TARGET_N && ms(full.judged()) >= TREE_TARGET_MS {
            failed.push(format!(
                "{name}: {:.1} ms, target under {TREE_TARGET_MS} ms",
                ms(full.judged())
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

/// Times in milliseconds: YAML to serde types, wall clock; the whole read, wall clock and CPU.
fn print_row(name: &str, bytes: usize, yaml: Times, full: Times) {
    let cpu = full
        .cpu
        .map_or_else(|| "-".to_string(), |c| format!("{:.3}", ms(c)));
    println!(
        "{name:<28} {bytes:>10} {:>10.3} {:>12.3} {cpu:>12}",
        ms(yaml.wall),
        ms(full.wall)
    );
}

/// Median wall-clock time and, where it can be read, mean CPU time of the thread.
#[derive(Clone, Copy)]
struct Times {
    wall: Duration,
    cpu: Option<Duration>,
}

impl Times {
    /// What a target is judged on: CPU time where known (the load of other work on the machine
    /// does not count), else wall-clock time.
    fn judged(self) -> Duration {
        self.cpu.unwrap_or(self.wall)
    }
}

/// The CPU time this thread has run, from the first field of `/proc/thread-self/schedstat`
/// (nanoseconds; Linux).
fn thread_cpu() -> Option<Duration> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: u64 = s.split_whitespace().next()?.parse().ok()?;
    Some(Duration::from_nanos(ns))
}

/// Median times of reading `text` into the serde types (`spec::parse`) and of the whole
/// `Design::from_text`.
fn time_both(text: &str, dir: &std::path::Path, reps: usize) -> (Times, Times) {
    // Every input here is valid: a failure is a fault of the benchmark's inputs.
    Design::from_text_in(text, &[], dir).unwrap_or_else(|e| panic!("invalid design: {e}"));
    let yaml = median_time(reps, || {
        let p = joulepath::spec::parse(black_box(text)).expect("valid");
        black_box(p.spec.loads.len());
    });
    let full = median_time(reps, || {
        let d = Design::from_text_in(black_box(text), &[], dir).expect("valid");
        black_box(d.stages().len());
    });
    (yaml, full)
}

fn median_time(reps: usize, mut f: impl FnMut()) -> Times {
    // Warm-up: caches, page faults, allocator pools.
    f();
    let mut wall = Vec::with_capacity(reps);
    let c0 = thread_cpu();
    for _ in 0..reps {
        let start = Instant::now();
        f();
        wall.push(start.elapsed());
    }
    // The kernel may count CPU time in scheduler ticks: the mean over all repetitions.
    let cpu = c0
        .zip(thread_cpu())
        .map(|(a, b)| b.saturating_sub(a) / u32::try_from(reps).unwrap_or(u32::MAX));
    wall.sort();
    Times {
        wall: wall[wall.len() / 2],
        cpu,
    }
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}
