//! Turns a drawing into a file, PNG or SVG by the file's extension, from one drawing routine
//! written once for any plotters backend ([`Figure`]). PNG: plotters draws into an in-memory
//! RGB buffer, our own text layout ([`crate::text`]) paints the labels onto it, and the pure-Rust
//! `png` crate encodes it, so no image library or system codec is involved. SVG: plotters' SVG
//! backend writes the shapes, and each label becomes an SVG `<text>` element (turned for upright
//! labels) placed with the same font metrics, so the text stays text in the file.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::ProductError;
use crate::text::{Label, paint, svg_text};

/// What can go wrong while drawing on backend `DB`.
pub type DrawError<DB> = DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>;
/// The result of a drawing step on backend `DB`.
pub type DrawResult<DB> = Result<(), DrawError<DB>>;

/// A figure that can draw itself on any plotters backend: shapes go to `root`, text is collected
/// in `labels` (in pixel coordinates) and laid out by the caller for the file's format.
pub trait Figure {
    /// Draws the figure on `root`, a white canvas of the figure's size.
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        labels: &mut Vec<Label>,
    ) -> DrawResult<DB>;
}

/// The file formats a figure can be written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// 8-bit RGB PNG (`.png`).
    Png,
    /// Scalable vector graphics with text as text (`.svg`).
    Svg,
}

impl Format {
    /// The format named by the extension of `path` (`.png` or `.svg`, any case).
    pub fn of(path: &Path) -> Result<Self, ProductError> {
        let ext = path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("png") => Ok(Self::Png),
            Some("svg") => Ok(Self::Svg),
            _ => Err(ProductError::file(
                path,
                "a figure is written as .png or .svg: give the file one of those extensions",
            )),
        }
    }
}

/// Draws `figure` on a white canvas of `size` (width, height in pixels) and writes it to `path`
/// as PNG or SVG, by the extension of `path`.
pub fn render(path: &Path, size: (u32, u32), figure: &impl Figure) -> Result<(), ProductError> {
    match Format::of(path)? {
        Format::Png => render_png(path, size, figure),
        Format::Svg => render_svg(path, size, figure),
    }
}

/// The PNG of `figure`: shapes, then the labels painted on top.
fn render_png(path: &Path, size: (u32, u32), figure: &impl Figure) -> Result<(), ProductError> {
    let (w, h) = size;
    let mut buffer = vec![0u8; w as usize * h as usize * 3];
    let mut labels = Vec::new();
    {
        let root = BitMapBackend::with_buffer(&mut buffer, size).into_drawing_area();
        let drawn = root
            .fill(&WHITE)
            .and_then(|()| figure.draw(&root, &mut labels))
            .and_then(|()| root.present());
        drawn.map_err(|e| ProductError::file(path, format!("drawing failed: {e}")))?;
    }
    for label in &labels {
        paint(&mut buffer, size, label);
    }
    write_png(path, size, &buffer)
}

/// The SVG of `figure`: plotters' shapes, then one `<text>` element per label before the end.
fn render_svg(path: &Path, size: (u32, u32), figure: &impl Figure) -> Result<(), ProductError> {
    let mut svg = String::new();
    let mut labels = Vec::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        let drawn = root
            .fill(&WHITE)
            .and_then(|()| figure.draw(&root, &mut labels))
            .and_then(|()| root.present());
        drawn.map_err(|e| ProductError::file(path, format!("drawing failed: {e}")))?;
    }
    let end = svg
        .rfind("</svg>")
        .ok_or_else(|| ProductError::file(path, "the SVG backend wrote no closing </svg>"))?;
    let mut out = String::with_capacity(svg.len() + labels.len() * 200);
    out.push_str(&svg[..end]);
    for label in &labels {
        out.push_str(&svg_text(label));
    }
    out.push_str("</svg>\n");
    std::fs::write(path, out).map_err(|e| ProductError::file(path, format!("writing SVG: {e}")))
}

/// Writes an RGB buffer of `size` pixels to `path` as PNG.
pub fn write_png(path: &Path, (w, h): (u32, u32), rgb: &[u8]) -> Result<(), ProductError> {
    let fail = |e: &dyn std::fmt::Display| ProductError::file(path, format!("writing PNG: {e}"));
    let file = File::create(path).map_err(|e| fail(&e))?;
    let mut encoder = png::Encoder::new(BufWriter::new(file), w, h);
    encoder.set_color(png::ColorType::Rgb);
    encoder.set_depth(png::BitDepth::Eight);
    let mut writer = encoder.write_header().map_err(|e| fail(&e))?;
    writer.write_image_data(rgb).map_err(|e| fail(&e))?;
    writer.finish().map_err(|e| fail(&e))
}
