//! Performance benchmark: a generated power tree of N stages and 10 N loads.
//!
//! For each size it measures the time to read, check and build the design
//! (`Design::from_text`), the time to solve one operating point of every mode (`solve_point`),
//! and the memory both take, then prints a table and PASS/FAIL lines against the targets:
//! at 1,000 stages and 10,000 loads, read + check + build under 100 ms, one operating point
//! under 10 ms, and memory linear in the size of the tree.
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
use joulepath::solve::{OperatingPoint, PackState, Solution, StageState, solve_point};

/// Tree sizes, in stages (loads are ten times as many).
const SIZES: [usize; 4] = [100, 300, 1000, 3000];
/// The size the targets are judged at.
const TARGET_N: usize = 1000;
/// Read + check + build target.
const TARGET_PARSE_MS: f64 = 100.0;
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
    assert_eq!(design.stages.len(), n);
    assert_eq!(design.loads.len(), 10 * n);

    // Read + check + build: repetitions scaled so each size takes a few seconds at most.
    let reps = match n {
        0..=300 => 15,
        301..=1000 => 9,
        _ => 5,
    };
    let parse = median_time(reps, || {
        let d = Design::from_text(black_box(&text)).expect("valid");
        black_box(d.stages.len());
    });

    // One operating point per mode, checked for energy balance every time.
    let mut points = Vec::new();
    let mut mode_names = Vec::new();
    let mut states = String::new();
    for (m, mode) in design.modes.iter().enumerate() {
        mode_names.push(mode.name.clone());
        let p = solved(&design, m);
        if mode.name == "active" {
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
        loads: design.loads.len(),
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
                design.modes[m].name
            );
            p
        }
        Solution::Collapse { ocv, resistance } => panic!(
            "mode {} collapsed (OCV {ocv} V, R {resistance} Ω): the generated design is sized wrong",
            design.modes[m].name
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
    for m in 0..small.modes.len() {
        black_box(solve_point(&small, m, AT));
    }
    let t = Arc::clone(&text);
    let (design, parse_peak) =
        in_fresh_arena(&mut keep, move || Design::from_text(&t).expect("valid"));
    let design = Arc::new(design);
    let mut point_peak = 0;
    for m in 0..design.modes.len() {
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

// ---------------------------------------------------------------------------------------------
// The generated design.

/// A small deterministic generator (xorshift), so every run builds the same trees.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        self.0 = x;
        x
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    /// Uniform in [lo, hi).
    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * ((self.next() >> 11) as f64 / (1u64 << 53) as f64)
    }
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Kind {
    Buck,
    Boost,
    BuckBoost,
    Linear,
    Switch,
}

impl Kind {
    fn name(self) -> &'static str {
        match self {
            Kind::Buck => "buck",
            Kind::Boost => "boost",
            Kind::BuckBoost => "buck-boost",
            Kind::Linear => "linear",
            Kind::Switch => "switch",
        }
    }
}

struct Plan {
    id: String,
    kind: Kind,
    /// Input rail: 0 the battery, `k + 1` stage `k`.
    input: usize,
    /// Nominal input voltage.
    vin: f64,
    /// Nominal output voltage.
    vout: f64,
    level: usize,
}

/// Standard rail voltages, highest first.
const LADDER: [f64; 9] = [5.0, 3.3, 2.8, 2.5, 1.8, 1.5, 1.2, 1.0, 0.9];
/// Nominal pack voltage (4 cells in series near mid charge).
const PACK_V: f64 = 14.8;

/// Voltages a stage can regulate to from `vin`, keeping `headroom` for dropout.
fn below(vin: f64, headroom: f64) -> Vec<f64> {
    LADDER
        .iter()
        .copied()
        .filter(|&v| v <= vin - headroom)
        .collect()
}

/// The stages of a tree of `n`: a few converters on the pack, bucks, buck-boosts, boosts and
/// linear regulators below them, and load switches at the leaves; up to four levels deep.
fn plan(n: usize, rng: &mut Rng) -> Vec<Plan> {
    let l1 = (n / 40).max(3).min(n);
    let l2 = (n * 22 / 100).min(n - l1);
    let l4 = (n * 30 / 100).min(n - l1 - l2);
    let l3 = n - l1 - l2 - l4;
    let mut out: Vec<Plan> = Vec::with_capacity(n);
    let push =
        |out: &mut Vec<Plan>, kind: Kind, input: usize, vin: f64, vout: f64, level: usize| {
            let k = out.len();
            out.push(Plan {
                id: format!("{}-{:05}", kind.name(), k),
                kind,
                input,
                vin,
                vout,
                level,
            });
        };
    // Level 1, on the pack.
    for i in 0..l1 {
        let (kind, vout) = match i % 4 {
            0 => (Kind::Buck, 5.0),
            1 => (Kind::Buck, 3.3),
            2 => (Kind::BuckBoost, 12.0),
            _ => (Kind::Boost, 24.0),
        };
        push(&mut out, kind, 0, PACK_V, vout, 1);
    }
    // Levels 2 to 4: each stage hangs on a stage of the level above (never on a switch).
    for (level, count) in [(2, l2), (3, l3), (4, l4)] {
        let parents: Vec<usize> = (0..out.len())
            .filter(|&k| out[k].level == level - 1 && out[k].kind != Kind::Switch)
            .collect();
        let parents = if parents.is_empty() {
            (0..out.len())
                .filter(|&k| out[k].kind != Kind::Switch)
                .collect()
        } else {
            parents
        };
        for i in 0..count {
            let p = parents[(i * 7 + rng.below(3)) % parents.len()];
            let vp = out[p].vout;
            let pick = rng.below(10);
            let (kind, vout) = match level {
                2 => {
                    if vp >= 12.0 {
                        if pick < 3 {
                            (Kind::BuckBoost, 5.0)
                        } else {
                            choose(Kind::Buck, vp, 0.5, rng)
                        }
                    } else if vp <= 3.3 && pick < 2 {
                        (Kind::Boost, 5.0)
                    } else if pick < 6 {
                        choose(Kind::Linear, vp, 0.4, rng)
                    } else {
                        choose(Kind::Buck, vp, 0.5, rng)
                    }
                }
                3 => {
                    if pick < 6 {
                        choose(Kind::Linear, vp, 0.4, rng)
                    } else if pick < 9 {
                        choose(Kind::Buck, vp, 0.5, rng)
                    } else {
                        (Kind::Switch, vp)
                    }
                }
                _ => {
                    if pick < 6 {
                        (Kind::Switch, vp)
                    } else {
                        choose(Kind::Linear, vp, 0.4, rng)
                    }
                }
            };
            push(&mut out, kind, p + 1, vp, vout, level);
        }
    }
    out
}

/// A regulator of `kind` from `vin`, or a load switch where no setpoint leaves the headroom.
fn choose(kind: Kind, vin: f64, headroom: f64, rng: &mut Rng) -> (Kind, f64) {
    let c = below(vin, headroom);
    if c.is_empty() {
        (Kind::Switch, vin)
    } else {
        (kind, c[rng.below(c.len().min(3))])
    }
}

fn volts(v: f64) -> String {
    format!("{} V", round3(v))
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// A measured-looking efficiency curve: low at light load, peaking near 100 mA, easing off above.
fn curve(rng: &mut Rng, shift: f64) -> String {
    let peak = rng.range(88.0, 94.0) - shift;
    let points = [
        (1.0, peak - rng.range(16.0, 22.0)),
        (10.0, peak - rng.range(6.0, 9.0)),
        (100.0, peak),
        (1000.0, peak - rng.range(2.0, 5.0)),
    ];
    let mut s = String::from("[");
    for (i, (ma, eta)) in points.iter().enumerate() {
        if i > 0 {
            s.push_str(", ");
        }
        let _ = write!(s, "[{ma} mA, {eta:.1} %]");
    }
    s.push(']');
    s
}

/// The design text of a tree of `n` stages and `10 n` loads.
fn generate(n: usize) -> String {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15 ^ n as u64);
    let stages = plan(n, &mut rng);
    let mut t = String::with_capacity(n * 2200);
    let _ = writeln!(
        t,
        "design: Generated field station, {n} stages and {} loads on a 4S10P pack",
        10 * n
    );
    t.push_str("ambient: 25 °C\n\n");

    // A lithium-ion cell with an 11-point OCV table.
    t.push_str("cells:\n  station-cell-3000:\n    chemistry: li-ion\n    capacity: 3000 mAh\n");
    t.push_str("    rated_current: 600 mA\n    ocv:\n");
    let ocv = [
        3.00, 3.30, 3.45, 3.55, 3.62, 3.68, 3.74, 3.82, 3.92, 4.05, 4.18,
    ];
    for (i, v) in ocv.iter().enumerate() {
        let _ = writeln!(t, "      - [{} %, {v:.2} V]", i * 10);
    }
    t.push_str(
        "    resistance:\n      - [0 %, 45 mΩ]\n      - [20 %, 28 mΩ]\n      - [100 %, 22 mΩ]\n",
    );
    t.push_str("    polarization: { resistance: 12 mΩ, time_constant: 25 s }\n");
    t.push_str("    peukert: 1.03\n    cutoff: 3.0 V\n    max_current: 10 A\n    self_discharge: 2 %/month\n");
    t.push_str("    temperature:\n");
    t.push_str("      - { at: -10 °C, capacity: 80 %, resistance: 220 % }\n");
    t.push_str("      - { at: 25 °C, capacity: 100 %, resistance: 100 % }\n\n");
    t.push_str(
        "battery:\n  cell: station-cell-3000\n  series: 4\n  parallel: 10\n  start: 100 %\n\n",
    );

    // Stages.
    t.push_str("stages:\n");
    for (k, s) in stages.iter().enumerate() {
        let input = if s.input == 0 {
            "battery".to_string()
        } else {
            stages[s.input - 1].id.clone()
        };
        let _ = writeln!(
            t,
            "  - id: {}\n    kind: {}\n    input: {input}",
            s.id,
            s.kind.name()
        );
        if s.kind != Kind::Switch {
            let _ = writeln!(t, "    output: {}", volts(s.vout));
        }
        match s.kind {
            Kind::Buck | Kind::Boost | Kind::BuckBoost => {
                match k % 4 {
                    0 => {
                        let _ = writeln!(t, "    efficiency: {:.1} %", rng.range(84.0, 95.0));
                    }
                    1 => {
                        let _ = writeln!(t, "    efficiency: {}", curve(&mut rng, 0.0));
                    }
                    2 => {
                        t.push_str("    efficiency:\n");
                        for (vin, shift) in [(0.85 * s.vin, 0.0), (1.15 * s.vin, 2.0)] {
                            let _ = writeln!(
                                t,
                                "      - vin: {}\n        curve: {}",
                                volts(vin),
                                curve(&mut rng, shift)
                            );
                        }
                    }
                    _ => {
                        let _ = writeln!(
                            t,
                            "    loss: {{ drop: {:.0} mV, resistance: {:.0} mΩ }}",
                            rng.range(20.0, 80.0),
                            rng.range(50.0, 300.0)
                        );
                    }
                }
                let _ = writeln!(
                    t,
                    "    quiescent: {:.1} µA\n    shutdown: 0.2 µA",
                    rng.range(5.0, 60.0)
                );
            }
            Kind::Linear => {
                let _ = writeln!(
                    t,
                    "    quiescent: {:.1} µA\n    shutdown: 0.1 µA",
                    rng.range(1.0, 50.0)
                );
            }
            Kind::Switch => {
                let _ = writeln!(
                    t,
                    "    on_resistance: {:.0} mΩ\n    quiescent: 0.5 µA\n    shutdown: 0.05 µA",
                    rng.range(40.0, 200.0)
                );
            }
        }
        match s.kind {
            Kind::Buck => {
                let _ = writeln!(t, "    dropout: {:.2} V", rng.range(0.08, 0.2));
            }
            Kind::Linear => {
                let _ = writeln!(t, "    dropout: {:.2} V", rng.range(0.1, 0.3));
            }
            Kind::Boost => t.push_str("    bypass_drop: 0.3 V\n"),
            _ => {}
        }
        if s.kind != Kind::Switch {
            let _ = writeln!(
                t,
                "    input_range: [{}, {}]",
                volts(0.5 * s.vin),
                volts(1.6 * s.vin)
            );
        }
        if s.level <= 2 {
            let _ = writeln!(t, "    theta_ja: {:.0} °C/W", rng.range(30.0, 90.0));
        }
    }

    // Loads: ten per stage, spread over every rail; a few straight on the pack.
    t.push_str("\nloads:\n");
    let loads = 10 * n;
    for l in 0..loads {
        let rail = if l % 97 == 0 { 0 } else { l % n + 1 };
        let rail_name = if rail == 0 {
            "battery"
        } else {
            stages[rail - 1].id.as_str()
        };
        let rail_v = if rail == 0 {
            PACK_V
        } else {
            stages[rail - 1].vout
        };
        let _ = writeln!(t, "  - id: load-{l:06}\n    rail: {rail_name}");
        if l % 5 == 0 {
            let _ = writeln!(
                t,
                "    voltage_range: [{}, {}]",
                volts(0.6 * rail_v),
                volts(1.4 * rail_v)
            );
        }
        let sleep = format!("{:.1} µA", rng.range(0.5, 15.0));
        let run = match l % 3 {
            0 => format!("{:.2} mA", rng.range(0.1, 1.5)),
            1 => format!("{:.2} mW", rng.range(0.5, 4.0)),
            // A resistive load drawing about 0.2 to 1 mA at its rail's voltage.
            _ => format!("{:.2} kΩ", rail_v / rng.range(0.2, 1.0)),
        };
        let peak = format!("{:.1} mW", rng.range(3.0, 10.0));
        let _ = writeln!(
            t,
            "    draw: {{ sleep: {sleep}, run: {run}, peak: {peak} }}"
        );
        if l % 4 != 3 {
            t.push_str("    default: sleep\n");
        }
    }

    // Modes: everything asleep; half the loads running; a burst; a standby that shuts down part
    // of the tree.
    t.push_str("\nmodes:\n  sleep: {}\n  active:\n");
    for l in (0..loads).step_by(2) {
        let _ = writeln!(t, "    load-{l:06}: run");
    }
    t.push_str("  burst:\n");
    for l in 0..loads {
        if l % 7 == 0 {
            let _ = writeln!(t, "    load-{l:06}: peak");
        } else if l % 3 == 0 {
            let _ = writeln!(t, "    load-{l:06}: run");
        }
    }
    t.push_str("  standby:\n");
    for (k, s) in stages.iter().enumerate() {
        let off = (s.level == 1 && k % 2 == 1) || (s.kind == Kind::Switch && k % 3 == 0);
        if off {
            let _ = writeln!(t, "    {}: off", s.id);
        }
    }

    t.push_str(concat!(
        "\nprofile:\n",
        "  - repeat:\n",
        "      - { mode: burst, for: 20 ms }\n",
        "      - { mode: active, for: 2 s }\n",
        "      - { mode: sleep, for: 30 s }\n",
        "    for: 8 h\n",
        "  - { mode: standby, for: 16 h }\n",
    ));
    t
}
