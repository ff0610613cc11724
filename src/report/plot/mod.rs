//! Pictures of a run: the discharge curve, where the energy is lost, each converter's efficiency
//! and several designs' discharges side by side, and of a spread across units (the histogram of
//! runtimes and the tornado chart of the swings), as SVG or PNG bytes.
//!
//! Every function returns the encoded picture; nothing is written anywhere the caller did not
//! ask for. SVG text is left to the viewer's sans-serif font; PNG text is drawn with DejaVu Sans,
//! embedded in the library (its licence is in `assets/fonts/`).
//!
//! ```
//! use joulepath::report::plot::{PlotFormat, discharge};
//! use joulepath::solve::{RunOptions, run};
//! let text = r#"
//! cells:
//!   c: { capacity: 1 Ah, ocv: [[0 %, 3.6 V], [100 %, 4.0 V]], resistance: 0.1 ohm, cutoff: 3.5 V }
//! battery: { cell: c }
//! loads: [{ id: l, rail: battery, draw: { on: 100 mA } }]
//! modes: { run: { l: on } }
//! profile: [{ mode: run, for: 1 h }]
//! "#;
//! let d = joulepath::Design::from_text(text).unwrap();
//! let r = run(&d, &RunOptions { trace: true, ..RunOptions::for_design(&d) }).unwrap();
//! let svg = discharge(&d, &r, PlotFormat::Svg, (900, 600)).unwrap();
//! assert!(String::from_utf8(svg).unwrap().contains("cutoff"));
//! ```

mod capture;
mod compare;
mod discharge;
mod efficiency;
mod losses;
mod profile;
mod spread;
mod style;
mod thin;

use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;
use std::sync::atomic::{AtomicU64, Ordering};

use plotters::coord::Shift;
use plotters::drawing::DrawingAreaErrorKind;
use plotters::prelude::*;

pub use capture::capture;
pub use compare::compare_discharge;
pub use discharge::discharge;
pub use efficiency::efficiency;
pub use losses::losses;
pub use spread::{spread_histogram, spread_tornado};

/// A size that suits a page or a screen, pixels.
pub const DEFAULT_SIZE: (u32, u32) = (1000, 680);

/// Smallest and largest picture sides, pixels.
const SIDE_MIN: (u32, u32) = (320, 240);
const SIDE_MAX: u32 = 8000;

/// How a picture is encoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotFormat {
    /// Scalable vector graphics (text as text).
    Svg,
    /// Portable network graphics (text drawn with the embedded font).
    Png,
}

/// The format a file name asks for, by its extension (`.svg`, `.png`, any case).
///
/// ```
/// use joulepath::report::plot::{PlotFormat, plot_format};
/// use std::path::Path;
/// assert_eq!(plot_format(Path::new("out/run.SVG")), Some(PlotFormat::Svg));
/// assert_eq!(plot_format(Path::new("run.pdf")), None);
/// ```
pub fn plot_format(path: &Path) -> Option<PlotFormat> {
    let ext = path.extension()?.to_str()?.to_ascii_lowercase();
    match ext.as_str() {
        "svg" => Some(PlotFormat::Svg),
        "png" => Some(PlotFormat::Png),
        _ => None,
    }
}

/// Why a picture could not be made.
#[derive(Debug, Clone, PartialEq)]
pub enum PlotError {
    /// The run has no trace: it must be run with `RunOptions::trace`.
    NoTrace,
    /// There is nothing of this kind to draw (the sentence says what).
    Nothing(String),
    /// The requested size is out of range.
    Size(u32, u32),
    /// The drawing library or the file system failed.
    Draw(String),
}

impl fmt::Display for PlotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlotError::NoTrace => write!(
                f,
                "the run has no trace to draw; run the discharge with the trace kept"
            ),
            PlotError::Nothing(what) => write!(f, "{what}"),
            PlotError::Size(w, h) => write!(
                f,
                "a picture of {w} x {h} pixels is out of range; use {} x {} to {SIDE_MAX} x {SIDE_MAX}",
                SIDE_MIN.0, SIDE_MIN.1
            ),
            PlotError::Draw(why) => write!(f, "drawing the picture failed: {why}"),
        }
    }
}

impl std::error::Error for PlotError {}

impl<E: std::error::Error + Send + Sync> From<DrawingAreaErrorKind<E>> for PlotError {
    fn from(e: DrawingAreaErrorKind<E>) -> Self {
        PlotError::Draw(e.to_string())
    }
}

/// The whole canvas, in pixels from its top left corner.
pub(crate) type Canvas<DB> = DrawingArea<DB, Shift>;

/// Something that draws itself on any backend.
pub(crate) trait Painter {
    /// Draw on `root`, the whole canvas, already filled white.
    fn paint<DB: DrawingBackend>(&self, root: &Canvas<DB>) -> Result<(), PlotError>
    where
        DB::ErrorType: 'static;
}

/// DejaVu Sans (Bitstream Vera licence, see `assets/fonts/DejaVuSans-LICENSE.txt`).
static FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");

/// Register the embedded font as the sans-serif family, once.
fn ensure_font() -> Result<(), PlotError> {
    static DONE: OnceLock<bool> = OnceLock::new();
    let ok = *DONE.get_or_init(|| {
        plotters::style::register_font("sans-serif", FontStyle::Normal, FONT).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(PlotError::Draw(
            "the embedded font could not be read".into(),
        ))
    }
}

/// A file name in the temporary directory no other call of this process uses.
fn scratch_png() -> PathBuf {
    static COUNT: AtomicU64 = AtomicU64::new(0);
    let n = COUNT.fetch_add(1, Ordering::Relaxed);
    std::env::temp_dir().join(format!("joulepath-plot-{}-{n}.png", std::process::id()))
}

/// Paint `p` on a `size` canvas and encode it.
pub(crate) fn render(
    p: &impl Painter,
    format: PlotFormat,
    size: (u32, u32),
) -> Result<Vec<u8>, PlotError> {
    let (w, h) = size;
    if w < SIDE_MIN.0 || h < SIDE_MIN.1 || w > SIDE_MAX || h > SIDE_MAX {
        return Err(PlotError::Size(w, h));
    }
    ensure_font()?;
    match format {
        PlotFormat::Svg => {
            let mut text = String::new();
            {
                let root = SVGBackend::with_string(&mut text, (w, h)).into_drawing_area();
                root.fill(&WHITE)?;
                p.paint(&root)?;
                root.present()?;
            }
            Ok(text.into_bytes())
        }
        PlotFormat::Png => {
            // The bitmap backend encodes PNG only on its way to a file: draw into a scratch file,
            // read it back, and remove it whatever happened.
            let path = scratch_png();
            let drawn = (|| {
                let root = BitMapBackend::new(&path, (w, h)).into_drawing_area();
                root.fill(&WHITE)?;
                p.paint(&root)?;
                root.present()?;
                Ok::<(), PlotError>(())
            })();
            let bytes = drawn.and_then(|()| {
                std::fs::read(&path)
                    .map_err(|e| PlotError::Draw(format!("{}: {e}", path.display())))
            });
            let _ = std::fs::remove_file(&path);
            bytes
        }
    }
}
