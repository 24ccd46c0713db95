//! Turns a drawing into a PNG file: plotters draws into an in-memory RGB buffer, which is then
//! encoded with the pure-Rust `png` crate, so no image library or system codec is involved.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::ProductError;
use crate::text::{Label, paint};

/// What can go wrong while drawing into the buffer.
pub type DrawError = DrawingAreaErrorKind<<BitMapBackend<'static> as DrawingBackend>::ErrorType>;
/// The result of a drawing step.
pub type DrawResult = Result<(), DrawError>;

/// Draws with `draw` on a white `size` (width, height in pixels) canvas, paints the text
/// labels it collected on top, and writes the result to `path` as an 8-bit RGB PNG.
pub fn render<F>(path: &Path, size: (u32, u32), draw: F) -> Result<(), ProductError>
where
    F: FnOnce(&DrawingArea<BitMapBackend<'_>, Shift>, &mut Vec<Label>) -> DrawResult,
{
    let (w, h) = size;
    let mut buffer = vec![0u8; w as usize * h as usize * 3];
    let mut labels = Vec::new();
    {
        let root = BitMapBackend::with_buffer(&mut buffer, size).into_drawing_area();
        let drawn =
            root.fill(&WHITE).and_then(|()| draw(&root, &mut labels)).and_then(|()| root.present());
        drawn.map_err(|e| ProductError::file(path, format!("drawing failed: {e}")))?;
    }
    for label in &labels {
        paint(&mut buffer, size, label);
    }
    write_png(path, size, &buffer)
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
