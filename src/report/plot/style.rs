//! The visual language shared by every picture: colours, line patterns, marker shapes, text
//! sizes, the time axis, the legend row and trace decimation.
//!
//! Colours come from the eight-colour set Okabe and Ito proposed for readers with colour-vision
//! deficiency ("Color Universal Design", 2008): every pair stays distinguishable under the common
//! red-green and blue-yellow deficiencies. The yellow is kept for fills only (too light for lines
//! on white). Lines also differ by pattern and points by shape, so nothing depends on colour
//! alone.

use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::{Canvas, PlotError};

/// Blue.
pub const BLUE: RGBColor = RGBColor(0, 114, 178);
/// Orange.
pub const ORANGE: RGBColor = RGBColor(230, 159, 0);
/// Bluish green.
pub const GREEN: RGBColor = RGBColor(0, 158, 115);
/// Vermillion.
pub const VERMILLION: RGBColor = RGBColor(213, 94, 0);
/// Sky blue.
pub const SKY: RGBColor = RGBColor(86, 180, 233);
/// Reddish purple.
pub const PURPLE: RGBColor = RGBColor(204, 121, 167);
/// Yellow (fills only).
pub const YELLOW: RGBColor = RGBColor(240, 228, 66);
/// Near black, for text and the end marker.
pub const INK: RGBColor = RGBColor(25, 25, 25);
/// Grey for grids and secondary text.
pub const GREY: RGBColor = RGBColor(110, 110, 110);

/// Minor grid lines.
pub const MESH_LIGHT: RGBColor = RGBColor(243, 243, 243);
/// Major grid lines.
pub const MESH_BOLD: RGBColor = RGBColor(214, 214, 214);

/// Colours for series in order (lines and markers).
pub const SERIES: [RGBColor; 7] = [BLUE, VERMILLION, GREEN, PURPLE, ORANGE, SKY, INK];

/// Colours for filled areas in order (bars and bands), yellow included.
pub const FILLS: [RGBColor; 8] = [BLUE, ORANGE, GREEN, PURPLE, SKY, VERMILLION, YELLOW, GREY];

/// The `k`-th series colour, cycling.
pub fn series(k: usize) -> RGBColor {
    SERIES[k % SERIES.len()]
}

/// The `k`-th fill colour, cycling.
pub fn fill(k: usize) -> RGBColor {
    FILLS[k % FILLS.len()]
}

/// A line pattern: dash length and gap, pixels (`None` for a solid line).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dash {
    /// Unbroken.
    Solid,
    /// Long dashes.
    Long,
    /// Short dots.
    Dots,
    /// Medium dashes.
    Medium,
}

impl Dash {
    /// Dash and gap lengths, pixels.
    fn lengths(self) -> Option<(u32, u32)> {
        match self {
            Dash::Solid => None,
            Dash::Long => Some((12, 6)),
            Dash::Dots => Some((2, 5)),
            Dash::Medium => Some((6, 4)),
        }
    }
}

/// Draw a polyline in pixels with a pattern.
pub fn pixel_line<DB: DrawingBackend>(
    area: &Canvas<DB>,
    points: Vec<(i32, i32)>,
    color: RGBColor,
    width: u32,
    dash: Dash,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let style = color.stroke_width(width);
    match dash.lengths() {
        None => area.draw(&PathElement::new(points, style))?,
        Some((on, off)) => area.draw(&DashedPathElement::new(points, on, off, style))?,
    }
    Ok(())
}

/// A marker shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Circle.
    Circle,
    /// Square.
    Square,
    /// Triangle pointing up.
    Up,
    /// Diamond.
    Diamond,
    /// Triangle pointing down.
    Down,
    /// Pentagon-like house shape.
    House,
}

impl Shape {
    /// The `k`-th shape, cycling.
    pub fn nth(k: usize) -> Shape {
        [
            Shape::Circle,
            Shape::Square,
            Shape::Up,
            Shape::Diamond,
            Shape::Down,
            Shape::House,
        ][k % 6]
    }
}

/// Draw a marker of half-size `r` centred on pixel `at`; hollow ones have a white inside.
pub fn marker<DB: DrawingBackend>(
    area: &Canvas<DB>,
    at: (i32, i32),
    shape: Shape,
    r: i32,
    color: RGBColor,
    solid: bool,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let (x, y) = at;
    let outline = color.stroke_width(2);
    let inside = if solid {
        color.filled()
    } else {
        WHITE.filled()
    };
    if shape == Shape::Circle {
        area.draw(&Circle::new(at, r, inside))?;
        area.draw(&Circle::new(at, r, outline))?;
        return Ok(());
    }
    let pts: Vec<(i32, i32)> = match shape {
        Shape::Square => vec![(-r, -r), (r, -r), (r, r), (-r, r)],
        Shape::Up => vec![(0, -r - 1), (r + 1, r), (-r - 1, r)],
        Shape::Down => vec![(0, r + 1), (r + 1, -r), (-r - 1, -r)],
        Shape::Diamond => vec![(0, -r - 2), (r + 1, 0), (0, r + 2), (-r - 1, 0)],
        Shape::House | Shape::Circle => {
            vec![(0, -r - 1), (r, -r / 3), (r, r), (-r, r), (-r, -r / 3)]
        }
    };
    let abs: Vec<(i32, i32)> = pts.iter().map(|(dx, dy)| (x + dx, y + dy)).collect();
    area.draw(&Polygon::new(abs.clone(), inside))?;
    let mut ring = abs.clone();
    ring.push(abs[0]);
    area.draw(&PathElement::new(ring, outline))?;
    Ok(())
}

/// Text sizes for a canvas `width` pixels wide.
///
/// Sizes are even whole pixels: the bitmap text renderer places each glyph at half the size
/// below the text's top, and an odd or fractional size misplaces some glyphs by a pixel.
#[derive(Debug, Clone, Copy)]
pub struct Type {
    /// Body text (ticks, legend), pixels.
    pub body: f64,
    /// Axis titles.
    pub axis: f64,
    /// Picture title.
    pub title: f64,
}

/// `x` rounded to an even whole number.
fn even(x: f64) -> f64 {
    (x / 2.0).round() * 2.0
}

impl Type {
    /// Sizes that keep text legible from small to large canvases.
    pub fn for_width(width: u32) -> Type {
        let body = even((f64::from(width) / 70.0).clamp(12.0, 20.0));
        Type {
            body,
            axis: body + 2.0,
            title: even(body * 1.4),
        }
    }

    /// The body size times `k`, kept even.
    pub fn scaled(self, k: f64) -> f64 {
        even(self.body * k).max(10.0)
    }
}

/// A length in pixels as a signed coordinate (pictures are at most a few thousand pixels).
pub fn px(v: u32) -> i32 {
    i32::try_from(v).unwrap_or(i32::MAX)
}

/// Text style of `size` pixels in `color`, anchored at `h`, `v`.
pub fn text(size: f64, color: RGBColor, h: HPos, v: VPos) -> TextStyle<'static> {
    ("sans-serif", size)
        .into_font()
        .color(&color)
        .pos(Pos::new(h, v))
}

/// Draw `s` at pixel `at`.
pub fn label<DB: DrawingBackend>(
    area: &Canvas<DB>,
    s: &str,
    at: (i32, i32),
    style: &TextStyle<'_>,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    area.draw(&Text::new(s.to_string(), at, style.clone()))?;
    Ok(())
}

/// Width of `s` in pixels at `size`.
pub fn text_width<DB: DrawingBackend>(area: &Canvas<DB>, s: &str, size: f64) -> i32 {
    let font: TextStyle<'_> = ("sans-serif", size).into();
    area.estimate_text_size(s, &font)
        .map_or((s.chars().count() as f64 * size * 0.6) as i32, |(w, _)| {
            px(w)
        })
}

/// Break `s` into lines no wider than `width` pixels.
pub fn fit_lines<DB: DrawingBackend>(
    area: &Canvas<DB>,
    s: &str,
    size: f64,
    width: i32,
) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in s.split_whitespace() {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if !line.is_empty() && text_width(area, &candidate, size) > width {
            lines.push(std::mem::replace(&mut line, word.to_string()));
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// What a legend entry shows beside its text.
#[derive(Debug, Clone, Copy)]
pub enum Swatch {
    /// A line sample: colour, width, pattern.
    Line(RGBColor, u32, Dash),
    /// A filled block: colour and opacity.
    Block(RGBColor, f64),
    /// A marker: shape, colour, filled.
    Mark(Shape, RGBColor, bool),
}

/// Lay out `keys` in rows from pixel `(x, y)` within `width`; draw them unless `dry`. Returns
/// the height used.
pub fn legend<DB: DrawingBackend>(
    area: &Canvas<DB>,
    keys: &[(Swatch, String)],
    (x, y): (i32, i32),
    width: i32,
    size: f64,
    dry: bool,
) -> Result<i32, PlotError>
where
    DB::ErrorType: 'static,
{
    if keys.is_empty() {
        return Ok(0);
    }
    let row_h = (size * 1.55) as i32;
    let sample = (size * 2.2) as i32;
    let gap = (size * 1.4) as i32;
    let style = text(size, INK, HPos::Left, VPos::Center);
    let (mut cx, mut cy) = (x, y + row_h / 2);
    for (swatch, name) in keys {
        let need = sample + 6 + text_width(area, name, size);
        if cx > x && cx + need > x + width {
            cx = x;
            cy += row_h;
        }
        if !dry {
            match *swatch {
                Swatch::Line(c, w, dash) => {
                    pixel_line(area, vec![(cx, cy), (cx + sample, cy)], c, w, dash)?;
                }
                Swatch::Block(c, alpha) => {
                    let h = (size * 0.45) as i32;
                    area.draw(&Rectangle::new(
                        [(cx, cy - h), (cx + sample, cy + h)],
                        c.mix(alpha).filled(),
                    ))?;
                    area.draw(&Rectangle::new(
                        [(cx, cy - h), (cx + sample, cy + h)],
                        c.stroke_width(1),
                    ))?;
                }
                Swatch::Mark(shape, c, solid) => {
                    marker(
                        area,
                        (cx + sample / 2, cy),
                        shape,
                        (size * 0.32) as i32,
                        c,
                        solid,
                    )?;
                }
            }
            label(area, name, (cx + sample + 6, cy), &style)?;
        }
        cx += need + gap;
    }
    Ok(cy + row_h / 2 - y)
}

/// A time unit for an axis: seconds per unit and its symbol.
#[derive(Debug, Clone, Copy)]
pub struct TimeUnit {
    /// Seconds in one unit.
    pub seconds: f64,
    /// Symbol on the axis.
    pub symbol: &'static str,
}

impl TimeUnit {
    /// Hours up to three days, days beyond; minutes and seconds for short runs.
    pub fn for_span(span_s: f64) -> TimeUnit {
        if span_s < 2.0 * 60.0 {
            TimeUnit {
                seconds: 1.0,
                symbol: "s",
            }
        } else if span_s < 2.0 * 3600.0 {
            TimeUnit {
                seconds: 60.0,
                symbol: "min",
            }
        } else if span_s < 3.0 * 86_400.0 {
            TimeUnit {
                seconds: 3600.0,
                symbol: "h",
            }
        } else {
            TimeUnit {
                seconds: 86_400.0,
                symbol: "d",
            }
        }
    }

    /// The axis title, with the unit's symbol as every other axis has it.
    pub fn title(self) -> String {
        format!("time from start ({})", self.symbol)
    }
}

/// A "nice" upper bound and step for an axis from 0 to `x`.
pub fn nice_ceiling(x: f64) -> f64 {
    if !(x > 0.0 && x.is_finite()) {
        return 1.0;
    }
    let mag = 10f64.powf(x.log10().floor());
    for m in [1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0] {
        if m * mag >= x * 1.0001 {
            return m * mag;
        }
    }
    10.0 * mag
}

/// Short words for an end reason, for a marker's label.
pub fn end_words(design: &crate::Design, end: &crate::solve::End) -> String {
    use crate::solve::EndReason;
    use crate::units::fmt_eng;
    match end.reason {
        EndReason::Collapse => "collapse: the pack cannot give the power".into(),
        EndReason::Cutoff if design.pack.buffer().is_some() => format!(
            "cutoff: node or cells under load below {}",
            fmt_eng(design.pack.cutoff_v(), "V")
        ),
        EndReason::Cutoff => format!(
            "cutoff: under load below {}",
            fmt_eng(design.pack.cutoff_v(), "V")
        ),
        EndReason::Undervoltage => format!("undervoltage: `{}` input too low", end.subject),
        EndReason::Rail => format!("rail: supply of `{}` too low", end.subject),
        EndReason::Empty => "empty: 0 % charge left".into(),
        EndReason::Horizon => "horizon: still running".into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_ceilings() {
        assert!((nice_ceiling(0.73) - 0.8).abs() < 1e-12);
        assert!((nice_ceiling(1.0) - 1.2).abs() < 1e-12);
        assert!((nice_ceiling(460.0) - 500.0).abs() < 1e-9);
    }
}
