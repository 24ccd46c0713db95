//! What an instrument sees: columns and brightness along lines of sight
//! through a finished run's exosphere.
//!
//! Why this exists: models are judged against what telescopes and
//! spacecraft measure, which is brightness integrated along a line of
//! sight, not density at a point. `exobound observe RUN_DIR --view
//! VIEW.toml --out DIR` reads the run's density field (`exosphere.nc`),
//! casts the view's lines of sight through it ([`sightline`]), converts
//! columns to rayleighs with a g-factor ([`gfactor`]) and writes a table,
//! an image NetCDF, plots and a provenance record. The field is the run's
//! time average; the brightness assumes an optically thin exosphere.

pub mod field;
pub mod gfactor;
pub mod sightline;
pub mod view;

use std::path::{Path, PathBuf};

use exobound_products::{
    ColourScale, Dataset, Line, LinePlot, LineStyle, MapPlot, Overlay, Variable, draw_lines,
    draw_map,
};
use serde::Serialize;

use crate::output::{PROVENANCE_FILE, atomic_write, number, staged};
use crate::radiation::GFactorTable;
use crate::vec3;
use field::DensityField;
use gfactor::brightness_rayleigh;
use sightline::{Cuts, Ray, column, hits_surface};
use view::{Distant, Geometry, Orbiter, View};

/// Sub-lines per side of a square aperture.
const APERTURE_SUBLINES: usize = 5;

/// One line of sight (or aperture) and what it sees.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Sample {
    /// Altitude above the limb (distant) or tangent altitude (orbiter
    /// limb), km; NaN for a nadir look.
    pub altitude_km: f64,
    /// Look elevation above the local horizon at the spacecraft, deg
    /// (orbiter only; NaN for a distant observer).
    pub elevation_deg: f64,
    /// Column along the line, atoms cm^-2.
    pub column_cm2: f64,
    /// Brightness 4 pi I, rayleigh.
    pub brightness_r: f64,
    /// Fraction of the sample's lines of sight (the aperture's sub-lines)
    /// that end on the body's surface, so see nothing behind it,
    /// dimensionless: 0 for a line clear of the body, 1 for a nadir look.
    pub blocked_fraction: f64,
}

/// Everything `observe` computed.
#[derive(Clone, Debug, Serialize)]
pub struct Observation {
    /// The run directory read.
    pub run_dir: String,
    /// The view file read.
    pub view_file: String,
    /// Species, from the run.
    pub species: String,
    /// g-factor used, photons s^-1 atom^-1.
    pub g_factor: f64,
    /// Where g came from.
    pub g_factor_origin: String,
    /// Heliocentric radial velocity used, km s^-1.
    pub radial_velocity_km_s: f64,
    /// Heliocentric distance used, AU.
    pub heliocentric_distance_au: f64,
    /// "distant" or "orbiter".
    pub geometry: String,
    /// Phase angle, deg (distant only).
    pub phase_angle_deg: Option<f64>,
    /// Slit position angle from projected north towards the image's right, deg.
    pub slit_position_angle_deg: Option<f64>,
    /// The slit or scan samples.
    pub samples: Vec<Sample>,
    /// Brightest sample, rayleigh.
    pub peak_brightness_r: f64,
    /// Top of the run's density field, the outer boundary of its domain,
    /// km above the mean radius: every line of sight is integrated up to it.
    pub field_top_altitude_km: f64,
    /// Atoms in the run's whole density field (its time average), atoms.
    pub field_content_atoms: f64,
    /// Of those, the fraction in the disk image's lines of sight
    /// (distant view): atoms outside the image's field of view and behind
    /// the body are not in it, dimensionless.
    pub image_content_fraction: Option<f64>,
    /// Angular scale of the image, arcsec per km on the sky plane, if the
    /// view gives the observer's distance.
    pub arcsec_per_km: Option<f64>,
    /// What the reader should know about these lines of sight.
    pub notes: Vec<String>,
    /// A reminder of what the numbers are.
    pub caution: String,
}

/// Width over height of the image, dimensionless: about that of the map
/// figure's plotting area, so that the disk is drawn round.
pub const IMAGE_ASPECT: f64 = 1.5;

/// UDUNITS spelling of the rayleigh (1e10 photons m^-2 s^-1; photons are counted, not a
/// unit), the units of `brightness` in image.nc.
pub const RAYLEIGH_UNITS: &str = "1e10 m-2 s-1";

/// A distant observer's image: pixel centres (km on the sky plane) and columns.
#[derive(Clone, Debug)]
pub struct Image {
    /// Pixel-centre coordinates to the observer's right, km.
    pub x_km: Vec<f64>,
    /// Pixel-centre coordinates to projected north, km.
    pub y_km: Vec<f64>,
    /// Column per pixel, atoms cm^-2, row-major [y][x].
    pub column_cm2: Vec<f64>,
}

/// The mean column through a square aperture of side `aperture` (m) centred
/// at sky point `c` (m), seen along `-to_observer` from far away, and the
/// fraction of its lines of sight that end on the body.
fn distant_column(field: &DensityField, d: &Distant, c: vec3::Vec3, cuts: &mut Cuts) -> (f64, f64) {
    let far = 4.0 * field.top_radius();
    let ray_at = |p: vec3::Vec3| Ray {
        origin: vec3::add_scaled(p, d.to_observer, far),
        direction: vec3::scale(d.to_observer, -1.0),
    };
    if d.aperture <= 0.0 {
        let ray = ray_at(c);
        return (column(field, &ray, cuts), hits_surface(field, &ray) as u8 as f64);
    }
    let n = APERTURE_SUBLINES;
    let (mut sum, mut blocked) = (0.0, 0);
    for a in 0..n {
        for b in 0..n {
            let u = ((a as f64 + 0.5) / n as f64 - 0.5) * d.aperture;
            let v = ((b as f64 + 0.5) / n as f64 - 0.5) * d.aperture;
            let p = vec3::add(vec3::add_scaled(c, d.right, u), vec3::scale(d.up, v));
            let ray = ray_at(p);
            sum += column(field, &ray, cuts);
            blocked += hits_surface(field, &ray) as usize;
        }
    }
    (sum / (n * n) as f64, blocked as f64 / (n * n) as f64)
}

/// Slit samples of a distant observer: (altitude above the limb, m;
/// column, atoms cm^-2; fraction of the lines of sight ending on the body).
pub fn distant_slit(field: &DensityField, d: &Distant) -> Vec<(f64, f64, f64)> {
    let mut cuts = Cuts::default();
    let dir = vec3::add(
        vec3::scale(d.up, d.position_angle.cos()),
        vec3::scale(d.right, d.position_angle.sin()),
    );
    d.altitudes
        .iter()
        .map(|&h| {
            let c = vec3::scale(dir, field.radius + h);
            let (col, blocked) = distant_column(field, d, c, &mut cuts);
            (h, col, blocked)
        })
        .collect()
}

/// The image of a distant observer (single lines through pixel centres):
/// `image_pixels` rows over +-`image_half_width`, and [`IMAGE_ASPECT`]
/// times as many columns of square pixels.
pub fn distant_image(field: &DensityField, d: &Distant) -> Image {
    let ny = d.image_pixels;
    let w = d.image_half_width;
    let pix = 2.0 * w / ny as f64;
    let nx = (ny as f64 * IMAGE_ASPECT).round() as usize;
    let y: Vec<f64> = (0..ny).map(|i| -w + pix * (i as f64 + 0.5)).collect();
    let x: Vec<f64> = (0..nx).map(|i| -0.5 * pix * nx as f64 + pix * (i as f64 + 0.5)).collect();
    let point = Distant { aperture: 0.0, ..d.clone() };
    let mut cuts = Cuts::default();
    let mut col = Vec::with_capacity(nx * ny);
    for &b in &y {
        for &a in &x {
            let c = vec3::add(vec3::scale(d.right, a), vec3::scale(d.up, b));
            col.push(distant_column(field, &point, c, &mut cuts).0);
        }
    }
    let km = |v: Vec<f64>| v.into_iter().map(|a| a / 1e3).collect();
    Image { x_km: km(x), y_km: km(y), column_cm2: col }
}

/// Columns seen by an orbiter: (tangent altitude m or NaN, elevation deg,
/// column atoms cm^-2, 1 if the look ends on the surface else 0).
pub fn orbiter_looks(field: &DensityField, o: &Orbiter) -> Vec<(f64, f64, f64, f64)> {
    let mut cuts = Cuts::default();
    let up = vec3::normalize(o.position);
    o.looks
        .iter()
        .map(|(ht, d)| {
            let elev = vec3::dot(*d, up).clamp(-1.0, 1.0).asin().to_degrees();
            let ray = Ray { origin: o.position, direction: *d };
            let c = column(field, &ray, &mut cuts);
            (ht.unwrap_or(f64::NAN), elev, c, hits_surface(field, &ray) as u8 as f64)
        })
        .collect()
}

/// Run `observe`: read the run in `run_dir` and the view in `view_path`,
/// write the products into `out` (staged, renamed when complete).
pub fn observe(run_dir: &Path, view_path: &Path, out: &Path) -> Result<Observation, String> {
    let Prepared { field, view, species, table, g, r_au, v_km_s } = prepare(run_dir, view_path)?;
    let table = &table;
    staged(out, |dir| {
        let obs = compute_and_write(dir, &field, &view, g, table, r_au, v_km_s).map(
            |(samples, geometry, phase, pa, image_fraction)| Observation {
                run_dir: run_dir.display().to_string(),
                view_file: view_path.display().to_string(),
                species: species.clone(),
                g_factor: g,
                g_factor_origin: table.origin.clone(),
                radial_velocity_km_s: v_km_s,
                heliocentric_distance_au: r_au,
                geometry,
                phase_angle_deg: phase,
                slit_position_angle_deg: pa,
                peak_brightness_r: samples.iter().map(|s| s.brightness_r).fold(0.0, f64::max),
                field_top_altitude_km: (field.top_radius() - field.radius) / 1e3,
                field_content_atoms: field.content_atoms(),
                image_content_fraction: image_fraction,
                arcsec_per_km: arcsec_per_km(&view),
                notes: notes(&samples, &field),
                samples,
                caution: "Model output: a scientific estimate from a Monte Carlo model, not \
                          flight-operations data."
                    .into(),
            },
        )?;
        let json = serde_json::to_vec_pretty(&obs).map_err(|e| e.to_string())?;
        atomic_write(&dir.join("observation.json"), &json).map_err(|e| e.to_string())?;
        let prov = serde_json::json!({
            "engine": "exobound",
            "engine_version": env!("CARGO_PKG_VERSION"),
            "command": "observe",
            "run_dir": run_dir.display().to_string(),
            "run_provenance": std::fs::read_to_string(run_dir.join(PROVENANCE_FILE))
                .ok()
                .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok()),
            "view_file": view_path.display().to_string(),
            "view_text": std::fs::read_to_string(view_path).unwrap_or_default(),
            "g_factor_origin": table.origin,
            "g_factor_sha256": table.sha256,
        });
        let json = serde_json::to_vec_pretty(&prov).map_err(|e| e.to_string())?;
        atomic_write(&dir.join(PROVENANCE_FILE), &json).map_err(|e| e.to_string())?;
        Ok(obs)
    })
}

/// A run's density field and a view of it, with the g-factor that turns
/// columns into brightness.
struct Prepared {
    field: DensityField,
    view: View,
    species: String,
    table: GFactorTable,
    /// g-factor, photons s^-1 atom^-1.
    g: f64,
    /// Heliocentric distance, AU.
    r_au: f64,
    /// Heliocentric radial velocity, km s^-1.
    v_km_s: f64,
}

/// Read a run's field and a view file, and find the view's g-factor.
fn prepare(run_dir: &Path, view_path: &Path) -> Result<Prepared, String> {
    let nc = run_dir.join("exosphere.nc");
    if !nc.is_file() {
        return Err(format!(
            "`{}` has no exosphere.nc; give the output directory of a finished `exobound run`",
            run_dir.display()
        ));
    }
    let ds = exobound_products::read_netcdf(&nc).map_err(|e| format!("`{}`: {e}", nc.display()))?;
    let field = DensityField::from_dataset(&ds, &nc)?;
    let view = view::read(view_path, field.radius)?;
    let attr_num = |k: &str| ds.attribute(k).and_then(|a| a.as_number());
    let species = ds.attribute("species").and_then(|a| a.as_text()).unwrap_or("Na").to_string();
    let run_table = ds
        .attribute(gfactor::RUN_TABLE_ATTRIBUTE)
        .and_then(|a| a.as_text())
        .map(|t| (t, ds.attribute(gfactor::RUN_ORIGIN_ATTRIBUTE).and_then(|a| a.as_text())));
    let model = gfactor::model_for(
        &species,
        view.g_factor_table.as_deref(),
        run_table.map(|(t, o)| (t, o.unwrap_or("recorded in exosphere.nc"))),
    )
    .map_err(|e| format!("{}: {e}", view_path.display()))?;
    let r_au = view.heliocentric_distance.or(attr_num("heliocentric_distance_au")).ok_or(
        "the run records no heliocentric distance; set [brightness] heliocentric_distance",
    )?;
    let v_km_s = view
        .radial_velocity
        .map(|v| v / 1e3)
        .or(attr_num("heliocentric_radial_velocity_km_s"))
        .unwrap_or(0.0);
    let g =
        gfactor::g_at(&model, v_km_s, r_au).map_err(|e| format!("{}: {e}", view_path.display()))?;
    Ok(Prepared { field, view, species, table: model.table, g, r_au, v_km_s })
}

/// The slit (distant view) or scan (orbiter view) samples of `view_path`
/// through a finished run, without writing anything: what `fit` compares
/// with observed brightness. Each sample's `altitude_km` is its altitude
/// above the limb (distant) or its tangent altitude (orbiter).
pub fn view_samples(run_dir: &Path, view_path: &Path) -> Result<Vec<Sample>, String> {
    let Prepared { field, view, g, .. } = prepare(run_dir, view_path)?;
    let sample = |h: f64, el: f64, c: f64, blocked: f64| Sample {
        altitude_km: h / 1e3,
        elevation_deg: el,
        column_cm2: c,
        brightness_r: brightness_rayleigh(g, c),
        blocked_fraction: blocked,
    };
    Ok(match &view.geometry {
        Geometry::Distant(d) => distant_slit(&field, d)
            .into_iter()
            .map(|(h, c, blocked)| sample(h, f64::NAN, c, blocked))
            .collect(),
        Geometry::Orbiter(o) => orbiter_looks(&field, o)
            .into_iter()
            .map(|(h, el, c, blocked)| sample(h, el, c, blocked))
            .collect(),
    })
}

/// Brightness (rayleigh) that the distant observer of the view file
/// `view_path` sees through the view's aperture (single lines of sight when
/// it is 0) centred at each sky point of `points` (km to the observer's
/// right, km to projected north, from the disk centre: the axes of
/// `image.nc`), computed from the finished run `run_dir` as `observe`
/// computes its image. An orbiter's view has no sky plane and is refused.
pub fn sky_brightness(
    run_dir: &Path,
    view_path: &Path,
    points: &[(f64, f64)],
) -> Result<Vec<f64>, String> {
    let Prepared { field, view, g, .. } = prepare(run_dir, view_path)?;
    let Geometry::Distant(d) = &view.geometry else {
        return Err(format!(
            "`{}` is an orbiter's view; image points need a distant observer's view (a \
             `[distant]` section)",
            view_path.display()
        ));
    };
    let mut cuts = Cuts::default();
    Ok(points
        .iter()
        .map(|&(x_km, y_km)| {
            let c = vec3::add(vec3::scale(d.right, x_km * 1e3), vec3::scale(d.up, y_km * 1e3));
            brightness_rayleigh(g, distant_column(&field, d, c, &mut cuts).0)
        })
        .collect())
}

type Computed = (Vec<Sample>, String, Option<f64>, Option<f64>, Option<f64>);

/// Arcseconds per radian (180 x 3600 / pi).
const ARCSEC_PER_RAD: f64 = 206_264.806_247_096_36;

/// The image's angular scale, arcsec per km on the sky plane, for a
/// distant view that gives the observer's distance (small-angle
/// approximation: the body subtends well under a degree).
fn arcsec_per_km(view: &View) -> Option<f64> {
    match &view.geometry {
        Geometry::Distant(d) => d.observer_distance.map(|m| 1.0e3 / m * ARCSEC_PER_RAD),
        Geometry::Orbiter(_) => None,
    }
}

/// What a reader of `observation.json` should know about the samples.
fn notes(samples: &[Sample], field: &DensityField) -> Vec<String> {
    let mut notes = vec![format!(
        "every line of sight is integrated through the run's whole density field, up to {:.0} \
         km above the mean radius (the model's outer boundary)",
        (field.top_radius() - field.radius) / 1e3
    )];
    let cut = samples.iter().filter(|s| s.blocked_fraction > 0.0).count();
    if cut > 0 {
        notes.push(format!(
            "{cut} of {} samples have lines of sight that end on the body's surface \
             (blocked_fraction > 0): they see only the exosphere in front of it",
            samples.len()
        ));
    }
    notes
}

/// Marks drawn over a distant observer's image, in sky-plane km: the limb,
/// the visible half of the terminator, the direction to the Sun projected
/// on the sky, and a scale bar (with its angle when `arcsec_per_km` is
/// known). The Sun lies along +x of the solar-fixed frame.
fn disk_overlays(d: &Distant, radius_m: f64, arcsec_per_km: Option<f64>) -> Vec<Overlay> {
    let r = radius_m / 1e3;
    let sky = |p: vec3::Vec3| (vec3::dot(p, d.right), vec3::dot(p, d.up));
    let n = 360;
    let limb = (0..=n)
        .map(|k| {
            let t = std::f64::consts::TAU * k as f64 / n as f64;
            (r * t.cos(), r * t.sin())
        })
        .collect();
    let mut out = vec![Overlay { label: String::new(), points: limb, style: LineStyle::Solid }];
    // The terminator: the great circle at right angles to the Sun, its
    // half on the observer's side.
    let sun = [1.0, 0.0, 0.0];
    let a = [0.0, 1.0, 0.0];
    let b = [0.0, 0.0, 1.0];
    let on = |t: f64| vec3::add(vec3::scale(a, r * t.cos()), vec3::scale(b, r * t.sin()));
    let visible = |t: f64| vec3::dot(on(t), d.to_observer) >= 0.0;
    let ts: Vec<f64> = (0..n).map(|k| std::f64::consts::TAU * k as f64 / n as f64).collect();
    if let Some(start) = (0..n).find(|&k| visible(ts[k]) && !visible(ts[(k + n - 1) % n])) {
        let arc: Vec<(f64, f64)> = (0..n)
            .map(|k| ts[(start + k) % n])
            .take_while(|&t| visible(t))
            .map(|t| sky(on(t)))
            .collect();
        out.push(Overlay { label: "terminator".into(), points: arc, style: LineStyle::Dashed });
    }
    let (sx, sy) = sky(sun);
    let len = (sx * sx + sy * sy).sqrt();
    if len > 0.05 {
        let (ux, uy) = (sx / len, sy / len);
        // An arrow: the shaft, then the two barbs of its head.
        let tip = (1.6 * r * ux, 1.6 * r * uy);
        let barb = |side: f64| {
            (
                tip.0 - 0.12 * r * ux - side * 0.07 * r * uy,
                tip.1 - 0.12 * r * uy + side * 0.07 * r * ux,
            )
        };
        out.push(Overlay {
            label: "to the Sun".into(),
            points: vec![(1.15 * r * ux, 1.15 * r * uy), tip, barb(1.0), tip, barb(-1.0)],
            style: LineStyle::Solid,
        });
    }
    // A scale bar of a round length near half the radius, lower left.
    let w = d.image_half_width / 1e3;
    let bar = exobound_products::ticks::round_ticks(0.0, 0.5 * r, 2).get(1).copied().unwrap_or(r);
    let (x0, y0) = (-1.35 * w, -0.85 * w);
    let label = match arcsec_per_km {
        Some(s) => format!("{bar} km = {:.3} arcsec", bar * s),
        None => format!("{bar} km"),
    };
    out.push(Overlay { label, points: vec![(x0, y0), (x0 + bar, y0)], style: LineStyle::Solid });
    out
}

fn compute_and_write(
    dir: &Path,
    field: &DensityField,
    view: &View,
    g: f64,
    table: &GFactorTable,
    r_au: f64,
    v_km_s: f64,
) -> Result<Computed, String> {
    let plots = dir.join("plots");
    std::fs::create_dir_all(&plots).map_err(|e| e.to_string())?;
    let e = |r: Result<(), exobound_products::ProductError>| r.map_err(|e| e.to_string());
    let g_note = format!("g = {g:.3} photons/s/atom at {r_au:.3} AU, {v_km_s:.2} km/s");
    match &view.geometry {
        Geometry::Distant(d) => {
            let samples: Vec<Sample> = distant_slit(field, d)
                .into_iter()
                .map(|(h, c, blocked)| Sample {
                    altitude_km: h / 1e3,
                    elevation_deg: f64::NAN,
                    column_cm2: c,
                    brightness_r: brightness_rayleigh(g, c),
                    blocked_fraction: blocked,
                })
                .collect();
            // Header and rows only: the geometry ("distant") and the g-factor
            // are in observation.json (docs/observe.md).
            let mut csv = String::from("altitude_above_limb_km,column_cm-2,brightness_R\n");
            for s in &samples {
                csv.push_str(&number::row(&[s.altitude_km, s.column_cm2, s.brightness_r]));
            }
            atomic_write(&dir.join("brightness.csv"), csv.as_bytes()).map_err(|e| e.to_string())?;
            brightness_plot(
                format!(
                    "{}: brightness above the limb, phase {:.0} deg",
                    view.title,
                    d.phase_angle.to_degrees()
                ),
                "altitude above the limb (km)",
                &samples,
                &g_note,
                &plots.join("brightness_altitude.png"),
            )?;
            let img = distant_image(field, d);
            let edges = |c: &[f64]| -> Vec<f64> {
                let step = if c.len() > 1 { c[1] - c[0] } else { 1.0 };
                (0..=c.len()).map(|i| c[0] - 0.5 * step + step * i as f64).collect()
            };
            let bright: Vec<f64> =
                img.column_cm2.iter().map(|&c| brightness_rayleigh(g, c)).collect();
            e(draw_map(
                &MapPlot {
                    title: format!("{}: brightness image", view.title),
                    x_label: "sky offset to the observer's right (km)".into(),
                    y_label: "sky offset to projected north (km)".into(),
                    x_edges: edges(&img.x_km),
                    y_edges: edges(&img.y_km),
                    values: bright.clone(),
                    colour_label: "4 pi I (R), g-factor in observation.json".into(),
                    scale: ColourScale::Log,
                    marks: None,
                    x_log: false,
                    y_log: false,
                    x_ticks: None,
                    y_ticks: None,
                    x_tick_labels: None,
                    y_tick_labels: None,
                    overlays: disk_overlays(d, field.radius, arcsec_per_km(view)),
                },
                &plots.join("disk_image.png"),
            ))?;
            let mut ds = Dataset::new(&format!("{} (image)", view.title));
            ds.set_attribute(
                "comment",
                "Model output: a scientific estimate, not flight-operations data.",
            );
            // What made the file, without a date (reproducible; CF 1.8 section 2.6.2).
            ds.set_attribute(
                "history",
                format!(
                    "exobound {} observe: view \"{}\" of a run's exosphere.nc (no date: \
                     reproducible)",
                    env!("CARGO_PKG_VERSION"),
                    view.title
                ),
            );
            ds.set_attribute("g_factor_photons_per_s_per_atom", g);
            ds.set_attribute("g_factor_origin", table.origin.clone());
            ds.set_attribute("phase_angle_deg", d.phase_angle.to_degrees());
            ds.add_coordinate(Variable::coordinate(
                "x",
                img.x_km.clone(),
                "km",
                "sky offset towards the observer's right, north up",
            ));
            ds.add_coordinate(Variable::coordinate(
                "y",
                img.y_km.clone(),
                "km",
                "sky offset towards the projected north pole",
            ));
            ds.add_variable(
                Variable::new("column", &["y", "x"], img.column_cm2.clone(), "cm-2")
                    .with("long_name", "line-of-sight column"),
            );
            ds.add_variable(
                // 1 rayleigh = 1e10 photons m-2 s-1 column emission rate (Hunten, Roach &
                // Chamberlain 1956); "R" would read as roentgen in UDUNITS.
                Variable::new("brightness", &["y", "x"], bright, RAYLEIGH_UNITS).with(
                    "long_name",
                    "brightness 4 pi I in rayleigh (optically thin; 1 R = 1e10 photons m-2 s-1)",
                ),
            );
            exobound_products::write_netcdf(&ds, &dir.join("image.nc"))
                .map_err(|e| e.to_string())?;
            // Atoms in the image: column times pixel area, against the field.
            let pix_cm = 2.0 * d.image_half_width / d.image_pixels as f64 * 100.0;
            let seen: f64 = img.column_cm2.iter().sum::<f64>() * pix_cm * pix_cm;
            let content = field.content_atoms();
            Ok((
                samples,
                "distant".into(),
                Some(d.phase_angle.to_degrees()),
                Some(d.position_angle.to_degrees()),
                (content > 0.0).then_some(seen / content),
            ))
        }
        Geometry::Orbiter(o) => {
            let samples: Vec<Sample> = orbiter_looks(field, o)
                .into_iter()
                .map(|(h, el, c, blocked)| Sample {
                    altitude_km: h / 1e3,
                    elevation_deg: el,
                    column_cm2: c,
                    brightness_r: brightness_rayleigh(g, c),
                    blocked_fraction: blocked,
                })
                .collect();
            // Header and rows only; a nadir look has no tangent point, so
            // its tangent altitude is NaN (docs/observe.md).
            let mut csv =
                String::from("tangent_altitude_km,elevation_deg,column_cm-2,brightness_R\n");
            for s in &samples {
                csv.push_str(&number::row(&[
                    s.altitude_km,
                    s.elevation_deg,
                    s.column_cm2,
                    s.brightness_r,
                ]));
            }
            atomic_write(&dir.join("brightness.csv"), csv.as_bytes()).map_err(|e| e.to_string())?;
            if samples.len() > 1 {
                brightness_plot(
                    format!("{}: limb scan from {:.0} km", view.title, o.altitude / 1e3),
                    "tangent altitude (km)",
                    &samples,
                    &g_note,
                    &plots.join("brightness_altitude.png"),
                )?;
            }
            Ok((samples, "orbiter".into(), None, None, None))
        }
    }
}

/// Brightness (R, log axis) against the samples' altitude (km) as a PNG at `path`.
fn brightness_plot(
    title: String,
    x_label: &str,
    samples: &[Sample],
    g_note: &str,
    path: &Path,
) -> Result<(), String> {
    draw_lines(
        &LinePlot {
            title,
            x_label: x_label.into(),
            y_label: "brightness 4 pi I (R)".into(),
            lines: vec![Line {
                label: g_note.into(),
                x: samples.iter().map(|s| s.altitude_km).collect(),
                y: samples.iter().map(|s| s.brightness_r).collect(),
                y_err: None,
                style: LineStyle::Solid,
            }],
            markers: vec![],
            log_x: false,
            log_y: true,
            x_range: None,
            x_ticks: None,
        },
        path,
    )
    .map_err(|e| e.to_string())
}

/// The default output directory of `observe`: `<run_dir>-observe`.
pub fn default_out(run_dir: &Path) -> PathBuf {
    let mut s = run_dir.as_os_str().to_owned();
    s.push("-observe");
    PathBuf::from(s)
}
