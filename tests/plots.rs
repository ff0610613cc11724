//! Pictures and the HTML report: SVG that parses and names its axes with units, the cutoff and
//! the end; PNG of the asked size that is not blank; a self-contained HTML report; the spread's
//! histogram and tornado chart, and its section of the report.
//!
//! Set `JOULEPATH_PLOT_DIR` to a directory to also write every picture there for a look.

use std::collections::HashSet;
use std::path::Path;

use joulepath::Design;
use joulepath::report::html::{write_html, write_html_with_spread};
use joulepath::report::plot::{
    DEFAULT_SIZE, PlotError, PlotFormat, compare_discharge, discharge, efficiency, losses,
    plot_format, spread_histogram, spread_tornado,
};
use joulepath::solve::{ModeBudget, RunError, RunOptions, RunResult, budget, run};
use joulepath::spread::{Spread, SpreadOptions, spread};

use crate::util::{example_files, root};

fn load(name: &str) -> Design {
    let path = root().join("examples").join(name);
    Design::from_file(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn traced(d: &Design) -> RunResult {
    run(
        d,
        &RunOptions {
            trace: true,
            ..RunOptions::for_design(d)
        },
    )
    .expect("the run gives a result")
}

fn start_budget(d: &Design) -> Vec<ModeBudget> {
    let all: Vec<usize> = (0..d.modes().len()).collect();
    budget(d, d.pack().start_soc(), &all)
}

/// Write `bytes` to `JOULEPATH_PLOT_DIR/name` when that variable is set.
fn keep(name: &str, bytes: &[u8]) {
    if let Some(dir) = std::env::var_os("JOULEPATH_PLOT_DIR") {
        let dir = Path::new(&dir);
        std::fs::create_dir_all(dir).expect("plot dir");
        std::fs::write(dir.join(name), bytes).expect("write picture");
    }
}

/// Every text node of an SVG document, which must parse as XML.
fn svg_texts(bytes: &[u8]) -> Vec<String> {
    let text = std::str::from_utf8(bytes).expect("SVG is UTF-8");
    let doc =
        roxmltree::Document::parse(text).unwrap_or_else(|e| panic!("SVG does not parse: {e}"));
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    doc.descendants()
        .filter(roxmltree::Node::is_text)
        .filter_map(|n| n.text())
        .map(|t| t.trim().to_string())
        .filter(|t| !t.is_empty())
        .collect()
}

fn has(texts: &[String], needle: &str) -> bool {
    texts.iter().any(|t| t.contains(needle))
}

/// Decode a PNG: its size and how many distinct colours it uses.
fn png_look(bytes: &[u8]) -> ((u32, u32), usize) {
    let img = image::load_from_memory_with_format(bytes, image::ImageFormat::Png)
        .expect("PNG decodes")
        .to_rgb8();
    let colours: HashSet<[u8; 3]> = img.pixels().map(|p| p.0).collect();
    (img.dimensions(), colours.len())
}

#[test]
fn formats_follow_the_extension() {
    assert_eq!(plot_format(Path::new("a/b.svg")), Some(PlotFormat::Svg));
    assert_eq!(plot_format(Path::new("b.Png")), Some(PlotFormat::Png));
    assert_eq!(plot_format(Path::new("b.jpeg")), None);
    assert_eq!(plot_format(Path::new("svg")), None);
}

#[test]
fn discharge_svg_names_axes_cutoff_and_end() {
    let d = load("coin-cell-tag.yaml");
    let r = traced(&d);
    let svg = discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("discharge SVG");
    keep("coin-discharge.svg", &svg);
    let t = svg_texts(&svg);
    for want in [
        "pack voltage (V)",
        "state of charge (%)",
        "time from start (d)",
        "cutoff 2.00 V",
        "open-circuit voltage",
        "lowest terminal voltage",
        "cutoff: under load below 2.00 V",
        "in `advertise`",
        d.title(),
    ] {
        assert!(has(&t, want), "no `{want}` in the SVG texts {t:?}");
    }
    // The trace is drawn: a polyline with many points.
    let s = String::from_utf8(svg).unwrap();
    assert!(s.matches("<polyline").count() >= 3, "too few lines");
}

#[test]
fn discharge_shades_long_mode_stretches() {
    let d = load("wearable-band.yaml");
    let r = traced(&d);
    let svg = discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("discharge SVG");
    keep("wearable-discharge.svg", &svg);
    let t = svg_texts(&svg);
    assert!(has(&t, "short cycles, mostly `track`"), "{t:?}");
    assert!(has(&t, "short cycles, mostly `rest`"), "{t:?}");
    assert!(has(&t, "time from start (d)"));
}

#[test]
fn discharge_needs_a_trace() {
    let d = load("coin-cell-tag.yaml");
    let r = run(&d, &RunOptions::for_design(&d)).unwrap();
    assert_eq!(
        discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE),
        Err(PlotError::NoTrace)
    );
    let r = traced(&d);
    assert!(matches!(
        discharge(&d, &r, PlotFormat::Png, (10, 10)),
        Err(PlotError::Size(10, 10))
    ));
}

#[test]
fn losses_svg_ranks_places_and_says_the_split_is_estimated() {
    let d = load("handheld-meter.yaml");
    let r = traced(&d);
    let svg = losses(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("losses SVG");
    keep("meter-losses.svg", &svg);
    let t = svg_texts(&svg);
    for want in [
        "energy lost over the run (Wh)",
        "boost-3v3 (boost)",
        "ldo-1v8 (linear)",
        "battery (pack)",
        "split by mode is estimated",
        "mode `sleep`",
        "of losses",
    ] {
        assert!(has(&t, want), "no `{want}` in {t:?}");
    }
}

/// The losses picture names the energies as the runtime and heat tables do: the energy from the
/// cells (open-circuit voltage x current) and the loads' share of it, with the same figures.
#[test]
fn losses_picture_speaks_of_the_energy_from_the_cells_as_the_tables_do() {
    use joulepath::units::{fmt_eng, fmt_percent};
    for name in ["wearable-band.yaml", "handheld-meter.yaml"] {
        let d = load(name);
        let r = traced(&d);
        let svg = losses(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("losses SVG");
        let t = svg_texts(&svg);
        let l = &r.ledger;
        let from_cells = fmt_eng(l.cell_energy_j() / 3600.0, "Wh");
        let loads = format!(
            "to the loads: {} ({} of the energy from the cells)",
            fmt_eng(l.load_energy_total() / 3600.0, "Wh"),
            fmt_percent(l.load_share_of_cell_energy().unwrap())
        );
        let lost = fmt_percent((l.stage_loss_total() + l.pack_loss_j) / l.cell_energy_j());
        for want in [
            format!("Where the energy from the cells ({from_cells}) went"),
            loads,
            format!("{lost} of the energy from the cells was lost on the way"),
        ] {
            assert!(has(&t, &want), "{name}: no `{want}` in {t:?}");
        }
        assert!(!has(&t, "drawn from the cells"), "{name}: old wording");
    }
}

#[test]
fn efficiency_svg_has_a_panel_per_switching_stage() {
    let d = load("scanner-boost.yaml");
    let r = traced(&d);
    let svg = efficiency(
        &d,
        &start_budget(&d),
        Some(&r),
        PlotFormat::Svg,
        DEFAULT_SIZE,
    )
    .expect("efficiency SVG");
    keep("scanner-efficiency.svg", &svg);
    let t = svg_texts(&svg);
    for want in [
        "output current (A, log scale)",
        "efficiency (%)",
        "`boost-3v3` boost to 3.30 V",
        "mode `scan`",
        "10 µA",
    ] {
        assert!(has(&t, want), "no `{want}` in {t:?}");
    }
    // No switching stage, nothing to draw.
    let coin = load("coin-cell-tag.yaml");
    assert!(matches!(
        efficiency(
            &coin,
            &start_budget(&coin),
            None,
            PlotFormat::Svg,
            DEFAULT_SIZE
        ),
        Err(PlotError::Nothing(_))
    ));
}

/// Three switching stages (one on another through a switch) and a linear regulator.
const THREE_CONVERTERS: &str = r"
design: Three converters
cells:
  c: { capacity: 2 Ah, ocv: [[0 %, 3.3 V], [100 %, 4.2 V]], resistance: 0.1 ohm, cutoff: 3.0 V }
battery: { cell: c }
stages:
  - { id: bb, kind: buck-boost, input: battery, output: 3.3 V, efficiency: 90 %, quiescent: 20 µA }
  - { id: sw, kind: switch, input: bb, on_resistance: 0.1 ohm }
  - id: core
    kind: buck
    input: sw
    output: 1.2 V
    loss: { drop: 0.05 V, resistance: 0.3 ohm }
    quiescent: 5 µA
  - id: hv
    kind: boost
    input: battery
    output: 5 V
    efficiency: [[1 mA, 70 %], [10 mA, 85 %], [100 mA, 90 %]]
    quiescent: 40 µA
  - { id: ldo, kind: linear, input: bb, output: 1.8 V }
loads:
  - { id: cpu, rail: core, draw: { run: 80 mA, idle: 50 µA }, default: idle }
  - { id: led, rail: hv, draw: { on: 80 mA } }
  - { id: adc, rail: ldo, draw: { on: 1 mA } }
modes: { idle: {}, busy: { cpu: run, adc: on }, flash: { cpu: run, led: on } }
profile:
  - { mode: busy, for: 1 h }
  - { mode: idle, for: 10 h }
  - { mode: flash, for: 10 s }
";

#[test]
fn efficiency_draws_one_panel_per_switching_stage() {
    let d = Design::from_text(THREE_CONVERTERS).expect("design");
    let r = traced(&d);
    let b = start_budget(&d);
    let svg = efficiency(&d, &b, Some(&r), PlotFormat::Svg, (1100, 800)).expect("SVG");
    keep("three-efficiency.svg", &svg);
    let t = svg_texts(&svg);
    assert_eq!(
        t.iter().filter(|x| x.as_str() == "efficiency (%)").count(),
        3
    );
    // The buck behind the switch sees the buck-boost's 3.3 V; `hv` sees the pack.
    assert!(has(&t, "`core` buck to 1.20 V, input 3.30 V"), "{t:?}");
    assert!(has(&t, "`bb` buck-boost to 3.30 V, input"), "{t:?}");
    assert!(has(&t, "table ends"), "{t:?}");
    let png = efficiency(&d, &b, Some(&r), PlotFormat::Png, (1100, 800)).expect("PNG");
    keep("three-efficiency.png", &png);
    let losses_png = losses(&d, &r, PlotFormat::Png, (1000, 680)).expect("PNG");
    keep("three-losses.png", &losses_png);
    let discharge_png = discharge(&d, &r, PlotFormat::Png, (1000, 680)).expect("PNG");
    keep("three-discharge.png", &discharge_png);
}

#[test]
fn compare_svg_labels_every_design() {
    let a = load("scanner-boost.yaml");
    let b = load("scanner-buck-boost.yaml");
    let (ra, rb) = (traced(&a), traced(&b));
    let entries = [("boost", &a, &ra), ("buck-boost", &b, &rb)];
    let svg = compare_discharge(&entries, PlotFormat::Svg, DEFAULT_SIZE).expect("compare SVG");
    keep("scanner-compare.svg", &svg);
    let t = svg_texts(&svg);
    for want in [
        "A: Barcode scanner, 3 x NiMH AA, boost to 3.3 V, runtime",
        "B: Barcode scanner, 3 x NiMH AA, buck-boost to 3.3 V, runtime",
        "lowest pack voltage (V)",
        "state of charge (%)",
        "cutoff 3.00 V (A, B)",
        ", cutoff",
    ] {
        assert!(has(&t, want), "no `{want}` in {t:?}");
    }
}

#[test]
fn compare_plot_names_designs_by_title_and_by_file_only_when_titles_repeat() {
    let a = load("scanner-boost.yaml");
    let b = load("scanner-buck-boost.yaml");
    let (ra, rb) = (traced(&a), traced(&b));
    let (pa, pb) = (
        "/some/long/directory/of/designs/scanner-boost.yaml",
        "/some/long/directory/of/designs/scanner-buck-boost.yaml",
    );
    // Different titles: the titles name the series; the paths appear nowhere.
    let svg = compare_discharge(
        &[(pa, &a, &ra), (pb, &b, &rb)],
        PlotFormat::Svg,
        DEFAULT_SIZE,
    )
    .expect("compare SVG");
    let t = svg_texts(&svg);
    assert!(has(&t, &format!("A: {}", a.title())), "{t:?}");
    assert!(has(&t, &format!("B: {}", b.title())), "{t:?}");
    assert!(!has(&t, "/some/long/directory"), "{t:?}");
    // The same title twice: letters and titles, and the legend says which file is which.
    let svg = compare_discharge(
        &[(pa, &a, &ra), ("copy.yaml", &a, &ra)],
        PlotFormat::Svg,
        (1400, 800),
    )
    .expect("compare SVG");
    keep("repeated-titles-compare.svg", &svg);
    let t = svg_texts(&svg);
    assert!(has(&t, &format!("A: {} ({pa})", a.title())), "{t:?}");
    assert!(has(&t, &format!("B: {} (copy.yaml)", a.title())), "{t:?}");
}

#[test]
fn time_axis_names_its_unit_once() {
    let d = load("coin-cell-tag.yaml");
    let r = traced(&d);
    let svg = discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("discharge SVG");
    let t = svg_texts(&svg);
    assert!(t.iter().any(|x| x == "time from start (d)"), "{t:?}");
    assert!(!has(&t, "days)"), "{t:?}");
}

#[test]
fn discharge_draws_pulse_minima_as_dots_and_the_voltage_as_a_band() {
    // The tag sleeps between radio bursts: its terminal voltage spends nearly all its time near
    // the open-circuit voltage. A line through the lowest points would suggest it sits low.
    let d = load("coin-cell-tag.yaml");
    let r = traced(&d);
    let svg = discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).expect("discharge SVG");
    keep("coin-band-discharge.svg", &svg);
    let t = svg_texts(&svg);
    assert!(has(&t, "terminal voltage, lowest to highest"), "{t:?}");
    assert!(has(&t, "lowest terminal voltage (pulses)"), "{t:?}");
    let s = String::from_utf8(svg).unwrap();
    // Plotters writes a filled circle as `<circle`, a filled polygon as `<polygon`.
    let dots = s.matches("<circle").count();
    assert!(dots >= 50, "{dots} dots for the pulse minima");
    assert!(s.contains("<polygon"), "no band");
    // No thick line: the old trace of minima was a polyline of width 3.
    assert!(
        !s.contains("stroke-width=\"3\""),
        "a thick line is still drawn"
    );
}

/// Whether a band `edge` pixels wide along every side of a picture is blank paper: text or a
/// line that reaches the edge has been cut off.
fn margins_blank(bytes: &[u8], edge: u32) -> Result<(), String> {
    let img = image::load_from_memory_with_format(bytes, image::ImageFormat::Png)
        .expect("PNG decodes")
        .to_rgb8();
    let (w, h) = img.dimensions();
    for (x, y, p) in img.enumerate_pixels() {
        let near = x < edge || y < edge || x >= w - edge || y >= h - edge;
        if near && p.0.iter().any(|c| *c < 235) {
            return Err(format!("ink at ({x}, {y}) of {w} x {h}"));
        }
    }
    Ok(())
}

#[test]
fn no_picture_is_clipped_at_its_edges() {
    // Found by looking: the wearable band's losses at 640 x 480 cut its longest bar's words
    // ("64.1 mWh (81.9 % of loss") at the right edge, and its legend touched the bottom.
    for path in example_files() {
        let name = path.file_stem().unwrap().to_string_lossy().to_string();
        let d = Design::from_file(&path).unwrap();
        let r = traced(&d);
        for size in [(640, 480), (1200, 800)] {
            let mut pictures = vec![
                ("discharge", discharge(&d, &r, PlotFormat::Png, size)),
                ("losses", losses(&d, &r, PlotFormat::Png, size)),
            ];
            if d.stages().iter().any(|s| s.kind().is_switching()) {
                let e = efficiency(&d, &start_budget(&d), Some(&r), PlotFormat::Png, size);
                pictures.push(("efficiency", e));
            }
            for (kind, bytes) in pictures {
                let bytes = bytes.unwrap();
                keep(&format!("{name}-{kind}-{}x{}.png", size.0, size.1), &bytes);
                if let Err(e) = margins_blank(&bytes, 3) {
                    panic!("{name} {kind} at {size:?}: {e}");
                }
            }
        }
    }
}

#[test]
fn every_example_draws_every_picture_as_png_of_the_asked_size() {
    for path in example_files() {
        let name = path.file_stem().unwrap().to_string_lossy().to_string();
        let d = Design::from_file(&path).unwrap();
        let r = traced(&d);
        let size = (900, 620);
        let mut pictures = vec![
            ("discharge", discharge(&d, &r, PlotFormat::Png, size)),
            ("losses", losses(&d, &r, PlotFormat::Png, size)),
        ];
        if d.stages().iter().any(|s| s.kind().is_switching()) {
            let e = efficiency(&d, &start_budget(&d), Some(&r), PlotFormat::Png, size);
            pictures.push(("efficiency", e));
        }
        for (kind, bytes) in pictures {
            let bytes = bytes.unwrap_or_else(|e| panic!("{name} {kind}: {e}"));
            keep(&format!("{name}-{kind}.png"), &bytes);
            let (dims, colours) = png_look(&bytes);
            assert_eq!(dims, size, "{name} {kind}");
            // White paper, ink, grid greys and at least three series colours, antialiased.
            assert!(colours > 20, "{name} {kind}: only {colours} colours");
        }
    }
}

#[test]
fn svg_of_every_example_parses() {
    for path in example_files() {
        let d = Design::from_file(&path).unwrap();
        let r = traced(&d);
        for bytes in [
            discharge(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).unwrap(),
            losses(&d, &r, PlotFormat::Svg, DEFAULT_SIZE).unwrap(),
        ] {
            let t = svg_texts(&bytes);
            assert!(!t.is_empty(), "{}", path.display());
        }
    }
}

#[test]
fn compare_png_is_not_blank() {
    let a = load("coin-cell-tag.yaml");
    let b = load("wearable-band.yaml");
    let c = load("field-logger.yaml");
    let (ra, rb, rc) = (traced(&a), traced(&b), traced(&c));
    let entries = [("tag", &a, &ra), ("band", &b, &rb), ("logger", &c, &rc)];
    let bytes = compare_discharge(&entries, PlotFormat::Png, (1200, 800)).expect("compare PNG");
    keep("three-compare.png", &bytes);
    let (dims, colours) = png_look(&bytes);
    assert_eq!(dims, (1200, 800));
    assert!(colours > 20);
    // Long titles wrap inside the picture, at any size.
    margins_blank(&bytes, 3).unwrap();
    let small = compare_discharge(&entries, PlotFormat::Png, (640, 480)).expect("compare PNG");
    keep("three-compare-640x480.png", &small);
    margins_blank(&small, 3).unwrap();
}

#[test]
fn html_report_is_self_contained() {
    let d = load("handheld-meter.yaml");
    let r = traced(&d);
    let b = start_budget(&d);
    let mut out = Vec::new();
    write_html(&mut out, &d, &b, d.pack().start_soc(), &r).expect("html");
    keep("meter-report.html", &out);
    let html = String::from_utf8(out).expect("UTF-8");
    assert!(html.starts_with("<!DOCTYPE html>"));
    assert!(html.contains(&joulepath::units::fmt_duration(r.end.t_s)));
    assert!(html.contains("the pack is empty"), "end sentence");
    assert!(html.contains("Caution:"));
    assert!(html.matches("<svg").count() >= 3, "three inline pictures");
    assert!(html.contains("@media print"));
    for (i, _) in html.match_indices("http") {
        let rest = &html[i..];
        assert!(
            rest.starts_with("http://www.w3.org/2000/svg"),
            "external reference at {}",
            &rest[..rest.len().min(60)]
        );
    }
    assert!(!html.contains("<script"));
    assert!(!html.contains("<link"));
    // Every mode's budget and the heat ranking.
    for m in d.modes() {
        assert!(
            html.contains(&format!("<h3>Mode <code>{}</code>", m.name())),
            "{}",
            m.name()
        );
    }
    assert!(html.contains("ldo-1v8"));
}

/// The soil probe's spread (200 units, seed 5, target 3 y), run once for all the tests here.
fn soil_spread() -> &'static (Design, Spread) {
    static SPREAD: std::sync::OnceLock<(Design, Spread)> = std::sync::OnceLock::new();
    SPREAD.get_or_init(|| {
        let d = load("soil-probe.yaml");
        let mut o = SpreadOptions::for_design(&d);
        o.samples = 200;
        o.seed = 5;
        o.target_s = Some(3.0 * 365.25 * 86_400.0);
        let s = spread(&d, &o).expect("the soil probe's spread");
        (d, s)
    })
}

/// Every `<text>` element of an SVG: its words and its anchor point (x, y).
fn svg_labels(bytes: &[u8]) -> Vec<(String, f64, f64)> {
    let text = std::str::from_utf8(bytes).expect("SVG is UTF-8");
    let doc =
        roxmltree::Document::parse(text).unwrap_or_else(|e| panic!("SVG does not parse: {e}"));
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| {
            let words: String = n
                .descendants()
                .filter(roxmltree::Node::is_text)
                .filter_map(|t| t.text())
                .collect();
            let x = n.attribute("x")?.parse().ok()?;
            let y = n.attribute("y")?.parse().ok()?;
            Some((words.trim().to_string(), x, y))
        })
        .collect()
}

/// The anchor of the one label whose words start with `start`.
fn place(labels: &[(String, f64, f64)], start: &str) -> (f64, f64) {
    let found: Vec<&(String, f64, f64)> =
        labels.iter().filter(|l| l.0.starts_with(start)).collect();
    assert_eq!(found.len(), 1, "labels starting `{start}`: {found:?}");
    (found[0].1, found[0].2)
}

#[test]
fn histogram_marks_the_percentiles_in_order_and_the_target_with_its_share() {
    use joulepath::units::{fmt_percent, fmt_sig};
    let (d, sp) = soil_spread();
    let svg = spread_histogram(d, sp, PlotFormat::Svg, DEFAULT_SIZE).expect("histogram SVG");
    keep("soil-histogram.svg", &svg);
    let labels = svg_labels(&svg);
    let t: Vec<String> = labels.iter().map(|l| l.0.clone()).collect();
    // The runtimes span about 1.5 to 10 years: the axis is in years.
    let year = 365.25 * 86_400.0;
    for want in [
        "runtime (y)".to_string(),
        "simulated units".into(),
        format!("stop at the cutoff: 200 ({})", fmt_percent(1.0)),
        "Every simulated unit gave a runtime.".into(),
        format!("P50 {} y", fmt_sig(sp.summary.p50 / year, 3)),
        format!(
            "target {} y: {} reach it",
            fmt_sig(3.0, 3),
            fmt_percent(sp.reach.expect("a target").share)
        ),
    ] {
        assert!(has(&t, &want), "no `{want}` in {t:?}");
    }
    let (p5, _) = place(&labels, "P5 ");
    let (p50, _) = place(&labels, "P50 ");
    let (p95, _) = place(&labels, "P95 ");
    assert!(p5 < p50 && p50 < p95, "P5 {p5}, P50 {p50}, P95 {p95}");
    // Each label stands over its value on the runtime axis: the axis's ticks (the numbers of
    // the lowest row of labels) give its scale.
    let numbers: Vec<(f64, f64, f64)> = labels
        .iter()
        .filter_map(|l| l.0.parse::<f64>().ok().map(|v| (v, l.1, l.2)))
        .collect();
    let bottom = numbers
        .iter()
        .map(|n| n.2)
        .fold(f64::NEG_INFINITY, f64::max);
    let ticks: Vec<(f64, f64)> = numbers
        .iter()
        .filter(|n| (n.2 - bottom).abs() < 1.0)
        .map(|n| (n.0, n.1))
        .collect();
    assert!(ticks.len() >= 3, "runtime ticks {ticks:?} in {t:?}");
    let (first, last) = (ticks[0], ticks[ticks.len() - 1]);
    assert_eq!(
        tick_words(first.0),
        tick_words(first.0.round()),
        "{ticks:?}"
    );
    for (x, at) in [
        (p50, sp.summary.p50),
        (p95, sp.summary.p95),
        (place(&labels, "target ").0, 3.0 * year),
    ] {
        let v = at / year;
        let want = first.1 + (last.1 - first.1) * (v - first.0) / (last.0 - first.0);
        assert!(
            (x - want).abs() < 3.0,
            "label at {x}, value {v} y at {want}"
        );
    }
    // Several bins of units that stopped at the cutoff (blue), besides the legend's block.
    let s = String::from_utf8(svg).unwrap();
    let bars = s.matches("fill=\"#0072B2\"").count();
    assert!(bars >= 5, "{bars} bars");
}

/// A whole-number tick as the pictures write it.
fn tick_words(v: f64) -> String {
    format!("{v:.0}")
}

#[test]
fn histogram_states_failed_runs_and_colours_each_end_reason() {
    let (d, sp) = soil_spread();
    let mut sp = sp.clone();
    // Three runs that gave no result (as a run stopped by its work limit does), and some units
    // that ended another way.
    for o in &mut sp.samples[..3] {
        o.runtime = Err(RunError::WorkLimit {
            limit: 10,
            t_s: 3600.0,
        });
        o.end = None;
    }
    for o in &mut sp.samples[3..23] {
        o.end = Some(joulepath::solve::EndReason::Empty);
    }
    sp.failed = 3;
    sp.ends = vec![
        (joulepath::solve::EndReason::Cutoff, 177),
        (joulepath::solve::EndReason::Empty, 20),
    ];
    let svg = spread_histogram(d, &sp, PlotFormat::Svg, DEFAULT_SIZE).expect("histogram SVG");
    keep("soil-histogram-failed.svg", &svg);
    let png = spread_histogram(d, &sp, PlotFormat::Png, (900, 600)).expect("histogram PNG");
    keep("soil-histogram-failed.png", &png);
    let t = svg_texts(&svg);
    assert!(
        has(&t, "3 of the 200 runs gave no runtime"),
        "no failed runs in {t:?}"
    );
    assert!(has(&t, "stop at the cutoff: 177"), "{t:?}");
    assert!(has(&t, "run empty: 20"), "{t:?}");
    let s = String::from_utf8(svg).unwrap();
    // Green (0, 158, 115) for the units that ran empty.
    assert!(
        s.contains("fill=\"#009E73\""),
        "no bar of the second reason"
    );
    // No runtime at all: nothing to draw, said plainly.
    for o in &mut sp.samples {
        o.runtime = Err(RunError::WorkLimit {
            limit: 10,
            t_s: 3600.0,
        });
    }
    assert!(matches!(
        spread_histogram(d, &sp, PlotFormat::Svg, DEFAULT_SIZE),
        Err(PlotError::Nothing(_))
    ));
}

#[test]
fn tornado_has_one_bar_per_tolerance_in_swing_order() {
    use joulepath::report::spread::fmt_value;
    let (d, sp) = soil_spread();
    let svg = spread_tornado(d, sp, PlotFormat::Svg, DEFAULT_SIZE).expect("tornado SVG");
    keep("soil-tornado.svg", &svg);
    let labels = svg_labels(&svg);
    let t: Vec<String> = labels.iter().map(|l| l.0.clone()).collect();
    assert_eq!(sp.swings.len(), d.tolerances().len());
    // Largest swing first: the reporting interval, on top.
    assert_eq!(sp.swings[0].path, "profile[0].repeat[3].for");
    let mut last_y = f64::NEG_INFINITY;
    for x in &sp.swings {
        let rows: Vec<_> = labels.iter().filter(|l| l.0 == x.path).collect();
        assert_eq!(rows.len(), 1, "`{}` labels: {rows:?}", x.path);
        assert!(rows[0].2 > last_y, "`{}` out of swing order", x.path);
        last_y = rows[0].2;
        let k = &sp.tolerances[x.tolerance].knob();
        let bounds = format!(
            "low {} · high {}",
            fmt_value(d, k, x.bounds.0),
            fmt_value(d, k, x.bounds.1)
        );
        assert!(has(&t, &bounds), "no `{bounds}` in {t:?}");
    }
    assert!(has(&t, "low 2.00 min · high 10.0 min"), "{t:?}");
    let year = 365.25 * 86_400.0;
    let nominal = sp.nominal.runtime.as_ref().expect("the design runs");
    let designed = format!(
        "as designed: {} y",
        joulepath::units::fmt_sig(nominal / year, 3)
    );
    assert!(has(&t, &designed), "no `{designed}` in {t:?}");
    assert!(has(&t, "runtime (y)"), "{t:?}");
    // Each bar is a part toward each bound's runtime: blue (low) and orange (high), one for
    // each bound that moves the runtime (plus one of each in the legend). The microcontroller's
    // sleep current and the regulator's quiescent current are as designed at their low bound.
    let s = String::from_utf8(svg).unwrap();
    let nominal = sp.nominal.runtime.clone().unwrap();
    let moved = |at: fn(&joulepath::spread::Swing) -> &joulepath::spread::Outcome| {
        sp.swings
            .iter()
            .filter(|x| (at(x).runtime.clone().unwrap() - nominal).abs() > 0.0)
            .count()
            + 1
    };
    let (low, high) = (moved(|x| &x.at.0), moved(|x| &x.at.1));
    assert_eq!((low, high), (5, 7), "bounds that move the runtime");
    assert_eq!(s.matches("fill=\"#0072B2\"").count(), low, "low parts");
    assert_eq!(s.matches("fill=\"#E69F00\"").count(), high, "high parts");
    assert!(!has(&t, "no result"), "{t:?}");
}

#[test]
fn tornado_names_a_bound_whose_run_failed() {
    let (d, sp) = soil_spread();
    let mut sp = sp.clone();
    sp.swings[1].at.0.runtime = Err(RunError::WorkLimit {
        limit: 10,
        t_s: 3600.0,
    });
    let svg = spread_tornado(d, &sp, PlotFormat::Svg, DEFAULT_SIZE).expect("tornado SVG");
    keep("soil-tornado-failed.svg", &svg);
    let png = spread_tornado(d, &sp, PlotFormat::Png, (900, 600)).expect("tornado PNG");
    keep("soil-tornado-failed.png", &png);
    let t = svg_texts(&svg);
    assert!(has(&t, "no result at the low bound"), "{t:?}");
    assert!(has(&t, "run gave no result"), "legend: {t:?}");
}

#[test]
fn spread_pictures_as_png_fill_their_size_and_stay_inside_it() {
    let (d, sp) = soil_spread();
    for size in [(640, 480), (1200, 800)] {
        for (kind, bytes) in [
            ("histogram", spread_histogram(d, sp, PlotFormat::Png, size)),
            ("tornado", spread_tornado(d, sp, PlotFormat::Png, size)),
        ] {
            let bytes = bytes.unwrap_or_else(|e| panic!("{kind}: {e}"));
            keep(&format!("soil-{kind}-{}x{}.png", size.0, size.1), &bytes);
            let (dims, colours) = png_look(&bytes);
            assert_eq!(dims, size, "{kind}");
            assert!(colours > 20, "{kind}: only {colours} colours");
            if let Err(e) = margins_blank(&bytes, 3) {
                panic!("{kind} at {size:?}: {e}");
            }
        }
    }
    assert!(matches!(
        spread_tornado(d, sp, PlotFormat::Png, (100, 100)),
        Err(PlotError::Size(100, 100))
    ));
}

#[test]
fn html_report_has_a_spread_section_only_with_a_spread() {
    let (d, sp) = soil_spread();
    let r = traced(d);
    let b = start_budget(d);
    let mut with = Vec::new();
    write_html_with_spread(&mut with, d, &b, d.pack().start_soc(), &r, Some(Ok(sp))).expect("html");
    keep("soil-report.html", &with);
    let html = String::from_utf8(with).expect("UTF-8");
    assert!(html.contains("<section id=\"spread\">"));
    assert!(html.contains("href=\"#spread\""));
    assert!(html.contains("aria-label=\"runtime histogram\""));
    assert!(html.contains("aria-label=\"tornado chart\""));
    assert!(html.contains("<code>profile[0].repeat[3].for</code>"));
    assert!(html.contains(&joulepath::units::fmt_duration(sp.summary.p50)));
    let mut without = Vec::new();
    write_html(&mut without, d, &b, d.pack().start_soc(), &r).expect("html");
    let plain = String::from_utf8(without).expect("UTF-8");
    assert!(!plain.contains("id=\"spread\"") && !plain.contains("#spread"));
    // The spread adds its section and changes nothing else: the rest of the page is the same.
    assert_eq!(
        plain.matches("<svg").count() + 2,
        html.matches("<svg").count()
    );
    let mut failed = Vec::new();
    write_html_with_spread(
        &mut failed,
        d,
        &b,
        d.pack().start_soc(),
        &r,
        Some(Err("the ambient cannot be fixed")),
    )
    .expect("html");
    let failed = String::from_utf8(failed).expect("UTF-8");
    assert!(failed.contains("did not run: the ambient cannot be fixed"));
}
