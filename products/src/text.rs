//! Lays out and paints the text of a figure with the embedded font, straight onto the RGB
//! buffer after the graphics are drawn. It keeps each glyph's side bearing and sub-pixel
//! advance (so letters sit evenly) and can turn text a quarter turn for vertical axis labels.
//! For SVG files the same labels become `<text>` elements ([`svg_text`]), placed with the same
//! font metrics so that they sit where the painted ones do.

use std::sync::OnceLock;

use ab_glyph::{Font, FontRef, PxScale, ScaleFont, point};

/// Regular or bold face of the embedded font.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weight {
    /// DejaVu Sans.
    Regular,
    /// DejaVu Sans Bold.
    Bold,
}

/// Which point of the text's box sits at the anchor, horizontally.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// The text starts at the anchor.
    Start,
    /// The text is centred on the anchor.
    Middle,
    /// The text ends at the anchor.
    End,
}

/// Which line of the text sits at the anchor, vertically.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Baseline {
    /// The top of the tallest letters (ascent).
    Top,
    /// Halfway up the capital letters.
    Middle,
    /// The bottom of descending letters (descent).
    Bottom,
}

/// One piece of text to paint, in pixel coordinates of the figure.
#[derive(Debug, Clone, PartialEq)]
pub struct Label {
    /// The text.
    pub text: String,
    /// Anchor, in pixels from the left edge.
    pub x: f64,
    /// Anchor, in pixels from the top edge.
    pub y: f64,
    /// Font size, in pixels (ascent + descent).
    pub size: f64,
    /// Face.
    pub weight: Weight,
    /// Colour (8-bit sRGB).
    pub ink: (u8, u8, u8),
    /// Horizontal placement along the text direction.
    pub align: Align,
    /// Placement across the text direction.
    pub baseline: Baseline,
    /// Turned a quarter turn anticlockwise (reading upwards).
    pub upright: bool,
}

impl Label {
    /// Regular text of `size` pixels in `ink`, anchored by `align` and `baseline` at (x, y).
    pub fn new(text: &str, (x, y): (f64, f64), size: f64, ink: (u8, u8, u8)) -> Self {
        Self {
            text: text.to_owned(),
            x,
            y,
            size,
            weight: Weight::Regular,
            ink,
            align: Align::Start,
            baseline: Baseline::Middle,
            upright: false,
        }
    }

    /// The same label with another anchoring.
    pub fn anchored(mut self, align: Align, baseline: Baseline) -> Self {
        self.align = align;
        self.baseline = baseline;
        self
    }

    /// The same label in bold.
    pub fn bold(mut self) -> Self {
        self.weight = Weight::Bold;
        self
    }

    /// The same label turned to read upwards.
    pub fn upright(mut self) -> Self {
        self.upright = true;
        self
    }
}

/// The parsed embedded font of `weight`.
fn face(weight: Weight) -> &'static FontRef<'static> {
    static REGULAR: OnceLock<FontRef<'static>> = OnceLock::new();
    static BOLD: OnceLock<FontRef<'static>> = OnceLock::new();
    let (cell, bytes) = match weight {
        Weight::Regular => (&REGULAR, dejavu::sans::regular()),
        Weight::Bold => (&BOLD, dejavu::sans::bold()),
    };
    // The bytes are compiled in and known to be a valid TrueType font (tested).
    cell.get_or_init(|| FontRef::try_from_slice(bytes).expect("embedded DejaVu Sans is valid"))
}

/// Width of `text` in pixels at `size` pixels.
pub fn text_width(text: &str, size: f64, weight: Weight) -> f64 {
    let font = face(weight).as_scaled(PxScale::from(size as f32));
    let mut width = 0.0f32;
    let mut prev = None;
    for c in text.chars() {
        let id = font.glyph_id(c);
        if let Some(p) = prev {
            width += font.kern(p, id);
        }
        width += font.h_advance(id);
        prev = Some(id);
    }
    f64::from(width)
}

/// How far (pixels, downwards across the text) the alphabetic baseline lies from the anchor.
fn baseline_offset(label: &Label) -> f32 {
    let font_ref = face(label.weight);
    let font = font_ref.as_scaled(PxScale::from(label.size as f32));
    let cap = font_ref
        .outline_glyph(font.scaled_glyph('H'))
        .map_or(font.ascent() * 0.7, |g| g.px_bounds().height());
    match label.baseline {
        Baseline::Top => font.ascent(),
        Baseline::Middle => cap / 2.0,
        Baseline::Bottom => font.descent(),
    }
}

/// `label` as one SVG `<text>` element (with its line end): the baseline placed by the same
/// metrics as [`paint`], the alignment as `text-anchor`, upright labels turned a quarter turn
/// anticlockwise about the anchor. The font size is the CSS em size, which for the embedded font
/// is the pixel height (ascent + descent) scaled by units-per-em over that height.
pub fn svg_text(label: &Label) -> String {
    let font = face(label.weight);
    let em = f64::from(font.units_per_em().unwrap_or(2048.0));
    let font_size = label.size * em / f64::from(font.height_unscaled());
    let v = f64::from(baseline_offset(label));
    let (x, y) = (label.x, label.y);
    let anchor = match label.align {
        Align::Start => "start",
        Align::Middle => "middle",
        Align::End => "end",
    };
    // Turned: the text's across-direction (v) becomes +x, so the baseline is at x + v.
    let (tx, ty, turn) = if label.upright {
        (x + v, y, format!(" transform=\"rotate(-90 {} {})\"", num(x + v), num(y)))
    } else {
        (x, y + v, String::new())
    };
    let (r, g, b) = label.ink;
    let weight = if label.weight == Weight::Bold { " font-weight=\"bold\"" } else { "" };
    format!(
        "<text x=\"{}\" y=\"{}\" font-family=\"DejaVu Sans, Verdana, sans-serif\" \
         font-size=\"{}\"{weight} fill=\"#{r:02x}{g:02x}{b:02x}\" text-anchor=\"{anchor}\"{turn}>{}</text>\n",
        num(tx),
        num(ty),
        num(font_size),
        escape_xml(&label.text)
    )
}

/// A coordinate for SVG, to 0.01 pixel.
fn num(v: f64) -> String {
    let s = format!("{v:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".to_owned() } else { s.to_owned() }
}

/// `text` with the five XML special characters escaped.
pub fn escape_xml(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
    out
}

/// Paints `label` onto an RGB buffer of `size` (width, height) pixels, blending by coverage.
pub fn paint(buffer: &mut [u8], (w, h): (u32, u32), label: &Label) {
    let font_ref = face(label.weight);
    let scale = PxScale::from(label.size as f32);
    let font = font_ref.as_scaled(scale);
    let width = text_width(&label.text, label.size, label.weight) as f32;
    // Along the text (u) and across it (v, downwards), relative to the anchor.
    let u0 = match label.align {
        Align::Start => 0.0,
        Align::Middle => -width / 2.0,
        Align::End => -width,
    };
    let baseline = baseline_offset(label);
    let (ax, ay) = (label.x as f32, label.y as f32);
    let (r, g, b) = label.ink;
    let mut caret = u0;
    let mut prev = None;
    for c in label.text.chars() {
        let id = font.glyph_id(c);
        if let Some(p) = prev {
            caret += font.kern(p, id);
        }
        prev = Some(id);
        let glyph = id.with_scale_and_position(scale, point(caret, baseline));
        caret += font.h_advance(id);
        let Some(outline) = font_ref.outline_glyph(glyph) else { continue };
        let bounds = outline.px_bounds();
        outline.draw(|gx, gy, coverage| {
            let (u, v) = (bounds.min.x + gx as f32, bounds.min.y + gy as f32);
            let (px, py) = if label.upright { (ax + v, ay - u - 1.0) } else { (ax + u, ay + v) };
            let (px, py) = (px.round() as i64, py.round() as i64);
            if px < 0 || py < 0 || px >= i64::from(w) || py >= i64::from(h) {
                return;
            }
            let k = ((py as usize) * w as usize + px as usize) * 3;
            let a = coverage.clamp(0.0, 1.0);
            for (slot, ink) in buffer[k..k + 3].iter_mut().zip([r, g, b]) {
                *slot = (f32::from(*slot) * (1.0 - a) + f32::from(ink) * a).round() as u8;
            }
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_faces_parse_and_measure() {
        let w = text_width("local time (h)", 16.0, Weight::Regular);
        assert!(w > 60.0 && w < 160.0, "width {w}");
        assert!(text_width("m⁻²", 16.0, Weight::Bold) > text_width("m", 16.0, Weight::Bold));
    }

    #[test]
    fn painting_darkens_pixels_near_the_anchor_only() {
        let size = (80, 40);
        let mut buf = vec![255u8; 80 * 40 * 3];
        let label = Label::new("Na", (10.0, 20.0), 18.0, (0, 0, 0));
        paint(&mut buf, size, &label);
        let dark: Vec<usize> = (0..80 * 40).filter(|i| buf[i * 3] < 128).collect();
        assert!(!dark.is_empty());
        assert!(dark.iter().all(|i| (i % 80) >= 9 && (i % 80) < 40 && (i / 80) < 30));
    }

    #[test]
    fn svg_text_is_escaped_anchored_and_turned() {
        let l = Label::new("a < b & c", (100.0, 50.0), 16.0, (34, 34, 42))
            .anchored(Align::Middle, Baseline::Top);
        let t = svg_text(&l);
        assert!(
            t.contains(">a &lt; b &amp; c</text>") && t.contains("text-anchor=\"middle\""),
            "{t}"
        );
        assert!(t.contains("fill=\"#22222a\"") && !t.contains("rotate"), "{t}");
        // Top anchoring puts the baseline one ascent below the anchor.
        let y: f64 = t.split("y=\"").nth(1).unwrap().split('"').next().unwrap().parse().unwrap();
        assert!(y > 60.0 && y < 70.0, "{t}");
        let up = svg_text(&Label::new("n", (20.0, 300.0), 17.0, (0, 0, 0)).upright().bold());
        assert!(up.contains("rotate(-90 ") && up.contains("font-weight=\"bold\""), "{up}");
    }
}
