//! The report's visual style: one font, one colour and marker per probe across every
//! figure, light grid, sizes that stay legible at 800 × 500 px.

use plotters::element::{Drawable, PointCollection};
use plotters::prelude::*;
use plotters_backend::{BackendCoord, DrawingErrorKind};
use std::sync::Once;

/// The font family. The same string is the SVG `font-family` attribute (viewers fall back
/// along the list) and the name under which the embedded DejaVu Sans is registered for PNGs.
pub const FONT: &str = "DejaVu Sans, Verdana, Arial, sans-serif";

/// Register the embedded font once per process (PNG text needs no system font library).
pub fn register_fonts() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // Both are valid TrueType files shipped by the crate: failure is not expected, and
        // would only cost the PNG text (the SVGs name the family).
        let _ = plotters::style::register_font(FONT, FontStyle::Normal, dejavu::sans::regular());
        let _ = plotters::style::register_font(FONT, FontStyle::Bold, dejavu::sans::bold());
    });
}

/// Text and axis colour.
pub const INK: RGBColor = RGBColor(34, 34, 34);
/// Secondary text colour (notes, tick labels).
pub const MUTED: RGBColor = RGBColor(90, 90, 90);
/// Grid lines.
pub const GRID: RGBColor = RGBColor(222, 222, 222);
/// Fits drawn over several probes.
pub const FIT: RGBColor = RGBColor(40, 40, 40);

/// Probe colours: a colour-blind-safe qualitative set (Okabe–Ito order without the yellow
/// that vanishes on white, then a few darker extras).
const PROBE_COLOURS: [RGBColor; 10] = [
    RGBColor(0, 114, 178),   // blue
    RGBColor(213, 94, 0),    // vermillion
    RGBColor(0, 158, 115),   // bluish green
    RGBColor(204, 121, 167), // reddish purple
    RGBColor(230, 159, 0),   // orange
    RGBColor(86, 180, 233),  // sky blue
    RGBColor(136, 34, 85),   // wine
    RGBColor(68, 170, 153),  // teal
    RGBColor(153, 153, 51),  // olive
    RGBColor(0, 0, 0),       // black
];

/// The colour of probe `i` (probes sorted as in [`super::input::Run::probes`]).
pub fn probe_colour(i: usize) -> RGBColor {
    PROBE_COLOURS[i % PROBE_COLOURS.len()]
}

/// Marker shapes, cycled per probe so that colour is not the only cue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Circle,
    /// Filled square.
    Square,
    /// Filled triangle, point up.
    Triangle,
    /// Filled diamond.
    Diamond,
}

/// The marker of probe `i`.
pub fn probe_marker(i: usize) -> Marker {
    [
        Marker::Circle,
        Marker::Square,
        Marker::Triangle,
        Marker::Diamond,
    ][i % 4]
}

/// Sequential colours for times since the front (dark blue early to olive-yellow late,
/// the viridis hues with the palest end left out so every line shows on white).
pub fn time_colour(i: usize, n: usize) -> RGBColor {
    const STOPS: [(f64, f64, f64); 5] = [
        (68.0, 1.0, 84.0),
        (59.0, 82.0, 139.0),
        (33.0, 145.0, 140.0),
        (94.0, 201.0, 98.0),
        (190.0, 180.0, 30.0),
    ];
    let x = if n <= 1 {
        0.0
    } else {
        i as f64 / (n - 1) as f64
    };
    let pos = x * (STOPS.len() - 1) as f64;
    let k = (pos.floor() as usize).min(STOPS.len() - 2);
    let f = pos - k as f64;
    let (a, b) = (STOPS[k], STOPS[k + 1]);
    let mix = |p: f64, q: f64| (p + (q - p) * f).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Station colours (decay figure).
pub fn station_colour(i: usize) -> RGBColor {
    [
        RGBColor(34, 34, 34),
        RGBColor(0, 114, 178),
        RGBColor(213, 94, 0),
        RGBColor(0, 158, 115),
    ][i % 4]
}

/// Sizes scaled to the figure (reference 800 × 500 px).
#[derive(Debug, Clone, Copy)]
pub struct Sizes {
    /// Figure width and height, px.
    pub width: u32,
    /// Figure height, px.
    pub height: u32,
    scale: f64,
}

impl Sizes {
    /// Sizes for a figure of `width` × `height` px.
    pub fn new(width: u32, height: u32) -> Sizes {
        let scale = (width as f64 / 800.0).min(height as f64 / 500.0).max(0.5);
        Sizes {
            width,
            height,
            scale,
        }
    }
    /// A length in px at the reference size, scaled.
    pub fn px(&self, v: f64) -> u32 {
        (v * self.scale).round().max(1.0) as u32
    }
    /// As [`Sizes::px`], signed.
    pub fn ipx(&self, v: f64) -> i32 {
        self.px(v) as i32
    }
    /// Caption (title) style.
    pub fn title(&self) -> TextStyle<'static> {
        (FONT, self.px(22.0) as f64)
            .into_font()
            .style(FontStyle::Bold)
            .color(&INK)
    }
    /// Axis description style.
    pub fn axis_label(&self) -> TextStyle<'static> {
        (FONT, self.px(17.0) as f64).into_font().color(&INK)
    }
    /// Tick label style.
    pub fn tick(&self) -> TextStyle<'static> {
        (FONT, self.px(14.0) as f64).into_font().color(&MUTED)
    }
    /// Legend text style.
    pub fn legend(&self) -> TextStyle<'static> {
        (FONT, self.legend_px() as f64).into_font().color(&INK)
    }
    /// Legend text height, px: scaled, but never below 10 px, so small figures keep a
    /// readable legend.
    pub fn legend_px(&self) -> u32 {
        self.px(14.0).max(10)
    }
    /// Marker radius, px.
    pub fn marker(&self) -> i32 {
        self.ipx(4.5)
    }
    /// Line width of data curves, px.
    pub fn line(&self) -> u32 {
        self.px(2.2)
    }
}

/// A marker at one point (data or pixel coordinates), drawn straight on the backend.
///
/// (An element of its own rather than a composition of plotters elements: compositions
/// carry the backend type, which would have to be `'static` to be boxed per shape.)
#[derive(Debug, Clone, Copy)]
pub struct MarkerElem<C> {
    at: C,
    shape: Marker,
    colour: RGBAColor,
    r: i32,
    filled: bool,
}

/// A marker of `shape` and radius `r` px at `at`.
pub fn marker_element<C>(
    at: C,
    shape: Marker,
    colour: impl Color,
    r: i32,
    filled: bool,
) -> MarkerElem<C> {
    MarkerElem {
        at,
        shape,
        colour: colour.to_rgba(),
        r,
        filled,
    }
}

impl<'a, C: 'a> PointCollection<'a, C> for &'a MarkerElem<C> {
    type Point = &'a C;
    type IntoIter = std::iter::Once<&'a C>;
    fn point_iter(self) -> Self::IntoIter {
        std::iter::once(&self.at)
    }
}

impl<C, DB: DrawingBackend> Drawable<DB> for MarkerElem<C> {
    fn draw<I: Iterator<Item = BackendCoord>>(
        &self,
        mut pos: I,
        backend: &mut DB,
        _: (u32, u32),
    ) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
        let Some((x, y)) = pos.next() else {
            return Ok(());
        };
        let style = ShapeStyle {
            color: self.colour,
            filled: self.filled,
            stroke_width: 2,
        };
        let r = self.r;
        let polygon = |pts: Vec<(i32, i32)>| -> Vec<(i32, i32)> {
            pts.into_iter().map(|(dx, dy)| (x + dx, y + dy)).collect()
        };
        let h = (r as f64 * 1.25).round() as i32;
        let outline = match self.shape {
            Marker::Circle => return backend.draw_circle((x, y), r as u32, &style, self.filled),
            Marker::Square => {
                let s = (r as f64 * 0.85).round() as i32;
                return backend.draw_rect((x - s, y - s), (x + s, y + s), &style, self.filled);
            }
            Marker::Triangle => polygon(vec![(0, -h), (h, h * 3 / 4), (-h, h * 3 / 4)]),
            Marker::Diamond => polygon(vec![(0, -h), (h, 0), (0, h), (-h, 0)]),
        };
        if self.filled {
            backend.fill_polygon(outline, &style)
        } else {
            let mut closed = outline.clone();
            closed.push(outline[0]);
            backend.draw_path(closed, &style)
        }
    }
}

/// A legend key for a curve: a short solid or dashed line starting at the anchor.
#[derive(Debug, Clone, Copy)]
pub struct LineKey {
    at: BackendCoord,
    colour: RGBColor,
    width: u32,
    dashed: bool,
}

/// A legend key for a curve of `colour` and `width` px.
pub fn legend_line(at: BackendCoord, colour: RGBColor, width: u32, dashed: bool) -> LineKey {
    LineKey {
        at,
        colour,
        width,
        dashed,
    }
}

impl<'a> PointCollection<'a, BackendCoord> for &'a LineKey {
    type Point = &'a BackendCoord;
    type IntoIter = std::iter::Once<&'a BackendCoord>;
    fn point_iter(self) -> Self::IntoIter {
        std::iter::once(&self.at)
    }
}

impl<DB: DrawingBackend> Drawable<DB> for LineKey {
    fn draw<I: Iterator<Item = BackendCoord>>(
        &self,
        mut pos: I,
        backend: &mut DB,
        _: (u32, u32),
    ) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
        let Some((x, y)) = pos.next() else {
            return Ok(());
        };
        let style = self.colour.stroke_width(self.width);
        if self.dashed {
            backend.draw_line((x, y), (x + 6, y), &style)?;
            backend.draw_line((x + 11, y), (x + 17, y), &style)
        } else {
            backend.draw_line((x, y), (x + 17, y), &style)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn colours_are_distinct_and_stable() {
        for i in 0..PROBE_COLOURS.len() {
            for j in 0..i {
                assert_ne!(probe_colour(i), probe_colour(j));
            }
        }
        assert_eq!(probe_colour(3), probe_colour(13));
        assert_eq!(time_colour(0, 5), RGBColor(68, 1, 84));
        assert_eq!(time_colour(4, 5), RGBColor(190, 180, 30));
    }
}
