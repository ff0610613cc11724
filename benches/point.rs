//! Performance benchmark: a generated power tree of N stages and 10 N loads.
//!
//! For each size it measures the time to read, check and build the design
//! (`Design::from_text`), the time to solve one operating point of every mode (`solve_point`),
//! and the memory both take, then prints a table and PASS/FAIL lines against the targets:
//! at 1,000 stages and 10,000 loads, read + check + build under 300 ms (the bound set for the
//! YAML reader, which gives every node its place; `benches/read.rs` also times it on CPU), one
//! operating point under 10 ms, and memory linear in the size of the tree.
//!
//! Memory: the package forbids `unsafe` code (`[lints]` in Cargo.toml applies to benches too),
//! so a counting global allocator cannot be written here. Instead each size is measured in a
//! fresh child process (this same binary, run with `--memory-child N`), each step on a new
//! thread, which glibc's malloc serves from an arena of its own: the step cannot reuse memory
//! an earlier step freed. The resident-set high-water mark is reset through
//! `/proc/self/clear_refs` before the step and read back from `/proc/self/status` after it.
//! The growth is the memory the step touched at its peak, rounded to pages (and, for small
//! steps, blurred by the kernel's per-CPU counting of resident pages, a few hundred KiB).
//!
//! As a correctness guard every solved point must balance energy: pack terminal power equals
//! the load powers plus the stage losses to 1e-9 relative.
//!
//! Run with `cargo bench --bench point`.

use std::fmt::Write as _;
use std::hint::black_box;
use std::process::Command;
use std::sync::Arc;
use std::sync::mpsc::{self, Sender};
use std::time::{Duration, Instant};

use joulepath::Design;

#[path = "common/generate.rs"]
mod generate;
use generate::generate;
use joulepath::solve::{OperatingPoint, PackState, Solution, StageState, solve_point};

/// Tree sizes, in stages (loads are ten times as many).
const SIZES: [usize; 4] = [100, 300, 1000, 3000];
/// The size the targets are judged at.
const TARGET_N: usize = 1000;
/// Read + check + build target.
const TARGET_PARSE_MS: f64 = 300.0;
/// One operating point target.
const TARGET_POINT_MS: f64 = 10.0;
/// Bytes per stage at the largest size may be at most this many times those at 300 stages.
const LINEARITY_FACTOR: f64 = 1.5;
/// Energy balance of a solved point (DESIGN section 5).
const BALANCE_REL: f64 = 1e-9;
/// Pack state the points are solved at.
const AT: PackState = PackState {
    soc: 0.8,
    v_pol: None,
    ambient_c: 25.0,
};

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--memory-child") {
        let n = args
            .get(i + 1)
            .and_then(|s| s.parse().ok())
            .expect("--memory-child needs a stage count");
        memory_child(n);
        return;
    }
    if let Some(i) = args.iter().position(|a| a == "--dump") {
        // Print a generated design, to look at or to profile with the command line tool.
        let n = args.get(i + 1).and_then(|s| s.parse().ok()).unwrap_or(100);
        print!("{}", generate(n));
        return;
    }
    // `cargo bench` passes `--bench`; a further plain argument picks the sizes to run.
    let sizes: Vec<usize> = {
        let picked: Vec<usize> = args.iter().skip(1).filter_map(|a| a.parse().ok()).collect();
        if picked.is_empty() {
            SIZES.to_vec()
        } else {
            picked
        }
    };

    println!("joulepath point benchmark: generated trees of N stages and 10 N loads");
    println!(
        "solved at SoC {:.0} %, {} °C; times are medians after a warm-up\n",
        AT.soc * 100.0,
        AT.ambient_c
    );

    let mut rows = Vec::new();
    for &n in &sizes {
        rows.push(measure(n));
    }
    print_table(&rows);
    verdicts(&rows);
}

/// Everything measured at one size.
struct Row {
    n: usize,
    loads: usize,
    text_bytes: usize,
    parse: Duration,
    mode_names: Vec<String>,
    points: Vec<Duration>,
    peak_parse: Option<u64>,
    peak_point: Option<u64>,
    states: String,
}

fn measure(n: usize) -> Row {
    let text = generate(n);
    let design = Design::from_text(&text)
        .unwrap_or_else(|e| panic!("generated design (N = {n}) is invalid: {e:?}"));
    assert_eq!(design.stages().len(), n);
    assert_eq!(design.loads().len(), 10 * n);

    // Read + check + build: repetitions scaled so each size takes a few seconds at most.
    let reps = match n {
        0..=300 => 15,
        301..=1000 => 9,
        _ => 5,
    };
    let parse = median_time(reps, || {
        let d = Design::from_text(black_box(&text)).expect("valid");
        black_box(d.stages().len());
    });

    // One operating point per mode, checked for energy balance every time.
    let mut points = Vec::new();
    let mut mode_names = Vec::new();
    let mut states = String::new();
    for (m, mode) in design.modes().iter().enumerate() {
        mode_names.push(mode.name().to_string());
        let p = solved(&design, m);
        if mode.name() == "active" {
            states = state_summary(&p);
        }
        let reps = if n >= 3000 { 7 } else { 15 };
        points.push(median_time(reps, || {
            let p = solved(&design, m);
            black_box(p.pack.current);
        }));
    }

    let mem = memory_in_child(n);
    let row = Row {
        n,
        loads: design.loads().len(),
        text_bytes: text.len(),
        parse,
        mode_names,
        points,
        peak_parse: mem.map(|m| m.0),
        peak_point: mem.map(|m| m.1),
        states,
    };
    eprintln!(
        "  N = {n}: parse {:.2} ms, points {:?} ms",
        ms(row.parse),
        row.points
            .iter()
            .map(|d| (ms(*d) * 100.0).round() / 100.0)
            .collect::<Vec<_>>()
    );
    row
}

/// Solve mode `m`, insisting on a point (not a collapse) that balances energy.
fn solved(design: &Design, m: usize) -> OperatingPoint {
    match solve_point(design, m, AT) {
        Solution::Point(p) => {
            let supplied = p.pack.power();
            let used = p.delivered_plus_losses();
            let rel = (supplied - used).abs() / supplied.abs().max(f64::MIN_POSITIVE);
            assert!(
                rel <= BALANCE_REL,
                "energy balance off in mode {}: V I = {supplied} W, loads + losses = {used} W (rel {rel:e})",
                design.modes()[m].name()
            );
            p
        }
        Solution::Collapse { ocv, resistance } => panic!(
            "mode {} collapsed (OCV {ocv} V, R {resistance} Ω): the generated design is sized wrong",
            design.modes()[m].name()
        ),
    }
}

fn state_summary(p: &OperatingPoint) -> String {
    let count = |s: StageState| p.stages.iter().filter(|x| x.state == s).count();
    format!(
        "I {:.3} A at {:.3} V; regulating {}, dropout {}, bypass {}, on {}, off {}, undervoltage {}",
        p.pack.current,
        p.pack.voltage,
        count(StageState::Regulating),
        count(StageState::Dropout),
        count(StageState::Bypass),
        count(StageState::On),
        count(StageState::Off),
        count(StageState::Undervoltage),
    )
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

// ---------------------------------------------------------------------------------------------
// Memory, measured in a fresh child process.

/// Peak growth during `from_text`, peak growth during the costliest `solve_point`, and what the
/// built design keeps, in bytes; `None` where the child could not measure.
fn memory_in_child(n: usize) -> Option<(u64, u64)> {
    let exe = std::env::current_exe().ok()?;
    let out = Command::new(exe)
        .arg("--memory-child")
        .arg(n.to_string())
        .output()
        .ok()?;
    if !out.status.success() {
        eprintln!(
            "memory child for N = {n} failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        return None;
    }
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text.lines().find(|l| l.starts_with("MEM "))?;
    let v: Vec<u64> = line[4..]
        .split_whitespace()
        .filter_map(|x| x.parse().ok())
        .collect();
    (v.len() == 2).then(|| (v[0], v[1]))
}

fn memory_child(n: usize) {
    let text = Arc::new(generate(n));
    if status_kib("VmRSS:").is_none() || !reset_peak() {
        println!("MEM unavailable");
        return;
    }
    let mut keep = Vec::new();
    // Warm-up on a small tree: fault in the code so it is not counted against the steps below.
    let (small, _) = in_fresh_arena(&mut keep, || {
        Design::from_text(&generate(20)).expect("valid")
    });
    for m in 0..small.modes().len() {
        black_box(solve_point(&small, m, AT));
    }
    let t = Arc::clone(&text);
    let (design, parse_peak) =
        in_fresh_arena(&mut keep, move || Design::from_text(&t).expect("valid"));
    let design = Arc::new(design);
    let mut point_peak = 0;
    for m in 0..design.modes().len() {
        let d = Arc::clone(&design);
        let ((), peak) = in_fresh_arena(&mut keep, move || {
            black_box(solve_point(&d, m, AT));
        });
        point_peak = point_peak.max(peak);
    }
    drop(keep);
    println!("MEM {} {}", parse_peak * 1024, point_peak * 1024);
}

/// Run `f` on a new thread, which glibc gives a malloc arena of its own, so the step cannot
/// reuse memory that earlier steps freed; return its result and the growth of the resident set
/// (KiB) while it ran. The thread then waits, holding its arena, until its sender in `keep` is
/// dropped, so that later steps get fresh arenas too.
fn in_fresh_arena<T: Send + 'static>(
    keep: &mut Vec<Sender<()>>,
    f: impl FnOnce() -> T + Send + 'static,
) -> (T, u64) {
    let (release_tx, release_rx) = mpsc::channel::<()>();
    let (done_tx, done_rx) = mpsc::channel();
    std::thread::spawn(move || {
        let before = status_kib("VmRSS:").unwrap_or(0);
        reset_peak();
        let out = f();
        let peak = status_kib("VmHWM:").unwrap_or(0).saturating_sub(before);
        let _ = done_tx.send((out, peak));
        let _ = release_rx.recv();
    });
    keep.push(release_tx);
    done_rx.recv().expect("measuring thread")
}

/// Reset the resident-set high-water mark to the current resident set (Linux 4.0 and later).
fn reset_peak() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn status_kib(key: &str) -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with(key))?;
    line[key.len()..]
        .trim()
        .trim_end_matches("kB")
        .trim()
        .parse()
        .ok()
}

// ---------------------------------------------------------------------------------------------
// Report.

fn mib(b: u64) -> String {
    format!("{:.2} MiB", b as f64 / (1024.0 * 1024.0))
}

fn print_table(rows: &[Row]) {
    let modes = rows
        .first()
        .map(|r| r.mode_names.clone())
        .unwrap_or_default();
    let mut head = format!(
        "{:>6} {:>7} {:>11} {:>12}",
        "stages", "loads", "text bytes", "parse ms"
    );
    for m in &modes {
        let _ = write!(head, " {:>10}", format!("{m} ms"));
    }
    let _ = write!(
        head,
        " {:>12} {:>12} {:>11}",
        "peak parse", "peak point", "B/stage"
    );
    println!("{head}");
    println!("{}", "-".repeat(head.chars().count()));
    for r in rows {
        let mut line = format!(
            "{:>6} {:>7} {:>11} {:>12.2}",
            r.n,
            r.loads,
            r.text_bytes,
            ms(r.parse)
        );
        for p in &r.points {
            let _ = write!(line, " {:>10.3}", ms(*p));
        }
        let opt = |x: Option<u64>| x.map_or_else(|| "n/a".to_string(), mib);
        let _ = write!(
            line,
            " {:>12} {:>12} {:>11}",
            opt(r.peak_parse),
            opt(r.peak_point),
            bytes_per_stage(r).map_or_else(|| "n/a".to_string(), |b| format!("{b:.0}"))
        );
        println!("{line}");
    }
    println!();
    for r in rows {
        println!("N = {:>5}, mode active: {}", r.n, r.states);
    }
    println!();
}

/// Peak bytes (the larger of the two steps) per stage of the tree.
fn bytes_per_stage(r: &Row) -> Option<f64> {
    let peak = r.peak_parse?.max(r.peak_point?);
    Some(peak as f64 / r.n as f64)
}

fn verdicts(rows: &[Row]) {
    let verdict = |ok: bool| if ok { "PASS" } else { "FAIL" };
    match rows.iter().find(|r| r.n == TARGET_N) {
        Some(r) => {
            let p = ms(r.parse);
            println!(
                "{}: parse + check + build at {} stages / {} loads: {p:.2} ms (target < {TARGET_PARSE_MS} ms)",
                verdict(p < TARGET_PARSE_MS),
                r.n,
                r.loads
            );
            for (name, d) in r.mode_names.iter().zip(&r.points) {
                let t = ms(*d);
                println!(
                    "{}: one operating point, mode {name}: {t:.3} ms (target < {TARGET_POINT_MS} ms)",
                    verdict(t < TARGET_POINT_MS)
                );
            }
        }
        None => println!("(no run at {TARGET_N} stages: time targets not judged)"),
    }
    let at = |n: usize| rows.iter().find(|r| r.n == n).and_then(bytes_per_stage);
    match (at(300), at(3000)) {
        (Some(small), Some(big)) => {
            let ratio = big / small;
            println!(
                "{}: memory linear: {big:.0} B/stage at 3000 vs {small:.0} B/stage at 300 (ratio {ratio:.2}, limit {LINEARITY_FACTOR})",
                verdict(ratio <= LINEARITY_FACTOR)
            );
        }
        _ => println!("(no memory figures at 300 and 3000 stages: linearity not judged)"),
    }
    println!("PASS: energy balance within {BALANCE_REL:e} at every solved point");
}
