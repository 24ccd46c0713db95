//! Every kind of figure the host asks for is drawn to a scratch file, decoded again, and checked
//! for its size, for real content (many colours, ink in the title band), for the colour scale's
//! end colours in the colour bar and the grey of missing cells; bad input is refused.

mod common;

use std::collections::HashSet;
use std::path::Path;

use common::Scratch;
use exobound_products::plots::{LINE_SIZE, MAP_SIZE};
use exobound_products::{Line, LinePlot, LineStyle, MapPlot, Marker, colour, draw_lines, draw_map};

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
        log_scale,
        x_ticks: Some(vec![0.0, 6.0, 12.0, 18.0, 24.0]),
        y_ticks: Some(vec![-90.0, -45.0, 0.0, 45.0, 90.0]),
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
