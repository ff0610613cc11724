//! Using joulepath as a library: run a bundled design, then its spread across units.
//!
//! `cargo run --release --example library`

use joulepath::spread::{SpreadOptions, spread};
use joulepath::units::fmt_duration;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let root = env!("CARGO_MANIFEST_DIR");
    let text = std::fs::read_to_string(format!("{root}/examples/soil-probe.yaml"))?;

    // One unit, as designed.
    let run = joulepath::run_text(&text)?;
    println!(
        "{}: runs {}, ends by {}",
        run.design.title(),
        fmt_duration(run.result.runtime_s()),
        run.result.end.reason.name()
    );

    // Many units, from the file's `tolerances:`.
    let mut options = SpreadOptions::for_design(&run.design);
    options.samples = 200;
    options.target_s = Some(3.0 * joulepath::solve::YEAR_S);
    let s = spread(&run.design, &options)?;
    println!(
        "P5 {}, median {}, P95 {}",
        fmt_duration(s.summary.p5),
        fmt_duration(s.summary.p50),
        fmt_duration(s.summary.p95)
    );
    if let Some(reach) = s.reach {
        println!("{:.1} % of units reach 3 years", 100.0 * reach.share);
    }
    if let Some(top) = s.swings.first() {
        println!("moves it most: {}", top.path);
    }
    Ok(())
}
