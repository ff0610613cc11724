//! The HTML report: one self-contained page (inline CSS and SVG, no script, no external link)
//! with the runtime, the pictures, the heat ranking, the violations, every mode's budget, the
//! tree and the caution; it prints cleanly (light background, a page per section).

use std::fmt::Write as _;
use std::io::{self, Write};

use super::heat::{capitalize, heat_ranking, heat_sentence};
use super::outline::write_outline;
use super::plot::{self, PlotFormat};
use super::runtime::{end_sentence, energy_sentences};
use super::spread::{fmt_value, run_text, spread_sentence};
use super::{caution_for, warnings};
use crate::model::Design;
use crate::solve::{ModeBudget, OperatingPoint, RunResult, Solution, junction_c};
use crate::spread::Spread;
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// Size of the inline pictures, pixels (they scale with the page).
const PICTURE: (u32, u32) = (960, 640);

/// The page's style: light colours, tabular figures, and page breaks before sections on paper.
const STYLE: &str = r#"
:root { color-scheme: light; }
body { font-family: system-ui, "Segoe UI", "DejaVu Sans", Arial, sans-serif; color: #1b1b1b;
  background: #ffffff; max-width: 64rem; margin: 1.5rem auto 3rem; padding: 0 1.2rem;
  line-height: 1.45; }
h1 { font-size: 1.55rem; margin: 0 0 .3rem; }
h2 { font-size: 1.25rem; margin: 2.4rem 0 .6rem; padding-bottom: .25rem;
  border-bottom: 3px solid #0072b2; }
h3 { font-size: 1.05rem; margin: 1.6rem 0 .3rem; }
.meta { color: #555; margin: 0 0 1rem; }
.lead { font-size: 1.1rem; }
.big { font-size: 2.1rem; font-weight: 650; margin: .2rem 0; }
nav ol { margin: .4rem 0; padding-left: 1.4rem; columns: 2; }
table { border-collapse: collapse; margin: .5rem 0 1rem; font-variant-numeric: tabular-nums; }
th, td { padding: .22rem .65rem; border-bottom: 1px solid #d8d8d8; text-align: left;
  vertical-align: top; }
th { background: #eef3f7; font-weight: 600; }
td.n, th.n { text-align: right; white-space: nowrap; }
code { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: .92em; }
pre { background: #f5f7f9; border-left: 4px solid #56b4e9; padding: .8rem 1rem;
  overflow-x: auto; font-size: .84rem; line-height: 1.35; }
figure { margin: 1.2rem 0; }
figure svg { max-width: 100%; height: auto; border: 1px solid #e2e2e2; }
figcaption { color: #555; font-size: .9rem; margin-top: .3rem; }
.alert { border-left: 4px solid #d55e00; padding: .3rem .8rem; background: #fdf3ec; }
.note { color: #555; font-style: italic; }
.caution { border: 1px solid #888; border-left: 6px solid #e69f00; padding: .7rem 1rem;
  background: #fffaf0; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; background: #fff; }
  nav { display: none; }
  section { break-before: page; }
  section.first { break-before: auto; }
  h2, h3 { break-after: avoid; }
  table, figure, pre, .caution { break-inside: avoid; }
  th { background: #fff; border-bottom: 2px solid #000; }
  pre, .alert, .caution { background: #fff; }
  figure svg { border: none; }
}
"#;

/// Escape text for HTML.
fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Escape text and turn `id` spans into code.
fn prose(s: &str) -> String {
    let mut out = String::new();
    for (i, part) in s.split('`').enumerate() {
        if i % 2 == 1 {
            let _ = write!(out, "<code>{}</code>", esc(part));
        } else {
            out.push_str(&esc(part));
        }
    }
    out
}

/// A table: header cells (a leading `#` marks a numeric column) and rows of escaped HTML.
fn table(w: &mut dyn Write, head: &[&str], rows: &[Vec<String>]) -> io::Result<()> {
    let numeric: Vec<bool> = head.iter().map(|h| h.starts_with('#')).collect();
    writeln!(w, "<table>")?;
    write!(w, "<thead><tr>")?;
    for h in head {
        let (class, name) = match h.strip_prefix('#') {
            Some(n) => (" class=\"n\"", n),
            None => ("", *h),
        };
        write!(w, "<th{class}>{}</th>", esc(name))?;
    }
    writeln!(w, "</tr></thead><tbody>")?;
    for row in rows {
        write!(w, "<tr>")?;
        for (cell, n) in row.iter().zip(&numeric) {
            let class = if *n { " class=\"n\"" } else { "" };
            write!(w, "<td{class}>{cell}</td>")?;
        }
        writeln!(w, "</tr>")?;
    }
    writeln!(w, "</tbody></table>")
}

/// A picture inline, or a note saying why there is none.
fn figure(
    w: &mut dyn Write,
    drawn: Result<Vec<u8>, plot::PlotError>,
    what: &str,
    caption: &str,
) -> io::Result<()> {
    match drawn {
        Ok(bytes) => {
            let svg = String::from_utf8_lossy(&bytes);
            let body = svg.find("<svg").map_or(&svg[..], |i| &svg[i..]);
            let body = body.replacen(
                "<svg",
                &format!("<svg role=\"img\" aria-label=\"{}\"", esc(what)),
                1,
            );
            writeln!(
                w,
                "<figure>\n{body}\n<figcaption>{}</figcaption></figure>",
                prose(caption)
            )
        }
        Err(e) => writeln!(
            w,
            "<p class=\"note\">No {} picture: {}.</p>",
            esc(what),
            esc(&e.to_string())
        ),
    }
}

/// Write the report of `design`: the run `run`, the budget `modes` at state of charge `soc`.
///
/// # Errors
///
/// Those of the writer.
pub fn write_html(
    w: &mut dyn Write,
    design: &Design,
    modes: &[ModeBudget],
    soc: f64,
    run: &RunResult,
) -> io::Result<()> {
    write_html_with_spread(w, design, modes, soc, run, None)
}

/// [`write_html`] with a section on the spread across units after the pictures: `Some(Ok)` the
/// spread of the design's tolerances (its table, histogram and tornado chart), `Some(Err)` why
/// it could not run (said in its place), `None` no section (a design without tolerances).
///
/// # Errors
///
/// Those of the writer.
pub fn write_html_with_spread(
    w: &mut dyn Write,
    design: &Design,
    modes: &[ModeBudget],
    soc: f64,
    run: &RunResult,
    spread: Option<Result<&Spread, &str>>,
) -> io::Result<()> {
    let (d, r) = (design, run);
    write_head(w, d, r, spread.is_some())?;
    runtime_section(w, d, r)?;
    pictures_section(w, d, modes, r)?;
    match spread {
        Some(Ok(sp)) => spread_section(w, d, sp)?,
        Some(Err(why)) => writeln!(
            w,
            "<section id=\"spread\">\n<h2>Spread across units</h2>\n<p class=\"note\">The spread over the design's tolerances did not run: {}.</p>\n</section>",
            prose(why)
        )?,
        None => {}
    }
    heat_section(w, d, r)?;
    violations_section(w, d, r)?;
    budget_section(w, d, modes, soc)?;
    tree_and_caution(w, d, r)?;
    writeln!(w, "</body>\n</html>")
}

/// The page's head and its header: title, the pack in a line, and the contents (with the
/// spread when `with_spread`).
fn write_head(w: &mut dyn Write, d: &Design, r: &RunResult, with_spread: bool) -> io::Result<()> {
    writeln!(
        w,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">"
    )?;
    writeln!(
        w,
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
    )?;
    writeln!(w, "<title>{} — joulepath report</title>", esc(&d.title))?;
    writeln!(w, "<style>{STYLE}</style>\n</head>\n<body>")?;
    writeln!(w, "<header>\n<h1>{}</h1>", esc(&d.title))?;
    let p = &d.pack;
    writeln!(
        w,
        "<p class=\"meta\">{} in series × {} in parallel of <code>{}</code> ({}), cutoff {}, {} ambient. Report by joulepath {}.</p>",
        p.series,
        p.parallel,
        esc(&p.cell.name),
        esc(p.cell.chemistry.name()),
        esc(&fmt_eng(p.cutoff_v(), "V")),
        esc(&fmt_celsius(r.ambient_c)),
        env!("CARGO_PKG_VERSION")
    )?;
    let spread_link = if with_spread {
        "<li><a href=\"#spread\">Spread</a></li>"
    } else {
        ""
    };
    writeln!(
        w,
        "<nav><ol><li><a href=\"#runtime\">Runtime</a></li><li><a href=\"#pictures\">Pictures</a></li>{spread_link}<li><a href=\"#heat\">Heat</a></li><li><a href=\"#violations\">Violations</a></li><li><a href=\"#budget\">Budget</a></li><li><a href=\"#tree\">Power tree</a></li><li><a href=\"#caution\">Caution</a></li></ol></nav>\n</header>"
    )?;

    Ok(())
}

/// The pictures: the discharge, the losses and, when a stage switches, the efficiency.
fn pictures_section(
    w: &mut dyn Write,
    d: &Design,
    modes: &[ModeBudget],
    r: &RunResult,
) -> io::Result<()> {
    writeln!(w, "<section id=\"pictures\">\n<h2>Pictures</h2>")?;
    figure(
        w,
        plot::discharge(d, r, PlotFormat::Svg, PICTURE),
        "discharge",
        "Pack voltage and state of charge over the run; the lowest voltage of each stretch shows the pulses' sag.",
    )?;
    figure(
        w,
        plot::losses(d, r, PlotFormat::Svg, PICTURE),
        "losses",
        "Energy lost in each stage and in the pack over the run; the split by mode is estimated from each mode's time share.",
    )?;
    if d.stages.iter().any(|s| s.kind.is_switching()) {
        figure(
            w,
            plot::efficiency(d, modes, Some(r), PlotFormat::Svg, PICTURE),
            "efficiency",
            "Each switching stage's efficiency against output current, with each mode's operating point from the budget below.",
        )?;
    }
    writeln!(w, "</section>")?;
    Ok(())
}

/// The power tree as `check` prints it, then the warnings and the caution.
fn tree_and_caution(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let mut outline = Vec::new();
    write_outline(&mut outline, d)?;
    writeln!(
        w,
        "<section id=\"tree\">\n<h2>Power tree</h2>\n<pre>{}</pre>\n</section>",
        esc(&String::from_utf8_lossy(&outline))
    )?;
    writeln!(
        w,
        "<section id=\"caution\" class=\"first\">\n<h2>Caution</h2>"
    )?;
    for warning in warnings(d, r.ambient_c) {
        writeln!(w, "<p class=\"alert\">Warning: {}</p>", esc(&warning))?;
    }
    writeln!(
        w,
        "<p class=\"caution\">{}</p>\n</section>",
        esc(&caution_for([d]))
    )?;
    Ok(())
}

fn runtime_section(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let t = r.runtime_s();
    writeln!(
        w,
        "<section id=\"runtime\" class=\"first\">\n<h2>Runtime</h2>"
    )?;
    writeln!(w, "<p class=\"big\">{}</p>", esc(&fmt_duration(t)))?;
    writeln!(
        w,
        "<p class=\"lead\">It stops because {}.</p>",
        prose(&end_sentence(d, r))
    )?;
    if let Some(ideal) = r.ideal_runtime_s() {
        writeln!(
            w,
            "<p>Ideal runtime {} (the stored energy at the loads' mean power): {} of the stored energy reached the loads.</p>",
            esc(&fmt_duration(ideal)),
            esc(&fmt_percent(t / ideal))
        )?;
    }
    let l = &r.ledger;
    for sentence in energy_sentences(d, r) {
        writeln!(w, "<p>{}.</p>", prose(&capitalize(&sentence)))?;
    }
    if !d.loads.is_empty() {
        let total = l.load_energy_total();
        let rows: Vec<Vec<String>> = d
            .loads
            .iter()
            .enumerate()
            .map(|(k, load)| {
                let e = l.load_energy_j()[k];
                vec![
                    format!("<code>{}</code>", esc(&load.id)),
                    esc(&fmt_eng(e / 3600.0, "Wh")),
                    if total > 0.0 {
                        esc(&fmt_percent(e / total))
                    } else {
                        "—".into()
                    },
                    esc(&fmt_eng(if t > 0.0 { e / t } else { 0.0 }, "W")),
                ]
            })
            .collect();
        writeln!(w, "<h3>Energy to each load</h3>")?;
        table(w, &["load", "#energy", "#share", "#average power"], &rows)?;
    }
    writeln!(w, "</section>")
}

fn heat_section(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let rows = heat_ranking(d, r);
    writeln!(w, "<section id=\"heat\">\n<h2>Heat</h2>")?;
    writeln!(
        w,
        "<p>{}.</p>",
        prose(&capitalise(&heat_sentence(d, r, &rows)))
    )?;
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|h| {
            vec![
                format!("<code>{}</code>", esc(&h.id)),
                esc(&h.kind),
                esc(&fmt_eng(h.loss_wh, "Wh")),
                esc(&fmt_percent(h.share_of_losses)),
                h.peak_loss_w
                    .map_or_else(|| "—".into(), |x| esc(&fmt_eng(x, "W"))),
                h.peak_mode
                    .as_deref()
                    .map_or_else(|| "—".into(), |m| format!("<code>{}</code>", esc(m))),
                h.max_junction_c
                    .map_or_else(|| "—".into(), |c| esc(&fmt_celsius(c))),
            ]
        })
        .collect();
    table(
        w,
        &[
            "where",
            "kind",
            "#energy lost",
            "#share of losses",
            "#peak loss",
            "peak in mode",
            "#Tj max",
        ],
        &cells,
    )?;
    writeln!(w, "</section>")
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    c.next()
        .map_or_else(String::new, |f| f.to_uppercase().chain(c).collect())
}

fn violations_section(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    writeln!(w, "<section id=\"violations\">\n<h2>Violations</h2>")?;
    if r.violations.is_empty() {
        writeln!(w, "<p>None: no limit was exceeded during the run.</p>")?;
    } else {
        let rows: Vec<Vec<String>> = r
            .violations
            .iter()
            .map(|v| {
                vec![
                    esc(v.kind.name()),
                    format!("<code>{}</code>", esc(&v.subject)),
                    format!("<code>{}</code>", esc(&v.mode)),
                    v.t_s.map_or_else(|| "—".into(), |t| esc(&fmt_duration(t))),
                    prose(&super::violation_detail(d, v)),
                ]
            })
            .collect();
        writeln!(
            w,
            "<p class=\"alert\">{} limit(s) exceeded; each is listed when it first happened. They do not stop the run.</p>",
            rows.len()
        )?;
        table(
            w,
            &["kind", "subject", "mode", "#first at", "detail"],
            &rows,
        )?;
    }
    writeln!(w, "</section>")
}

/// The stages at operating point `p`, one row of cells each.
fn budget_stage_rows(d: &Design, p: &OperatingPoint) -> Vec<Vec<String>> {
    d.stages
        .iter()
        .zip(&p.stages)
        .enumerate()
        .map(|(k, (s, sp))| {
            vec![
                format!("<code>{}</code>", esc(&s.id)),
                esc(s.kind_name()),
                esc(sp.state.name()),
                esc(&fmt_eng(sp.vin, "V")),
                esc(&fmt_eng(sp.iin, "A")),
                esc(&fmt_eng(sp.vout, "V")),
                esc(&fmt_eng(sp.iout, "A")),
                esc(&fmt_eng(sp.loss, "W")),
                sp.efficiency()
                    .map_or_else(|| "—".into(), |e| esc(&fmt_percent(e))),
                junction_c(d, k, sp.loss, d.ambient_c)
                    .map_or_else(|| "—".into(), |c| esc(&fmt_celsius(c))),
            ]
        })
        .collect()
}

/// The loads at operating point `p`, one row of cells each.
fn budget_load_rows(d: &Design, p: &OperatingPoint) -> Vec<Vec<String>> {
    d.loads
        .iter()
        .zip(&p.loads)
        .map(|(l, lp)| {
            vec![
                format!("<code>{}</code>", esc(&l.id)),
                format!("<code>{}</code>", esc(d.rail_name(l.rail))),
                esc(l.state_name(lp.state)),
                esc(&fmt_eng(lp.voltage, "V")),
                esc(&fmt_eng(lp.current, "A")),
                esc(&fmt_eng(lp.power, "W")),
                if lp.live {
                    String::new()
                } else {
                    "rail off".into()
                },
            ]
        })
        .collect()
}

fn budget_section(w: &mut dyn Write, d: &Design, modes: &[ModeBudget], soc: f64) -> io::Result<()> {
    writeln!(w, "<section id=\"budget\">\n<h2>Budget</h2>")?;
    writeln!(
        w,
        "<p>The steady operating point of each mode at {} state of charge, {} ambient, polarization settled.</p>",
        esc(&fmt_percent(soc)),
        esc(&fmt_celsius(d.ambient_c))
    )?;
    for m in modes {
        writeln!(
            w,
            "<h3>Mode <code>{}</code></h3>",
            esc(&d.modes[m.mode].name)
        )?;
        let p = match &m.solution {
            Solution::Collapse { ocv, resistance } => {
                writeln!(
                    w,
                    "<p class=\"alert\">Collapse: the pack (open circuit {}, {} inside) cannot give the power this mode demands at any voltage; at most {} is available.</p>",
                    esc(&fmt_eng(*ocv, "V")),
                    esc(&fmt_eng(*resistance, "Ω")),
                    esc(&fmt_eng(ocv * ocv / (4.0 * resistance), "W"))
                )?;
                continue;
            }
            Solution::Point(p) => p,
        };
        writeln!(
            w,
            "<p>Pack: {} at {} (open circuit {}), {} out, {} lost inside.</p>",
            esc(&fmt_eng(p.pack.current, "A")),
            esc(&fmt_eng(p.pack.voltage, "V")),
            esc(&fmt_eng(p.pack.ocv, "V")),
            esc(&fmt_eng(p.pack.power(), "W")),
            esc(&fmt_eng(p.pack.loss, "W"))
        )?;
        if !d.stages.is_empty() {
            let rows = budget_stage_rows(d, p);
            table(
                w,
                &[
                    "stage",
                    "kind",
                    "state",
                    "#Vin",
                    "#Iin",
                    "#Vout",
                    "#Iout",
                    "#loss",
                    "#efficiency",
                    "#Tj",
                ],
                &rows,
            )?;
        }
        if !d.loads.is_empty() {
            let rows = budget_load_rows(d, p);
            table(
                w,
                &["load", "rail", "state", "#V", "#I", "#P", "note"],
                &rows,
            )?;
        }
        for v in &m.violations {
            writeln!(
                w,
                "<p class=\"alert\">{}: {}</p>",
                esc(v.kind.name()),
                prose(&super::violation_detail(d, v))
            )?;
        }
    }
    writeln!(w, "</section>")
}

/// A duration without its second unit (`2.63 y` of `2.63 y (961 d)`), so that the eight
/// columns of the swing table fit the page.
fn short(duration: &str) -> &str {
    duration.split(" (").next().unwrap_or(duration)
}

/// The spread across units: the answer in a sentence, the runtime percentiles, the share
/// reaching the target, why units stop, what moves the runtime, and the two pictures.
fn spread_section(w: &mut dyn Write, d: &Design, sp: &Spread) -> io::Result<()> {
    let n = sp.samples.len();
    writeln!(w, "<section id=\"spread\">\n<h2>Spread across units</h2>")?;
    writeln!(
        w,
        "<p class=\"lead\">{}.</p>",
        prose(&capitalise(&spread_sentence(sp)))
    )?;
    spread_runtimes(w, sp)?;
    figure(
        w,
        plot::spread_histogram(d, sp, PlotFormat::Svg, PICTURE),
        "runtime histogram",
        "Runtimes of the simulated units, stacked by why each stops, with the 5th, 50th and 95th percentiles and the target.",
    )?;
    writeln!(
        w,
        "<h3>What moves the runtime</h3>\n<p>Each value at its low and at its high bound, the others as designed; largest swing first.</p>"
    )?;
    swing_table(w, d, sp)?;
    figure(
        w,
        plot::spread_tornado(d, sp, PlotFormat::Svg, PICTURE),
        "tornado chart",
        "Runtime with each varied value at its low and at its high bound, around the runtime as designed.",
    )?;
    writeln!(
        w,
        "<p class=\"note\">{n} simulated units, seed {}, {} values varied; each unit draws every value from its spread and runs the whole discharge.</p>",
        sp.options.seed,
        sp.tolerances.len()
    )?;
    writeln!(w, "</section>")
}

/// The spread's runtime percentiles and the run as designed, the share reaching the target,
/// and why units stop.
fn spread_runtimes(w: &mut dyn Write, sp: &Spread) -> io::Result<()> {
    let n = sp.samples.len();
    let s = &sp.summary;
    let (nominal_t, nominal_end) = run_text(&sp.nominal);
    let mut rows: Vec<Vec<String>> = s
        .named()
        .iter()
        .map(|(name, v)| vec![esc(name), esc(&fmt_duration(*v))])
        .collect();
    rows.push(vec![
        "as designed".into(),
        format!("{}, ends: {}", esc(&nominal_t), esc(&nominal_end)),
    ]);
    table(w, &["runtime", "#"], &rows)?;
    if let Some(r) = sp.reach {
        writeln!(
            w,
            "<p>Units reaching {}: <strong>{}</strong> (sampling standard error {}).</p>",
            esc(&fmt_duration(r.target_s)),
            esc(&fmt_percent(r.share)),
            esc(&fmt_percent(r.std_err))
        )?;
    }
    let ends: Vec<String> = sp
        .ends
        .iter()
        .map(|(e, c)| format!("{} {c} ({})", e.name(), fmt_percent(*c as f64 / n as f64)))
        .collect();
    let mut why = format!("Why units stop: {}", ends.join(", "));
    if sp.failed > 0 {
        let _ = write!(why, "; {} runs gave no result", sp.failed);
    }
    writeln!(w, "<p>{}.</p>", esc(&why))?;
    Ok(())
}

/// One row per varied value: its value as designed and at its bounds, the runtime at each
/// bound, the swing and the rank correlation.
fn swing_table(w: &mut dyn Write, d: &Design, sp: &Spread) -> io::Result<()> {
    let swing_rows: Vec<Vec<String>> = sp
        .swings
        .iter()
        .map(|x| {
            let k = &sp.tolerances[x.tolerance].knob;
            let delta = x.delta_s();
            vec![
                format!("<code>{}</code>", esc(&x.path)),
                esc(&fmt_value(d, k, x.nominal)),
                esc(&fmt_value(d, k, x.bounds.0)),
                esc(&fmt_value(d, k, x.bounds.1)),
                esc(short(&run_text(&x.at.0).0)),
                esc(short(&run_text(&x.at.1).0)),
                if delta.is_finite() {
                    esc(&format!(
                        "{}{}",
                        if delta < 0.0 { "-" } else { "+" },
                        short(&fmt_duration(delta.abs()))
                    ))
                } else {
                    "—".into()
                },
                x.rank_correlation
                    .map_or_else(|| "—".into(), |r| format!("{r:+.2}")),
            ]
        })
        .collect();
    table(
        w,
        &[
            "value",
            "#as designed",
            "#low",
            "#high",
            "#runtime at low",
            "#at high",
            "#swing",
            "#rank corr.",
        ],
        &swing_rows,
    )
}
