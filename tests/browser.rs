//! The HTML report in a real headless browser (Debian's chromium): it loads from a local file
//! with no network, shows the runtime and the end reason, and renders a screenshot.
//!
//! On a machine without chromium the test says so and passes, so that `cargo test` works on a
//! fresh machine; CI installs chromium and sets `JOULEPATH_REQUIRE_BROWSER=1`, which makes a
//! missing browser a failure.

use std::path::PathBuf;
use std::process::Command;

use crate::util::{Test, root};

fn chromium() -> Option<PathBuf> {
    let candidates = [
        std::env::var("CHROMIUM").ok(),
        Some("/usr/bin/chromium".into()),
        Some("/usr/bin/chromium-browser".into()),
    ];
    candidates
        .into_iter()
        .flatten()
        .map(PathBuf::from)
        .find(|p| p.is_file())
}

fn headless(
    browser: &PathBuf,
    profile: &std::path::Path,
    extra: &[String],
    page: &str,
) -> std::process::Output {
    Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(extra)
        .arg(page)
        .output()
        .expect("run chromium")
}

#[test]
fn report_loads_in_a_headless_browser() {
    let Some(browser) = chromium() else {
        assert!(
            std::env::var_os("JOULEPATH_REQUIRE_BROWSER").is_none(),
            "JOULEPATH_REQUIRE_BROWSER is set but no chromium was found"
        );
        eprintln!(
            "note: chromium not found; the headless-browser check of the HTML report did not run"
        );
        return;
    };
    let text = std::fs::read_to_string(root().join("examples/scanner-boost.yaml")).unwrap();
    let t = Test::new()
        .design(&text)
        .args(&["report", "{file}", "-o", "report.html"]);
    t.expect_code(0);
    let json = Test::new()
        .design(&text)
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let runtime = joulepath::units::fmt_duration(json["runtime_s"].as_f64().unwrap());
    let page = format!("file://{}", t.dir().join("report.html").display());
    let profile = t.dir().join("browser-profile");

    // The page as the browser built it: the text holds the runtime and the end reason.
    let dom = headless(&browser, &profile, &["--dump-dom".into()], &page);
    assert!(
        dom.status.success(),
        "chromium failed: {}",
        String::from_utf8_lossy(&dom.stderr)
    );
    let html = String::from_utf8_lossy(&dom.stdout);
    assert!(html.contains(&runtime), "runtime {runtime} not on the page");
    assert!(html.contains("cutoff"), "end reason not on the page");
    let log = String::from_utf8_lossy(&dom.stderr);
    for bad in ["Uncaught", "Failed to load resource", "net::ERR_"] {
        assert!(!log.contains(bad), "the page logged `{bad}`:\n{log}");
    }

    // A screenshot of the rendered page: it exists and is not blank.
    let shot = t.dir().join("shot.png");
    let out = headless(
        &browser,
        &profile,
        &[
            format!("--screenshot={}", shot.display()),
            "--window-size=1200,1800".into(),
        ],
        &page,
    );
    assert!(
        out.status.success() && shot.is_file(),
        "no screenshot: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let img = image::open(&shot).expect("PNG").to_rgb8();
    assert_eq!(img.dimensions(), (1200, 1800));
    let mut colours = std::collections::HashSet::new();
    for p in img.pixels().step_by(7) {
        colours.insert(p.0);
    }
    assert!(
        colours.len() > 20,
        "the screenshot looks blank ({} colours)",
        colours.len()
    );
    if let Some(dir) = std::env::var_os("JOULEPATH_PLOT_DIR") {
        let _ = std::fs::copy(&shot, PathBuf::from(dir).join("report-screenshot.png"));
    }
}
