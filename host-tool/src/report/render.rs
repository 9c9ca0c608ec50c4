//! Drawing a figure twice, to SVG and to PNG, from one drawing function.
//!
//! Figures are written against plotters' `DrawingBackend` trait, so the SVG and the PNG are
//! the same picture. In the SVG each data series sits in its own
//! `<g class="series" id="…">` group, so that scripts and tests can find series without
//! guessing from colours: while drawing the SVG, a figure brackets each series with two
//! invisible marker texts ([`Tagger::begin`], [`Tagger::end`]), which [`group_series`] then
//! replaces by the group's opening and closing tags. The PNG is drawn without markers.

use super::error::ReportError;
use super::style::{register_fonts, Sizes};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::path::{Path, PathBuf};

/// A drawing failure, as text (plotters' errors are generic over the backend).
#[derive(Debug)]
pub struct DrawError(pub String);

impl<E: std::error::Error + Send + Sync> From<DrawingAreaErrorKind<E>> for DrawError {
    fn from(e: DrawingAreaErrorKind<E>) -> Self {
        DrawError(e.to_string())
    }
}

/// A figure of the report.
pub trait Figure {
    /// File stem of the figure (`void_fraction_profile` gives `.svg` and `.png`).
    fn stem(&self) -> &'static str;
    /// Draw the figure on `root` (already filled white), bracketing each series with
    /// `tag.begin` / `tag.end`.
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        sizes: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError>;
}

const MARK: &str = "@@frothline-series:";

/// Marks series boundaries in the SVG (does nothing on bitmaps).
#[derive(Debug, Clone, Copy)]
pub struct Tagger {
    enabled: bool,
}

impl Tagger {
    fn mark<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        what: &str,
    ) -> Result<(), DrawError> {
        if self.enabled {
            let style = TextStyle::from((super::style::FONT, 1.0).into_font())
                .pos(Pos::new(HPos::Left, VPos::Top));
            root.draw(&Text::new(format!("{MARK}{what}@@"), (0, 0), style))?;
        }
        Ok(())
    }

    /// Start the series `id` (letters, digits, `-`, `_`, `.`; others become `_`).
    pub fn begin<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        id: &str,
    ) -> Result<(), DrawError> {
        let id: String = id
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || "-_.".contains(c) {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        self.mark(root, &format!("begin:{id}"))
    }

    /// End the current series.
    pub fn end<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), DrawError> {
        self.mark(root, "end")
    }
}

/// Replace the marker texts of [`Tagger`] by `<g class="series">` groups. Returns the new
/// SVG and the number of series.
pub fn group_series(svg: &str) -> (String, usize) {
    let mut out = String::with_capacity(svg.len());
    let mut rest = svg;
    let (mut open, mut count) = (false, 0);
    while let Some(at) = rest.find(MARK) {
        let Some(start) = rest[..at].rfind("<text") else {
            break;
        };
        let Some(close) = rest[at..].find("</text>") else {
            break;
        };
        let mut end = at + close + "</text>".len();
        if rest[end..].starts_with('\n') {
            end += 1;
        }
        let body = &rest[at + MARK.len()..];
        let body = &body[..body.find("@@").unwrap_or(0)];
        out.push_str(&rest[..start]);
        if open {
            out.push_str("</g>\n");
            open = false;
        }
        if let Some(id) = body.strip_prefix("begin:") {
            out.push_str(&format!("<g class=\"series\" id=\"series-{id}\">\n"));
            open = true;
            count += 1;
        }
        rest = &rest[end..];
    }
    match (open, rest.rfind("</svg>")) {
        (true, Some(i)) => {
            out.push_str(&rest[..i]);
            out.push_str("</g>\n");
            out.push_str(&rest[i..]);
        }
        _ => out.push_str(rest),
    }
    (out, count)
}

/// Files written for one figure.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Rendered {
    /// The SVG.
    pub svg: PathBuf,
    /// The PNG.
    pub png: PathBuf,
    /// Series groups in the SVG.
    pub series: usize,
}

fn draw_err(stem: &str) -> impl Fn(DrawError) -> ReportError + '_ {
    move |e| ReportError::Draw {
        figure: stem.to_string(),
        message: e.0,
    }
}

/// Draw `fig` into `out/STEM.svg` and `out/STEM.png`.
pub fn render(fig: &impl Figure, out: &Path, sizes: Sizes) -> Result<Rendered, ReportError> {
    register_fonts();
    let stem = fig.stem();
    let dims = (sizes.width, sizes.height);
    // SVG, with series markers
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, dims).into_drawing_area();
        let draw = || -> Result<(), DrawError> {
            root.fill(&WHITE)?;
            fig.draw(&root, &sizes, &Tagger { enabled: true })?;
            root.present()?;
            Ok(())
        };
        draw().map_err(draw_err(stem))?;
    }
    let (svg, series) = group_series(&svg);
    let svg_path = out.join(format!("{stem}.svg"));
    std::fs::write(&svg_path, svg).map_err(|source| ReportError::Write {
        path: svg_path.clone(),
        source,
    })?;
    // PNG, drawn into an RGB buffer and encoded here
    let mut buf = vec![0u8; sizes.width as usize * sizes.height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, dims).into_drawing_area();
        let draw = || -> Result<(), DrawError> {
            root.fill(&WHITE)?;
            fig.draw(&root, &sizes, &Tagger { enabled: false })?;
            root.present()?;
            Ok(())
        };
        draw().map_err(draw_err(stem))?;
    }
    let png_path = out.join(format!("{stem}.png"));
    write_png(&png_path, dims, &buf).map_err(|source| ReportError::Write {
        path: png_path.clone(),
        source,
    })?;
    Ok(Rendered {
        svg: svg_path,
        png: png_path,
        series,
    })
}

fn write_png(path: &Path, (w, h): (u32, u32), rgb: &[u8]) -> std::io::Result<()> {
    let file = std::io::BufWriter::new(std::fs::File::create(path)?);
    let mut enc = png::Encoder::new(file, w, h);
    enc.set_color(png::ColorType::Rgb);
    enc.set_depth(png::BitDepth::Eight);
    let mut writer = enc.write_header().map_err(std::io::Error::other)?;
    writer
        .write_image_data(rgb)
        .map_err(std::io::Error::other)?;
    writer.finish().map_err(std::io::Error::other)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markers_become_groups() {
        let svg = "<svg>\n<rect/>\n<text x=\"0\">\n@@frothline-series:begin:a@@\n</text>\n\
                   <line/>\n<text x=\"0\">\n@@frothline-series:end@@\n</text>\n\
                   <text x=\"0\">\n@@frothline-series:begin:b@@\n</text>\n<circle/>\n</svg>\n";
        let (out, n) = group_series(svg);
        assert_eq!(n, 2);
        assert_eq!(
            out,
            "<svg>\n<rect/>\n<g class=\"series\" id=\"series-a\">\n<line/>\n</g>\n\
             <g class=\"series\" id=\"series-b\">\n<circle/>\n</g>\n</svg>\n"
        );
    }
}
