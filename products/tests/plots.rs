//! Every kind of figure the host asks for is drawn to a scratch file, decoded again, and checked
//! for its size, for real content (many colours, ink in the title band), for the colour scale's
//! end colours in the colour bar and the grey of missing cells; signed maps for the diverging
//! scale's neutral zero and their marked cells; SVG figures for well-formed XML with their text;
//! bad input is refused.

mod common;

use std::collections::HashSet;
use std::path::Path;

use common::Scratch;
use exobound_products::plots::{LINE_SIZE, MAP_SIZE};
use exobound_products::{
    CellMarks, ColourScale, Line, LinePlot, LineStyle, MapPlot, Marker, colour, diverging,
    draw_lines, draw_map,
};

/// Width, height and RGB pixels of a PNG file.
fn decode(path: &Path) -> (u32, u32, Vec<[u8; 3]>) {
    let file = std::io::BufReader::new(std::fs::File::open(path).expect("PNG exists"));
    let mut reader = png::Decoder::new(file).read_info().expect("valid PNG");
    let mut buf = vec![0; reader.output_buffer_size().expect("size")];
    let info = reader.next_frame(&mut buf).expect("one frame");
    assert_eq!((info.color_type, info.bit_depth), (png::ColorType::Rgb, png::BitDepth::Eight));
    let px = buf[..info.buffer_size()].chunks(3).map(|c| [c[0], c[1], c[2]]).collect();
    (info.width, info.height, px)
}

/// Number of distinct colours.
fn distinct(px: &[[u8; 3]]) -> usize {
    px.iter().collect::<HashSet<_>>().len()
}

/// True if some pixel in the top `rows` rows is dark (text ink).
fn has_ink_in_top(px: &[[u8; 3]], width: u32, rows: u32) -> bool {
    px[..(width * rows) as usize].iter().any(|p| p.iter().all(|&c| c < 90))
}

fn column_map(log_scale: bool) -> MapPlot {
    let (nx, ny) = (24, 12);
    let x_edges: Vec<f64> = (0..=nx).map(f64::from).collect();
    let y_edges: Vec<f64> = (0..=ny).map(|j| -90.0 + 15.0 * f64::from(j)).collect();
    let values = (0..ny)
        .flat_map(|j| (0..nx).map(move |i| (i, j)))
        .map(|(i, j)| if j == 0 { f64::NAN } else { 1e12 * (1.0 + f64::from(i * j)) })
        .collect();
    MapPlot {
        title: "Column density".into(),
        x_label: "local time (h)".into(),
        y_label: "latitude (°)".into(),
        x_edges,
        y_edges,
        values,
        colour_label: "column density (m⁻²)".into(),
        scale: if log_scale { ColourScale::Log } else { ColourScale::Linear },
        marks: None,
        x_log: false,
        y_log: false,
        x_ticks: Some(vec![0.0, 6.0, 12.0, 18.0, 24.0]),
        y_ticks: Some(vec![-90.0, -45.0, 0.0, 45.0, 90.0]),
        x_tick_labels: None,
        y_tick_labels: None,
        overlays: vec![],
    }
}

#[test]
fn maps_have_the_right_size_a_full_colour_bar_and_grey_gaps() {
    let scratch = Scratch::new("maps");
    for log_scale in [false, true] {
        let path = scratch.join(&format!("map-{log_scale}.png"));
        draw_map(&column_map(log_scale), &path).expect("draw map");
        let (w, h, px) = decode(&path);
        assert_eq!((w, h), MAP_SIZE);
        assert!(distinct(&px) > 200, "only {} colours", distinct(&px));
        assert!(has_ink_in_top(&px, w, 50), "no title");
        let set: HashSet<[u8; 3]> = px.iter().copied().collect();
        for t in [0.0, 1.0] {
            let (r, g, b) = colour(t);
            assert!(set.contains(&[r, g, b]), "colour bar lacks colour({t})");
        }
        assert!(set.contains(&[150, 150, 150]), "no grey for the NaN row");
    }
}

#[test]
fn a_constant_or_empty_map_still_draws() {
    let scratch = Scratch::new("flat");
    let mut plot = column_map(true);
    plot.values = vec![5.0; plot.values.len()];
    draw_map(&plot, &scratch.join("flat.png")).expect("constant field");
    plot.values = vec![f64::NAN; plot.values.len()];
    draw_map(&plot, &scratch.join("empty.png")).expect("all missing");
    assert_eq!(decode(&scratch.join("empty.png")).0, MAP_SIZE.0);
}

fn profile() -> LinePlot {
    let lt: Vec<f64> = (0..=48).map(|k| 0.5 * f64::from(k)).collect();
    let model: Vec<f64> = lt
        .iter()
        .map(|t: &f64| 1e11 + 1e13 * ((t - 12.0) / 24.0 * std::f64::consts::TAU).cos().max(0.0))
        .collect();
    let err: Vec<f64> = model.iter().map(|m| 0.1 * m).collect();
    LinePlot {
        title: "Equatorial profile".into(),
        x_label: "local time (h)".into(),
        y_label: "column density (m⁻²)".into(),
        lines: vec![
            Line {
                label: "model".into(),
                x: lt.clone(),
                y: model.clone(),
                y_err: None,
                style: LineStyle::Solid,
            },
            Line {
                label: "samples".into(),
                x: lt.iter().step_by(4).copied().collect(),
                y: model.iter().step_by(4).map(|m| m * 1.1).collect(),
                y_err: Some(err.iter().step_by(4).copied().collect()),
                style: LineStyle::Points,
            },
            Line {
                label: "half".into(),
                x: lt.clone(),
                y: model.iter().map(|m| m / 2.0).collect(),
                y_err: None,
                style: LineStyle::Dashed,
            },
            Line {
                label: "tenth".into(),
                x: lt.clone(),
                y: model.iter().map(|m| m / 10.0).collect(),
                y_err: None,
                style: LineStyle::Dotted,
            },
        ],
        markers: vec![
            Marker { x: 6.0, label: "dawn terminator".into() },
            Marker { x: 12.0, label: "subsolar".into() },
            Marker { x: 18.0, label: "dusk terminator".into() },
            Marker { x: 12.5, label: "close to subsolar".into() },
        ],
        log_x: false,
        log_y: true,
        x_range: Some((0.0, 24.0)),
        x_ticks: Some(vec![0.0, 6.0, 12.0, 18.0, 24.0]),
    }
}

#[test]
fn line_plots_have_the_right_size_and_every_series_colour() {
    let scratch = Scratch::new("lines");
    for log_y in [true, false] {
        let mut plot = profile();
        plot.log_y = log_y;
        let path = scratch.join(&format!("lines-{log_y}.png"));
        draw_lines(&plot, &path).expect("draw lines");
        let (w, h, px) = decode(&path);
        assert_eq!((w, h), LINE_SIZE);
        assert!(distinct(&px) > 20, "only {} colours", distinct(&px));
        assert!(has_ink_in_top(&px, w, 50), "no title");
        // The first two series colours (this crate's palette) appear as solid pixels.
        let set: HashSet<[u8; 3]> = px.iter().copied().collect();
        assert!(set.contains(&[36, 62, 150]) && set.contains(&[196, 104, 10]));
    }
}

#[test]
fn gaps_out_of_range_points_and_no_data_are_drawn_without_error() {
    let scratch = Scratch::new("odd");
    let mut plot = profile();
    plot.lines[0].y[10] = f64::NAN;
    plot.lines[0].y[11] = -5.0; // not shown on a log axis
    plot.x_range = Some((3.0, 20.0));
    draw_lines(&plot, &scratch.join("gappy.png")).expect("gappy");
    let empty =
        LinePlot { lines: vec![], markers: vec![], x_range: None, x_ticks: None, ..profile() };
    draw_lines(&empty, &scratch.join("empty.png")).expect("no lines");
}

#[test]
fn bad_plot_input_is_refused_naming_the_file() {
    let scratch = Scratch::new("bad");
    let path = scratch.join("bad.png");
    let mut map = column_map(false);
    map.values.pop();
    let err = draw_map(&map, &path).unwrap_err().to_string();
    assert!(err.contains("bad.png") && err.contains("12×24"), "{err}");
    let mut map = column_map(false);
    map.x_edges.swap(0, 1);
    assert!(draw_map(&map, &path).unwrap_err().to_string().contains("strictly increasing"));
    let mut lines = profile();
    lines.lines[1].y_err.as_mut().unwrap().pop();
    let err = draw_lines(&lines, &path).unwrap_err().to_string();
    assert!(err.contains("`samples`") && err.contains("y_err"), "{err}");
    assert!(!path.exists());
}

/// A signed 4 × 3 map: values -3 .. +1.5 and one exact zero, every other cell marked.
fn signed_map(marks: Option<CellMarks>) -> MapPlot {
    let values = vec![-3.0, -1.5, 0.0, 1.5, -0.75, 0.75, 1.0, -1.0, 0.5, -0.5, 0.25, 1.5];
    MapPlot {
        title: "Column of B relative to A".into(),
        x_label: "local time (h)".into(),
        y_label: "latitude (°)".into(),
        x_edges: vec![0.0, 6.0, 12.0, 18.0, 24.0],
        y_edges: vec![-90.0, -30.0, 30.0, 90.0],
        values,
        colour_label: "difference (%)".into(),
        scale: ColourScale::Diverging,
        marks,
        x_log: false,
        y_log: false,
        x_ticks: None,
        y_ticks: None,
        x_tick_labels: None,
        y_tick_labels: None,
        overlays: vec![],
    }
}

/// Pixels of exactly `rgb`.
fn count(px: &[[u8; 3]], (r, g, b): (u8, u8, u8)) -> usize {
    px.iter().filter(|p| **p == [r, g, b]).count()
}

#[test]
fn a_signed_map_puts_zero_on_the_neutral_middle_and_dots_the_marked_cells() {
    let scratch = Scratch::new("signed");
    let plain = scratch.join("plain.png");
    draw_map(&signed_map(None), &plain).expect("signed map");
    let (_, _, px) = decode(&plain);
    // Limits ±max|value| = ±3: the zero cell is the neutral middle, +1.5 is three quarters up,
    // -3 the bottom end; a cell of 1.5 is drawn in the colour at t = 0.75.
    for (t, what) in [(0.5, "zero"), (0.75, "+1.5"), (0.0, "-3")] {
        assert!(count(&px, diverging(t)) > 20, "no pixels of the colour of {what}");
    }
    let mask: Vec<bool> = (0..12).map(|k| k % 2 == 0).collect();
    let marked = scratch.join("marked.png");
    let marks =
        CellMarks { mask, label: "|difference| < 2 s.e. of the per-seed differences".into() };
    draw_map(&signed_map(Some(marks)), &marked).expect("marked map");
    let (_, _, mx) = decode(&marked);
    // Six dots of ink, each at least a few pixels, plus the one in the key's swatch.
    let ink = (34, 34, 42);
    assert!(
        count(&mx, ink) >= count(&px, ink) + 7 * 5,
        "{} vs {}",
        count(&mx, ink),
        count(&px, ink)
    );
    // No noise estimate: the key says so and no cell is dotted.
    let note = scratch.join("note.png");
    let none = CellMarks { mask: vec![], label: "1 seed: no noise estimate".into() };
    draw_map(&signed_map(Some(none)), &note).expect("note only");
    let mut bad = signed_map(Some(CellMarks { mask: vec![true; 5], label: "x".into() }));
    let err = draw_map(&bad, &note).unwrap_err().to_string();
    assert!(err.contains("5 marks for a 3×4 grid"), "{err}");
    bad.marks = None;
    bad.x_tick_labels = Some(vec!["a".into()]);
    assert!(draw_map(&bad, &note).unwrap_err().to_string().contains("need x ticks"));
}

#[test]
fn log_axes_and_labelled_ticks_draw_and_bad_ones_are_refused() {
    let scratch = Scratch::new("logaxes");
    // Sweep-like cells around log-spaced values 1e5, 1e6, 1e7 on x and 2, 3, 4 on y.
    let mut map = signed_map(None);
    map.scale = ColourScale::Linear;
    map.values = (0..9).map(f64::from).collect();
    map.x_edges = vec![10f64.powf(4.5), 10f64.powf(5.5), 10f64.powf(6.5), 10f64.powf(7.5)];
    map.y_edges = vec![1.5, 2.5, 3.5, 4.5];
    map.x_log = true;
    map.x_ticks = Some(vec![1e5, 1e6, 1e7]);
    map.x_tick_labels = Some(vec!["1e5".into(), "1e6".into(), "1e7".into()]);
    map.y_ticks = Some(vec![2.0, 3.0, 4.0]);
    draw_map(&map, &scratch.join("log.png")).expect("log x map");
    map.x_edges[0] = 0.0;
    let err = draw_map(&map, &scratch.join("bad.png")).unwrap_err().to_string();
    assert!(err.contains("positive on a log axis"), "{err}");
    let mut lines = profile();
    lines.log_x = true;
    lines.x_range = Some((0.5, 24.0));
    draw_lines(&lines, &scratch.join("logx.png")).expect("log x lines");
    lines.x_range = Some((0.0, 24.0));
    assert!(draw_lines(&lines, &scratch.join("bad.png")).is_err());
    let err = draw_lines(&profile(), &scratch.join("lines.jpg")).unwrap_err().to_string();
    assert!(err.contains("lines.jpg") && err.contains(".svg"), "{err}");
}

/// The text content of every `<text>` element of an SVG file, after checking that the file
/// is well-formed XML whose root is `<svg>` of the given size.
fn svg_texts(path: &Path, (w, h): (u32, u32)) -> Vec<String> {
    let text = std::fs::read_to_string(path).expect("SVG written");
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some(w.to_string().as_str()));
    assert_eq!(root.attribute("height"), Some(h.to_string().as_str()));
    root.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or_default().trim().to_owned())
        .collect()
}

#[test]
fn svg_figures_are_well_formed_xml_with_their_text_as_text() {
    let scratch = Scratch::new("svg");
    let map_path = scratch.join("map.svg");
    let mut map = column_map(true);
    map.title = "Column density <Na> & K".into();
    draw_map(&map, &map_path).expect("map as SVG");
    let texts = svg_texts(&map_path, MAP_SIZE);
    assert!(texts.contains(&"Column density <Na> & K".to_owned()), "{texts:?}");
    assert!(texts.contains(&"column density (m⁻²)".to_owned()) && texts.contains(&"12".to_owned()));
    assert!(texts.iter().all(|t| !t.is_empty()), "empty text elements: {texts:?}");
    let raw = std::fs::read_to_string(&map_path).unwrap();
    assert!(raw.contains("rotate(-90 "), "the upright y label is turned");
    let line_path = scratch.join("lines.svg");
    draw_lines(&profile(), &line_path).expect("lines as SVG");
    let texts = svg_texts(&line_path, LINE_SIZE);
    assert!(texts.contains(&"Equatorial profile".to_owned()), "{texts:?}");
    assert!(texts.contains(&"dawn terminator".to_owned()) && texts.contains(&"samples".to_owned()));
    let marks = CellMarks { mask: vec![true; 12], label: "within the noise".into() };
    let signed = scratch.join("signed.svg");
    draw_map(&signed_map(Some(marks)), &signed).expect("signed map as SVG");
    assert!(svg_texts(&signed, MAP_SIZE).contains(&"within the noise".to_owned()));
}
