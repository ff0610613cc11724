//! The fuzz acceptance of the hardening issue: mutated designs (extreme magnitudes, swapped
//! units, broken structure, deep nesting, huge repeat counts) never panic, never die on a signal
//! and every run ends within 10 s, in the library and through the binary.
//!
//! Facilities: a small xorshift generator of our own (fixed seed, so every run draws the same
//! mutants), `std::panic::catch_unwind` to catch a panic with its mutant, a worker thread and
//! `std::sync::mpsc::Receiver::recv_timeout` so that a hang fails the test instead of stalling it,
//! `std::time::Instant` for each mutant's time, `std::process::Child::try_wait` / `kill` for the
//! binary, and proptest's `prop_oneof!` / `proptest!` for the designs drawn from extreme values.

use std::fmt::Write as _;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, mpsc};
use std::time::{Duration, Instant};

use joulepath::Design;
use joulepath::report::{
    Format, budget::write_budget, heat::write_heat, outline::write_outline, runtime::write_runtime,
    warnings, write_warnings,
};
use joulepath::solve::{RunOptions, budget, run};
use proptest::prelude::*;

use crate::util::{example_files, root};

/// The bound on one mutant (the issue: "no run over 10 s").
const BOUND: Duration = Duration::from_secs(10);

/// xorshift64* (Vigna, "An experiment with xorshift generators", 2014, from memory): small,
/// deterministic, good enough to pick mutations.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }

    /// Uniform in 0..n (n > 0).
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len())]
    }

    fn chance(&mut self, one_in: usize) -> bool {
        self.below(one_in) == 0
    }
}

/// The seeds: every example and the runtime test designs.
fn seeds() -> Vec<(PathBuf, String)> {
    let mut files = example_files();
    let mut data: Vec<PathBuf> = std::fs::read_dir(root().join("tests/data/runtime"))
        .expect("tests/data/runtime/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    data.sort();
    files.extend(data);
    files
        .into_iter()
        .map(|p| {
            let t = std::fs::read_to_string(&p).expect("read seed");
            (p, t)
        })
        .collect()
}

/// Numbers that stress the solver: the ends of f64, zero of both signs, NaN and infinity (as
/// text and as YAML's `.nan` / `.inf`), tiny and huge ordinary values, an integer past u64.
const NUMBERS: &[&str] = &[
    "1e-308",
    "1e308",
    "-1e308",
    "NaN",
    ".nan",
    "inf",
    ".inf",
    "-.inf",
    "-0",
    "0",
    "0.0",
    "1e-20",
    "1e20",
    "1e-9",
    "4e-324",
    "1.7976931348623157e308",
    "123456789012345678901234567890",
    "18446744073709551616",
    "-1",
    "1e18",
];

/// Unit swaps: each spelling in the seeds with a neighbour of another scale or kind.
const UNITS: &[(&str, &str)] = &[
    ("mA", "A"),
    ("mA", "kA"),
    ("µA", "A"),
    ("ms", "y"),
    ("ms", "ns"),
    (" s", " y"),
    (" s", " ps"),
    (" h", " y"),
    (" V", " kV"),
    (" V", " µV"),
    (" V", " A"),
    ("°C", "K"),
    ("°C", "°C/W"),
    ("mΩ", "MΩ"),
    ("Ω", "GΩ"),
    ("mAh", "µAh"),
    ("mAh", "kAh"),
    ("%", ""),
    ("%", "%/month"),
    ("W", "mW"),
];

/// Where a number starts and ends in `text` (ASCII digits with an optional fraction and exponent).
fn numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if b[i].is_ascii_digit() && (i == 0 || !b[i - 1].is_ascii_alphanumeric()) {
            let s = i;
            while i < b.len() && (b[i].is_ascii_digit() || b[i] == b'.') {
                i += 1;
            }
            if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
                let mut j = i + 1;
                if j < b.len() && (b[j] == b'-' || b[j] == b'+') {
                    j += 1;
                }
                if j < b.len() && b[j].is_ascii_digit() {
                    i = j;
                    while i < b.len() && b[i].is_ascii_digit() {
                        i += 1;
                    }
                }
            }
            out.push((s, i));
        } else {
            i += 1;
        }
    }
    out
}

/// A random float of any scale, as text.
fn random_float(r: &mut Rng) -> String {
    let mantissa = (r.next() % 10_000) as f64 / 1000.0;
    let exp = i32::try_from(r.below(80)).unwrap_or(0) - 40;
    let sign = if r.chance(4) { "-" } else { "" };
    format!("{sign}{mantissa}e{exp}")
}

/// The largest index <= `i` on a character boundary.
fn floor_char(text: &str, mut i: usize) -> usize {
    i = i.min(text.len());
    while !text.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// The profile's lines (after the top-level `profile:` key up to the next top-level key):
/// (index of the `profile:` line, index past the body).
fn profile_body(lines: &[&str]) -> Option<(usize, usize)> {
    let at = lines.iter().position(|l| l.trim_end() == "profile:")?;
    let end = lines[at + 1..]
        .iter()
        .position(|l| !l.is_empty() && !l.starts_with(' ') && !l.starts_with('#'))
        .map_or(lines.len(), |k| at + 1 + k);
    (end > at + 1).then_some((at, end))
}

/// Wrap the profile's body in `depth` nested repeat blocks, each with `count` passes.
fn nest_profile(text: &str, depth: usize, count: &str) -> Option<String> {
    let lines: Vec<&str> = text.lines().collect();
    let (at, end) = profile_body(&lines)?;
    let mut body: Vec<String> = lines[at + 1..end]
        .iter()
        .filter(|l| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
        .map(|l| (*l).to_string())
        .collect();
    for _ in 0..depth {
        let mut wrapped = vec!["  - repeat:".to_string()];
        wrapped.extend(body.iter().map(|l| format!("    {l}")));
        wrapped.push(format!("    times: {count}"));
        body = wrapped;
    }
    let mut out: Vec<String> = lines[..=at].iter().map(|l| (*l).to_string()).collect();
    out.extend(body);
    out.extend(lines[end..].iter().map(|l| (*l).to_string()));
    Some(out.join("\n") + "\n")
}

/// One mutation of `text`.
#[allow(clippy::too_many_lines)]
fn mutate_once(r: &mut Rng, text: &str) -> String {
    let lines: Vec<&str> = text.lines().collect();
    let join = |v: Vec<String>| v.join("\n") + "\n";
    let owned = || lines.iter().map(|l| (*l).to_string()).collect::<Vec<_>>();
    match r.below(18) {
        // A number scaled by 0.01..100: mostly still a valid design, with other values.
        16 | 17 => {
            let spots = numbers(text);
            if spots.is_empty() {
                return text.to_string();
            }
            let (s, e) = *r.pick(&spots);
            let v: f64 = text[s..e].parse().unwrap_or(1.0);
            let f = 10f64.powf((r.below(4001) as f64 - 2000.0) / 1000.0);
            format!("{}{}{}", &text[..s], v * f, &text[e..])
        }
        // A number replaced by an extreme or a random one (the most common mutation).
        0..=3 => {
            let spots = numbers(text);
            if spots.is_empty() {
                return text.to_string();
            }
            let (s, e) = *r.pick(&spots);
            let new = if r.chance(3) {
                random_float(r)
            } else {
                (*r.pick(NUMBERS)).to_string()
            };
            format!("{}{new}{}", &text[..s], &text[e..])
        }
        // A unit swapped for one of another scale or kind.
        4 => {
            let (from, to) = *r.pick(UNITS);
            let spots: Vec<usize> = text.match_indices(from).map(|(i, _)| i).collect();
            if spots.is_empty() {
                return text.to_string();
            }
            let s = *r.pick(&spots);
            format!("{}{to}{}", &text[..s], &text[s + from.len()..])
        }
        // Delete, duplicate or swap lines.
        5 => {
            let mut v = owned();
            if !v.is_empty() {
                let i = r.below(v.len());
                match r.below(3) {
                    0 => {
                        v.remove(i);
                    }
                    1 => v.insert(i, v[i].clone()),
                    _ => {
                        let j = r.below(v.len());
                        v.swap(i, j);
                    }
                }
            }
            join(v)
        }
        // Indentation changed on one line: more, less, or a tab.
        6 => {
            let mut v = owned();
            if !v.is_empty() {
                let i = r.below(v.len());
                v[i] = match r.below(3) {
                    0 => format!("{}{}", " ".repeat(1 + r.below(7)), v[i]),
                    1 => v[i].trim_start().to_string(),
                    _ => format!("\t{}", v[i]),
                };
            }
            join(v)
        }
        // Truncated at a random byte.
        7 => text[..floor_char(text, r.below(text.len() + 1))].to_string(),
        // Random bytes (as characters), deep brackets, a long key or tabs inserted.
        8 => {
            let at = floor_char(text, r.below(text.len() + 1));
            let junk = match r.below(6) {
                0 => (0..=r.below(16))
                    .map(|_| char::from_u32(r.below(0x3000) as u32).unwrap_or('\u{fffd}'))
                    .collect(),
                1 => {
                    let n = 1 + r.below(400);
                    format!("{}{}", "[".repeat(n), "]".repeat(n))
                }
                2 => "[{".repeat(1 + r.below(200)),
                3 => format!("\n{}: 1\n", "k".repeat(1 + r.below(100_000))),
                4 => "\t".repeat(1 + r.below(4)),
                _ => (*r.pick(&[
                    "&a [*a]",
                    "*nowhere",
                    "!!binary AAAA",
                    "<<: *x",
                    "? [a]\n: b",
                    "---\n",
                    "...\n",
                    "\u{0}",
                    "\u{feff}",
                    "{",
                    "}",
                    ":",
                    "- ",
                    "'",
                    "\"",
                ]))
                .to_string(),
            };
            format!("{}{junk}{}", &text[..at], &text[at..])
        }
        // The profile nested in repeat blocks, possibly deeper than the bound.
        9 => {
            let depth = 1 + r.below(60);
            let count = if r.chance(2) {
                (1 + r.below(5)).to_string()
            } else {
                (r.next() % 1_000_000_000_000_000_001).to_string()
            };
            nest_profile(text, depth, &count).unwrap_or_else(|| text.to_string())
        }
        // `battery.start` set tiny, zero or out of range.
        10 => {
            let start = *r.pick(&[
                "0 %",
                "0",
                "1e-300 %",
                "1e-12",
                "1e-308",
                "0.0000001 %",
                "100 %",
                "101 %",
                "-1 %",
                ".nan",
                "NaN %",
            ]);
            if let Some(i) = text.find("battery: {") {
                let k = i + "battery: {".len();
                format!("{} start: {start},{}", &text[..k], &text[k..])
            } else if let Some(i) = text.find("\nbattery:\n") {
                let k = i + "\nbattery:\n".len();
                format!("{}  start: {start}\n{}", &text[..k], &text[k..])
            } else {
                text.to_string()
            }
        }
        // A repeat count up to 1e18 (or past it).
        11 => {
            let spots: Vec<usize> = text.match_indices("times: ").map(|(i, _)| i).collect();
            if spots.is_empty() {
                return nest_profile(text, 1, &(r.next() % 1_000_000_000_000_000_001).to_string())
                    .unwrap_or_else(|| text.to_string());
            }
            let s = *r.pick(&spots) + "times: ".len();
            let e = s + text[s..]
                .find(|c: char| !c.is_ascii_digit())
                .unwrap_or(text.len() - s);
            let n = match r.below(4) {
                0 => "1000000000000000000".to_string(),
                1 => "0".to_string(),
                2 => "99999999999999999999".to_string(),
                _ => (r.next() % 1_000_000_000_000_000_001).to_string(),
            };
            format!("{}{n}{}", &text[..s], &text[e..])
        }
        // A step length from a nanosecond to past the bound.
        12 => {
            let spots: Vec<usize> = text.match_indices("for: ").map(|(i, _)| i).collect();
            if spots.is_empty() {
                return text.to_string();
            }
            let s = *r.pick(&spots) + "for: ".len();
            let e = s + text[s..].find([',', '}', '\n']).unwrap_or(text.len() - s);
            let d = *r.pick(&[
                "1 ns", "1e-9 s", "1e-20 s", "0 s", "100 y", "101 y", "1e300 s", "1e-308 s",
                ".nan s", "1000 y", "1 ms",
            ]);
            format!("{}{d}{}", &text[..s], &text[e..])
        }
        // A polarization branch with a time constant from a nanosecond to years on every cell.
        13 => {
            let tau = *r.pick(&["1 ns", "1 µs", "1 s", "1 h", "10 y", "1e-308 s", "0 s"]);
            let res = *r.pick(&["1 mΩ", "1 Ω", "1e6 Ω", "0 Ω", "1e-308 Ω"]);
            match text.find("resistance:") {
                Some(i) => format!(
                    "{}polarization: {{ resistance: {res}, time_constant: {tau} }}\n    {}",
                    &text[..i],
                    &text[i..]
                ),
                None => text.to_string(),
            }
        }
        // An OCV table made flat or steep.
        14 => {
            let spots = numbers(text);
            let volts: Vec<&(usize, usize)> = spots
                .iter()
                .filter(|(_, e)| text[*e..].starts_with(" V]"))
                .collect();
            if volts.is_empty() {
                return text.to_string();
            }
            let v = if r.chance(2) { "3.7" } else { "1e6" };
            let mut out = text.to_string();
            for (s, e) in volts.iter().rev() {
                if r.chance(2) {
                    out.replace_range(*s..*e, v);
                }
            }
            out
        }
        // Everything duplicated (mappings with every key twice).
        _ => format!("{text}{text}"),
    }
}

/// A mutant: one to three mutations of `seed`.
fn mutate(r: &mut Rng, seed: &str) -> String {
    let mut t = seed.to_string();
    // One mutation half the time, two a third, three a sixth: many mutants stay valid enough
    // to reach the solver.
    let n = match r.below(6) {
        0..=2 => 1,
        3 | 4 => 2,
        _ => 3,
    };
    for _ in 0..n {
        t = mutate_once(r, &t);
    }
    t
}

/// What one mutant did in the library.
#[derive(Debug, Default, Clone, Copy)]
struct Outcome {
    /// The checker accepted it.
    checked: bool,
    /// The run returned a result.
    ran: bool,
}

/// Everything the command line does with a design, in-process, every format into a buffer.
fn exercise(text: &str) -> Outcome {
    let Ok(d) = Design::from_text(text) else {
        return Outcome::default();
    };
    let mut sink: Vec<u8> = Vec::new();
    write_outline(&mut sink, &d).expect("outline into a buffer");
    write_warnings(&mut sink, &warnings(&d, d.ambient_c()), 96).expect("warnings into a buffer");
    let modes: Vec<usize> = (0..d.modes().len()).collect();
    for soc in [d.pack().start_soc(), 0.0, 1.0] {
        let b = budget(&d, soc, &modes);
        for f in [Format::Table, Format::Json, Format::Csv] {
            write_budget(&mut sink, &d, soc, &b, f).expect("budget into a buffer");
        }
    }
    let mut ran = false;
    if let Ok(r) = run(&d, &RunOptions::for_design(&d)) {
        ran = true;
        for f in [Format::Table, Format::Json, Format::Csv] {
            write_runtime(&mut sink, &d, &r, f, false).expect("runtime into a buffer");
            write_heat(&mut sink, &d, &r, f).expect("heat into a buffer");
        }
        write_warnings(&mut sink, &warnings(&d, r.ambient_c), 96).expect("warnings into a buffer");
    }
    Outcome { checked: true, ran }
}

/// Where failing mutants are saved.
fn save(name: &str, text: &str) -> PathBuf {
    let dir = root().join("target/fuzz");
    std::fs::create_dir_all(&dir).expect("target/fuzz");
    let p = dir.join(name);
    std::fs::write(&p, text).expect("save mutant");
    p
}

fn panic_message(p: &(dyn std::any::Any + Send)) -> String {
    p.downcast_ref::<&str>()
        .map(|s| (*s).to_string())
        .or_else(|| p.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "(not a string)".to_string())
}

/// Every mutant: its seed's name, the text.
fn mutants(per_seed: usize, seed: u64) -> Vec<(String, String)> {
    let mut r = Rng(seed);
    let mut out = Vec::new();
    for (path, text) in seeds() {
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        for _ in 0..per_seed {
            out.push((name.clone(), mutate(&mut r, &text)));
        }
    }
    out
}

#[test]
fn ten_thousand_mutated_designs_neither_panic_nor_hang() {
    let seeds = seeds().len();
    assert!(seeds >= 7, "{seeds} seeds");
    let per_seed = 10_000usize.div_ceil(seeds);
    let all = mutants(per_seed, 0x6a6f_756c_6570_6174);
    let total = all.len();
    assert!(total >= 10_000, "{total} mutants");

    // Workers (one per core, at most four) take the mutants from a shared queue, each noting
    // which mutant it is on; the test waits for results with the bound, so a hang fails here
    // with the mutants in hand saved (the stuck worker is left behind, the test ends).
    let all = Arc::new(all);
    let workers = std::thread::available_parallelism().map_or(1, |n| n.get().min(4));
    let next = Arc::new(AtomicUsize::new(0));
    let busy: Arc<Mutex<Vec<Option<usize>>>> = Arc::new(Mutex::new(vec![None; workers]));
    let (to_test, results) = mpsc::channel::<(usize, Result<Outcome, String>, Duration)>();
    let handles: Vec<_> = (0..workers)
        .map(|w| {
            let (all, next, busy, to_test) =
                (all.clone(), next.clone(), busy.clone(), to_test.clone());
            std::thread::spawn(move || {
                loop {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    let Some((_, text)) = all.get(i) else { break };
                    busy.lock().unwrap()[w] = Some(i);
                    let start = Instant::now();
                    let outcome = catch_unwind(AssertUnwindSafe(|| exercise(text)))
                        .map_err(|p| panic_message(&*p));
                    let took = start.elapsed();
                    busy.lock().unwrap()[w] = None;
                    if to_test.send((i, outcome, took)).is_err() {
                        break;
                    }
                }
            })
        })
        .collect();
    drop(to_test);

    let started = Instant::now();
    let mut times: Vec<(Duration, usize)> = Vec::with_capacity(total);
    let (mut checked, mut ran) = (0usize, 0usize);
    let mut over: Vec<String> = Vec::new();
    for _ in 0..total {
        let wait = BOUND + Duration::from_secs(5);
        let Ok((i, outcome, took)) = results.recv_timeout(wait) else {
            let stuck: Vec<usize> = busy.lock().unwrap().iter().flatten().copied().collect();
            for &i in &stuck {
                save(&format!("hang-{i}.yaml"), &all[i].1);
            }
            panic!(
                "no mutant ended for {wait:?}: mutants {stuck:?} ran over the {BOUND:?} bound; \
                 saved under target/fuzz/"
            );
        };
        let (seed, text) = &all[i];
        match outcome {
            Ok(o) => {
                checked += usize::from(o.checked);
                ran += usize::from(o.ran);
            }
            Err(msg) => {
                let p = save("panic.yaml", text);
                panic!(
                    "mutant {i} of {seed} panicked: {msg}; saved as {}\n{text}",
                    p.display()
                );
            }
        }
        if took > BOUND {
            let p = save(&format!("slow-{i}.yaml"), text);
            over.push(format!(
                "mutant {i} of {seed} took {took:?}, saved as {}",
                p.display()
            ));
        }
        times.push((took, i));
    }
    for h in handles {
        h.join().expect("worker ends");
    }
    let elapsed = started.elapsed();

    times.sort_by_key(|t| std::cmp::Reverse(t.0));
    let mut slowest = String::new();
    for (t, i) in times.iter().take(5) {
        let _ = write!(
            slowest,
            " {:.1} ms ({}, #{i});",
            t.as_secs_f64() * 1e3,
            all[*i].0
        );
    }
    println!(
        "fuzz: {total} mutants of {seeds} seeds in {:.1} s on {workers} threads (sum of the \
         mutants' times {:.1} s); {checked} checked ({:.0} %), {ran} ran \
         to a result ({:.0} %); slowest:{slowest}",
        elapsed.as_secs_f64(),
        times.iter().map(|t| t.0.as_secs_f64()).sum::<f64>(),
        100.0 * checked as f64 / total as f64,
        100.0 * ran as f64 / total as f64,
    );
    assert!(
        over.is_empty(),
        "{} mutants ran over {BOUND:?}:\n{}",
        over.len(),
        over.join("\n")
    );
    // The fuzz must reach the solver, not only the parser.
    assert!(
        ran * 10 >= total,
        "only {ran} of {total} mutants reached a run result"
    );
}

/// Run the binary with a wall-clock bound; `None` if it had to be killed.
fn run_bounded(args: &[&str], dir: &Path) -> Option<std::process::ExitStatus> {
    let out = std::fs::File::create(dir.join("out")).expect("out file");
    let err = std::fs::File::create(dir.join("err")).expect("err file");
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_joulepath"))
        .args(args)
        .current_dir(dir)
        .stdin(std::process::Stdio::null())
        .stdout(out)
        .stderr(err)
        .spawn()
        .expect("start joulepath");
    let start = Instant::now();
    loop {
        if let Some(status) = child.try_wait().expect("wait") {
            return Some(status);
        }
        if start.elapsed() > BOUND {
            let _ = child.kill();
            let _ = child.wait();
            return None;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
}

#[test]
fn cli_survives_mutants() {
    let all = mutants(30, 0x636c_695f_6675_7a7a);
    assert!(all.len() >= 200, "{} mutants", all.len());
    let dir = tempfile::tempdir().expect("temp dir");
    let file = dir.path().join("design.yaml");
    let file_s = file.display().to_string();
    let started = Instant::now();
    let mut codes = [0usize; 3];
    for (i, (seed, text)) in all.iter().enumerate() {
        std::fs::write(&file, text).expect("write mutant");
        for cmd in [
            &["check", &file_s][..],
            &["runtime", &file_s, "--format", "json"],
            &["heat", &file_s, "--format", "json"],
            &["budget", &file_s, "--format", "json"],
        ] {
            let Some(status) = run_bounded(cmd, dir.path()) else {
                let p = save("cli-hang.yaml", text);
                panic!(
                    "`joulepath {}` on mutant {i} of {seed} ran over {BOUND:?}; saved as {}",
                    cmd[0],
                    p.display()
                );
            };
            #[cfg(unix)]
            {
                use std::os::unix::process::ExitStatusExt;
                if let Some(sig) = status.signal() {
                    let p = save("cli-signal.yaml", text);
                    panic!(
                        "`joulepath {}` on mutant {i} of {seed} died on signal {sig}; saved as {}",
                        cmd[0],
                        p.display()
                    );
                }
            }
            let code = status.code();
            if !matches!(code, Some(0..=2)) {
                let p = save("cli-exit.yaml", text);
                let err = std::fs::read_to_string(dir.path().join("err")).unwrap_or_default();
                panic!(
                    "`joulepath {}` on mutant {i} of {seed} exited with {code:?}; saved as {}\n{err}",
                    cmd[0],
                    p.display()
                );
            }
            codes[code.unwrap_or(0) as usize] += 1;
        }
    }
    println!(
        "cli fuzz: {} mutants x 4 commands in {:.1} s; exit 0: {}, 1: {}, 2: {}",
        all.len(),
        started.elapsed().as_secs_f64(),
        codes[0],
        codes[1],
        codes[2]
    );
    // Both outcomes are reached: designs that run and designs refused with exit 1.
    assert!(codes[0] > 0 && codes[1] > 0, "{codes:?}");
}

/// A magnitude: mostly ordinary values in `lo..hi`, often one of the extremes of f64.
fn magnitude(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    prop_oneof![
        16 => lo..hi,
        1 => prop::sample::select(vec![
            1e-308,
            1e308,
            -1e308,
            f64::NAN,
            f64::INFINITY,
            0.0,
            -0.0,
            1e-20,
            1e20,
            4e-324,
        ]),
    ]
}

/// `v` with `unit`, as the design file writes it; NaN and infinity as YAML's `.nan` / `.inf`
/// (a plain YAML float, with no unit).
fn q(v: f64, unit: &str) -> String {
    if v.is_nan() {
        ".nan".to_string()
    } else if v.is_infinite() {
        if v > 0.0 { ".inf" } else { "-.inf" }.to_string()
    } else {
        format!("{v:e} {unit}")
    }
}

/// A structurally valid design whose numbers are drawn from [`magnitude`]s.
#[derive(Debug, Clone)]
struct Extreme {
    capacity_mah: f64,
    ocv_lo: f64,
    ocv_span: f64,
    r_ohm: f64,
    pol: Option<(f64, f64)>,
    series: u32,
    start: f64,
    draw_a: f64,
    sleep_a: f64,
    power_w: f64,
    buck: Option<(f64, f64)>,
    /// The buck's input current limit (A) and a buffer capacitor on its rail (F, Ω).
    rail_buffer: Option<(f64, f64, f64)>,
    on_s: f64,
    off_s: f64,
    times: Option<u64>,
    ambient_c: f64,
}

fn extreme() -> impl Strategy<Value = Extreme> {
    (
        (
            magnitude(1e-3, 1e6),
            magnitude(0.5, 4.0),
            // Flat (zero or 1e-12 V span) to steep (500 V span) OCV tables, and one past f64's end.
            prop_oneof![
                1 => Just(0.0),
                1 => Just(1e-12),
                6 => 0.01f64..2.0,
                2 => Just(500.0),
                1 => Just(1e308)
            ],
            magnitude(0.0, 100.0),
            prop::option::of((
                magnitude(0.0, 100.0),
                // Time constants from a nanosecond to years.
                prop_oneof![
                    Just(1e-9),
                    Just(1e-6),
                    1e-3f64..1e5,
                    Just(3.2e7),
                    Just(3.2e9),
                    Just(1e-308),
                ],
            )),
            1u32..4,
            // Start SoC: full, the least accepted above zero (0.01 %), zero, below the
            // bound, or anywhere.
            prop_oneof![
                1 => Just(1.0),
                2 => Just(1e-4),
                1 => Just(0.0),
                1 => Just(1e-300),
                1 => Just(1e-12),
                3 => 0.0f64..1.0
            ],
        ),
        (
            magnitude(0.0, 1.0),
            magnitude(0.0, 1e-3),
            magnitude(0.0, 1.0),
            prop::option::of((magnitude(0.5, 5.0), magnitude(0.5, 0.99))),
            // Durations from a nanosecond to the 100-year bound and beyond.
            prop_oneof![
                1 => Just(1e-9),
                1 => Just(1e-20),
                4 => 1e-3f64..1e4,
                1 => Just(3.15e9),
                1 => Just(1e300)
            ],
            magnitude(1e-3, 1e5),
            prop::option::of(prop_oneof![
                1u64..100,
                Just(1_000_000_000_000_000_000),
                0u64..=1_000_000_000_000_000_000,
            ]),
            magnitude(-40.0, 85.0),
            prop::option::of((
                magnitude(1e-4, 0.1),
                magnitude(1e-6, 1.0),
                magnitude(0.0, 10.0),
            )),
        ),
    )
        .prop_map(
            |(
                (capacity_mah, ocv_lo, ocv_span, r_ohm, pol, series, start),
                (draw_a, sleep_a, power_w, buck, on_s, off_s, times, ambient_c, rail_buffer),
            )| Extreme {
                capacity_mah,
                ocv_lo,
                ocv_span,
                r_ohm,
                pol,
                series,
                start,
                draw_a,
                sleep_a,
                power_w,
                buck,
                rail_buffer,
                on_s,
                off_s,
                times,
                ambient_c,
            },
        )
}

impl Extreme {
    fn yaml(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "design: extreme magnitudes");
        let _ = writeln!(s, "ambient: {}", q(self.ambient_c, "°C"));
        let _ = writeln!(s, "cells:\n  c:");
        let _ = writeln!(s, "    capacity: {}", q(self.capacity_mah, "mAh"));
        let _ = writeln!(
            s,
            "    ocv: [[0 %, {}], [50 %, {}], [100 %, {}]]",
            q(self.ocv_lo, "V"),
            q(self.ocv_lo + 0.5 * self.ocv_span, "V"),
            q(self.ocv_lo + self.ocv_span, "V")
        );
        let _ = writeln!(s, "    resistance: {}", q(self.r_ohm, "Ω"));
        if let Some((r, tau)) = self.pol {
            let _ = writeln!(
                s,
                "    polarization: {{ resistance: {}, time_constant: {} }}",
                q(r, "Ω"),
                q(tau, "s")
            );
        }
        let _ = writeln!(s, "    cutoff: {}", q(self.ocv_lo * 0.9, "V"));
        let _ = writeln!(
            s,
            "battery: {{ cell: c, series: {}, start: {} }}",
            self.series,
            q(self.start * 100.0, "%")
        );
        let rail = if let Some((v, eta)) = self.buck {
            let buffered = self.rail_buffer.map_or(String::new(), |(l, c, esr)| {
                format!(
                    ", input_current_limit: {}, buffer: {{ capacitance: {}, esr: {} }}",
                    q(l, "A"),
                    q(c, "F"),
                    q(esr, "Ω")
                )
            });
            let _ = writeln!(
                s,
                "stages:\n  - {{ id: reg, kind: buck, input: battery, output: {}, efficiency: {}{buffered} }}",
                q(v, "V"),
                q(eta * 100.0, "%")
            );
            "reg"
        } else {
            "battery"
        };
        let _ = writeln!(s, "loads:");
        let _ = writeln!(
            s,
            "  - {{ id: a, rail: {rail}, draw: {{ on: {}, sleep: {} }}, default: sleep }}",
            q(self.draw_a, "A"),
            q(self.sleep_a, "A")
        );
        let _ = writeln!(
            s,
            "  - {{ id: p, rail: battery, draw: {{ on: {} }} }}",
            q(self.power_w, "W")
        );
        let _ = writeln!(s, "modes: {{ busy: {{ a: on, p: on }}, rest: {{}} }}");
        let steps = format!(
            "[{{ mode: busy, for: {} }}, {{ mode: rest, for: {} }}]",
            q(self.on_s, "s"),
            q(self.off_s, "s")
        );
        match self.times {
            Some(n) => {
                let _ = writeln!(s, "profile:\n  - {{ repeat: {steps}, times: {n} }}");
                let _ = writeln!(s, "  - {{ mode: rest, for: 1 h }}");
            }
            None => {
                let _ = writeln!(s, "profile: {steps}");
            }
        }
        s
    }
}

#[test]
fn runs_end_in_bounded_time_on_extreme_magnitudes() {
    // proptest's `TestRunner` by hand (not the `proptest!` macro) so that the cases that pass
    // the checker and reach a result can be counted once all are done.
    let mut runner = proptest::test_runner::TestRunner::new_with_rng(
        ProptestConfig {
            cases: 300,
            failure_persistence: None,
            ..ProptestConfig::default()
        },
        proptest::test_runner::TestRng::deterministic_rng(
            proptest::test_runner::RngAlgorithm::ChaCha,
        ),
    );
    let counts = std::cell::Cell::new((0usize, 0usize, 0usize));
    let slowest = std::cell::Cell::new(Duration::ZERO);
    let result = runner.run(&extreme(), |x| {
        let text = x.yaml();
        let start = Instant::now();
        let checked = Design::from_text(&text);
        let (mut cases, mut ok, mut ran) = counts.get();
        cases += 1;
        if let Ok(d) = checked {
            ok += 1;
            let opt = RunOptions::for_design(&d);
            let result = run(&d, &opt);
            if let Ok(r) = result {
                ran += 1;
                prop_assert!(
                    r.runtime_s().is_finite(),
                    "runtime {}\n{}",
                    r.runtime_s(),
                    text
                );
                prop_assert!(
                    r.runtime_s() >= 0.0 && r.runtime_s() <= opt.horizon_s,
                    "runtime {} beyond the horizon {}\n{}",
                    r.runtime_s(),
                    opt.horizon_s,
                    text
                );
                prop_assert!(r.end.soc.is_finite(), "end SoC {}\n{}", r.end.soc, text);
            }
        }
        let took = start.elapsed();
        prop_assert!(took < BOUND, "took {:?}\n{}", took, text);
        slowest.set(slowest.get().max(took));
        counts.set((cases, ok, ran));
        Ok(())
    });
    if let Err(e) = result {
        panic!("{e}");
    }
    let (cases, ok, ran) = counts.get();
    println!(
        "extreme magnitudes: {cases} cases, {ok} checked, {ran} ran to a result; slowest {:.1} ms",
        slowest.get().as_secs_f64() * 1e3
    );
    // The strategy must reach the solver in a real share of the cases.
    assert!(ran * 10 >= cases, "only {ran} of {cases} cases ran");
}
