//! `exosphere.nc`: the run's fields as a CF-convention NetCDF dataset.
//!
//! Why this exists: modellers load results into xarray, Panoply or their
//! own codes, and CF checkers (the IOOS compliance-checker) vet them. The
//! dataset holds density, column, the surface maps and the per-window time
//! series, with units on every variable and the provenance in the global
//! attributes. The writing itself is in the `exobound-products` crate; this
//! module only assembles the dataset.
//!
//! Conventions (CF Conventions 1.8; keep to them when adding a variable):
//! - Dimension order (section 2.4): dimensions without a CF axis first
//!   (`local_time`), then T (`window_end`), Z (`altitude`), Y (`latitude`,
//!   `cell_latitude`), X (`cell_longitude`). So atmosphere fields are
//!   [`ATMOSPHERE_DIMS`] (local_time, altitude, latitude), column maps
//!   [`COLUMN_DIMS`], surface maps [`SURFACE_DIMS`] (cell_latitude,
//!   cell_longitude), window series (window_end), and a per-window field
//!   (local_time, window_end, altitude, latitude). [`atmosphere`] and
//!   [`surface`] turn the layouts of [`Fields`] into these.
//! - Every coordinate has a boundary variable `<name>_bounds` (name, bound)
//!   without `units` (section 7.1); `time` and `window_end` too.
//! - Run averages (after the spin-up) have `coordinates = "time"`, a scalar
//!   time coordinate at the middle of the averaged interval whose bounds are
//!   that interval, and a `cell_methods` ending in [`RUN_MEAN`] (sections
//!   5.7, 7.3). Window series say `window_end: mean` (window means),
//!   `window_end: sum` (totals over the window) or `window_end: point`
//!   (values at the window end).
//! - Surface maps have `cell_measures = "area: cell_area"` (section 7.2)
//!   and `area: mean` in `cell_methods`.
//! - Times are [`TIME_UNITS`]: the reference date labels the simulation
//!   start (runs have no calendar date); see [`TIME_COMMENT`].
//! - Units must mean the same to UDUNITS and xarray: local times (hours on
//!   a 24-hour solar clock, not durations) are `1`, never `hours`, which
//!   xarray decodes as a duration; rayleigh is `1e10 m-2 s-1`.

use exobound_products::{Dataset, Variable, swap_outer_axes};

use super::fields::Fields;
use super::provenance::Provenance;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;

/// CF time units of every time in the file, seconds after the reference date, which stands
/// for the simulation start (t = 0 s).
pub const TIME_UNITS: &str = "seconds since 2000-01-01 00:00:00";

/// The calendar of [`TIME_UNITS`] (CF 1.8 section 4.4.1); xarray decodes it to datetime64.
pub const TIME_CALENDAR: &str = "proleptic_gregorian";

/// The `comment` on time coordinates: what the reference date means.
pub const TIME_COMMENT: &str = "the reference date 2000-01-01 00:00:00 labels the simulation \
                                start (t = 0 s); exobound runs have no calendar date, so read \
                                times as simulated seconds since the start";

/// Dimensions of an atmosphere field, n(local_time, altitude, latitude).
pub const ATMOSPHERE_DIMS: [&str; 3] = ["local_time", "altitude", "latitude"];

/// Dimensions of a map over local time and latitude (the column).
pub const COLUMN_DIMS: [&str; 2] = ["local_time", "latitude"];

/// Dimensions of a surface map, (cell_latitude, cell_longitude).
pub const SURFACE_DIMS: [&str; 2] = ["cell_latitude", "cell_longitude"];

/// Dimension (and time coordinate) of the per-window series.
pub const WINDOW_DIM: &str = "window_end";

/// The cell method of a run average over the averaged interval (the `time` bounds).
pub const RUN_MEAN: &str = "time: mean";

/// Name of the boundary (vertex) dimension, length 2.
pub const BOUND_DIM: &str = "bound";

/// Adds coordinate `coord` with its boundary variable `<name>_bounds(name, bound)` holding
/// each cell's lower and upper edge from `edges` (one more than the cells, in the units of
/// `coord`), CF 1.8 section 7.1.
fn add_axis(ds: &mut Dataset, coord: Variable, edges: &[f64]) {
    let bounds_name = format!("{}_bounds", coord.name);
    let dims = [coord.name.clone(), BOUND_DIM.to_string()];
    ds.add_coordinate(coord.with("bounds", bounds_name.as_str()));
    ds.add_variable(bounds_variable(&bounds_name, &[&dims[0], &dims[1]], edge_pairs(edges)));
}

/// Consecutive pairs of `edges` flattened: [e0, e1, e1, e2, ...].
fn edge_pairs(edges: &[f64]) -> Vec<f64> {
    edges.windows(2).flat_map(|w| [w[0], w[1]]).collect()
}

/// A boundary variable: no `units` (it takes its parent's, CF 1.8 section 7.1).
fn bounds_variable(name: &str, dims: &[&str], data: Vec<f64>) -> Variable {
    let mut v = Variable::new(name, dims, data, "1");
    v.attributes.clear();
    v
}

/// An atmosphere field from the [`Fields`] layout (altitude, local_time, latitude) with
/// `n_alt` x `n_lt` x `n_lat` values, in [`ATMOSPHERE_DIMS`] order, with `units`.
pub fn atmosphere(
    name: &str,
    data: &[f64],
    (n_alt, n_lt, n_lat): (usize, usize, usize),
    units: &str,
) -> Variable {
    Variable::new(name, &ATMOSPHERE_DIMS, swap_outer_axes(data, n_alt, n_lt, n_lat), units)
}

/// A surface map from the [`Fields`] layout (cell_longitude, cell_latitude) with `n_lon` x
/// `n_lat` values, in [`SURFACE_DIMS`] order, with `units` and the cell area as its measure.
pub fn surface(name: &str, data: &[f64], (n_lon, n_lat): (usize, usize), units: &str) -> Variable {
    Variable::new(name, &SURFACE_DIMS, swap_outer_axes(data, n_lon, n_lat, 1), units)
        .with("cell_measures", "area: cell_area")
}

/// The `history` global attribute: what made the file, without a date so that reruns give
/// the same bytes (CF 1.8 section 2.6.2).
pub fn history(prov: &Provenance) -> String {
    let kept = result_overrides(prov);
    let overrides = if kept.is_empty() {
        "no overrides".to_string()
    } else {
        format!("overrides {}", kept.join("; "))
    };
    format!(
        "exobound {} run: scenario {}, seed {}, {overrides} (no date: runs are reproducible)",
        prov.engine_version, prov.scenario_origin, prov.seed
    )
}

/// The overrides that can change results. The thread count, the checkpoint interval and the
/// sandbox limits never do, so they are left out (a run resumed with other values must give
/// the same file); provenance.json keeps every override as given.
fn result_overrides(prov: &Provenance) -> Vec<&str> {
    prov.overrides
        .iter()
        .map(String::as_str)
        .filter(|o| {
            let o = o.trim_start();
            !o.starts_with("run.threads")
                && !o.starts_with("run.checkpoint_every")
                && !o.starts_with("sandbox.")
        })
        .collect()
}

/// The dataset of a finished run.
pub fn dataset(
    scenario: &Scenario,
    sim: &Simulation,
    record: &RunRecord,
    prov: &Provenance,
) -> Dataset {
    let f = Fields::of(scenario, sim, record);
    let mut ds = Dataset::new(&scenario.title);
    ds.set_attribute("institution", "exobound user run");
    ds.set_attribute(
        "source",
        format!("exobound {} (process ABI {})", prov.engine_version, prov.abi_version),
    );
    ds.set_attribute("history", history(prov));
    ds.set_attribute("comment", prov.caution.clone());
    ds.set_attribute("body", scenario.model.body.name.clone());
    ds.set_attribute("species", scenario.model.species.name.clone());
    // The g-factor table the run used (radiation pressure), which `observe`
    // then uses for this run's brightness unless its view gives one.
    let g_table = &scenario.model.species.g_factors.table;
    ds.set_attribute(crate::observe::gfactor::RUN_ORIGIN_ATTRIBUTE, g_table.origin.clone());
    ds.set_attribute(crate::observe::gfactor::RUN_TABLE_ATTRIBUTE, g_table.to_text());
    ds.set_attribute("seed", scenario.config.seed as f64);
    ds.set_attribute("estimator", crate::tally::DensityTally::ESTIMATOR);
    // Geometry and illumination that lines of sight (`exobound observe`) need.
    let body = &sim.model().body;
    ds.set_attribute("body_radius_km", body.radius / 1e3);
    ds.set_attribute("heliocentric_distance_au", body.orbit.distance_au(sim.time()));
    ds.set_attribute(
        "heliocentric_radial_velocity_km_s",
        body.orbit.radial_velocity(sim.time()) / 1e3,
    );
    ds.set_attribute("scenario_origin", prov.scenario_origin.clone());
    ds.set_attribute("overrides", result_overrides(prov).join("; "));
    let modules: Vec<String> = prov
        .modules
        .iter()
        .map(|m| {
            let unlocked = if m.unlocked { " unlocked" } else { "" };
            format!("{}@{} ({}) sha256:{}{unlocked}", m.name, m.version, m.role, m.sha256)
        })
        .collect();
    ds.set_attribute("modules", modules.join("; "));
    ds.set_attribute(
        "averaging",
        format!(
            "fields averaged over {} windows after a spin-up of {} s",
            f.windows,
            scenario.plan.spin_up_steps as f64 * scenario.config.dt
        ),
    );

    let (n_alt, n_lt, n_lat) = (f.altitude_km.len(), f.local_time_h.len(), f.latitude_deg.len());
    let (gm, gl) = (f.grid_longitude_deg.len(), f.grid_latitude_deg.len());
    ds.add_dimension(BOUND_DIM, 2);
    add_axis(
        &mut ds,
        Variable::coordinate(
            "local_time",
            f.local_time_h.clone(),
            "1",
            "local solar time in hours of a 24-hour solar day (12 = subsolar meridian, 6 = \
             dawn terminator); a clock reading, not a duration",
        ),
        &f.local_time_edges_h,
    );
    add_axis(
        &mut ds,
        Variable::coordinate(
            "altitude",
            f.altitude_km.clone(),
            "km",
            "altitude above the mean radius (bin centre)",
        )
        .with("standard_name", "altitude")
        .with("positive", "up")
        .with("axis", "Z"),
        &f.altitude_edges_km,
    );
    add_axis(
        &mut ds,
        Variable::coordinate(
            "latitude",
            f.latitude_deg.clone(),
            "degrees_north",
            "latitude (tally bin centre)",
        )
        .with("standard_name", "latitude"),
        &f.latitude_edges_deg,
    );
    add_axis(
        &mut ds,
        Variable::coordinate(
            "cell_latitude",
            f.grid_latitude_deg.clone(),
            "degrees_north",
            "latitude of surface cells",
        )
        .with("standard_name", "latitude"),
        &f.grid_latitude_edges_deg,
    );
    add_axis(
        &mut ds,
        Variable::coordinate(
            "cell_longitude",
            f.grid_longitude_deg.clone(),
            "degrees_east",
            "body-fixed east longitude of surface cells",
        )
        .with("standard_name", "longitude"),
        &f.grid_longitude_edges_deg,
    );
    let time_coordinate = |name: &str, data: Vec<f64>, long: &str| {
        let dims: &[&str] = if name == WINDOW_DIM { &[WINDOW_DIM] } else { &[] };
        Variable::new(name, dims, data, TIME_UNITS)
            .with("long_name", long)
            .with("standard_name", "time")
            .with("calendar", TIME_CALENDAR)
            .with("comment", TIME_COMMENT)
            .with("bounds", format!("{name}_bounds"))
    };
    ds.add_coordinate(time_coordinate(
        WINDOW_DIM,
        record.windows.iter().map(|w| w.end).collect(),
        "simulated time at the end of each averaging window (bounds: the window)",
    ));
    ds.add_variable(bounds_variable(
        "window_end_bounds",
        &[WINDOW_DIM, BOUND_DIM],
        record.windows.iter().flat_map(|w| [w.start, w.end]).collect(),
    ));
    // The averaged interval: from the first window after the spin-up to the run end.
    let t_end = record.windows.last().map_or(0.0, |w| w.end);
    let t_start = record.windows.iter().find(|w| !w.spin_up).map_or(t_end, |w| w.start);
    ds.add_variable(time_coordinate(
        "time",
        vec![0.5 * (t_start + t_end)],
        "middle of the interval the run averages cover (bounds: spin-up end to run end)",
    ));
    ds.add_variable(bounds_variable("time_bounds", &[BOUND_DIM], vec![t_start, t_end]));
    let area: Vec<f64> =
        f.grid_row_area_m2.iter().flat_map(|&a| std::iter::repeat_n(a, gm)).collect();
    ds.add_variable(
        Variable::new("cell_area", &SURFACE_DIMS, area, "m2")
            .with("standard_name", "cell_area")
            .with("long_name", "area of each surface cell on the sphere of the mean radius"),
    );

    let sp = &scenario.model.species.name;
    ds.add_variable(
        atmosphere("density", &f.density, (n_alt, n_lt, n_lat), "cm-3")
            .with("long_name", format!("{sp} number density, run average after spin-up"))
            .with("coordinates", "time")
            .with("cell_methods", format!("local_time: altitude: latitude: mean {RUN_MEAN}")),
    );
    ds.add_variable(
        Variable::new("column", &COLUMN_DIMS, f.column.clone(), "cm-2")
            .with("long_name", format!("{sp} vertical column density, run average after spin-up"))
            .with("coordinates", "time")
            .with("cell_methods", format!("local_time: latitude: mean {RUN_MEAN}")),
    );
    let shape = (gm, gl);
    ds.add_variable(
        surface("reservoir", &f.reservoir, shape, "cm-2")
            .with("long_name", format!("adsorbed {sp} surface density at the end of the run"))
            .with("cell_methods", "area: mean"),
    );
    ds.add_variable(
        surface("bulk_abundance", &f.bulk_abundance, shape, "1")
            .with("long_name", "bulk abundance relative to nominal regolith at the end of the run")
            .with("cell_methods", "area: mean"),
    );
    let run_mean_map = |name: &str, data: &[f64], long: String| {
        surface(name, data, shape, "cm-2 s-1")
            .with("long_name", long)
            .with("coordinates", "time")
            .with("cell_methods", format!("area: mean {RUN_MEAN}"))
    };
    ds.add_variable(run_mean_map(
        "source_flux",
        &f.source_flux,
        format!("{sp} released from the surface, all sources, run average"),
    ));
    ds.add_variable(run_mean_map(
        "stick_flux",
        &f.stick_flux,
        format!("{sp} sticking to the surface, run average"),
    ));
    ds.add_variable(run_mean_map(
        "loss_flux",
        &f.loss_flux,
        format!("{sp} lost in flight above each cell, run average"),
    ));

    // Per-window series: (name, units, cell method over the window or "" for none, long
    // name, value). Local times are "1" (see the conventions above).
    type Pick = fn(&crate::driver::WindowRecord) -> f64;
    let series: [(&str, &str, &str, &str, Pick); 13] = [
        ("atoms_in_flight", "1", "mean", "atoms in flight, window mean", |w| w.content),
        (
            "sunlit_atoms_in_flight",
            "1",
            "mean",
            "atoms in flight and in sunlight, window mean",
            |w| w.sunlit_content,
        ),
        ("adsorbed_total", "1", "point", "atoms adsorbed at the window end", |w| w.adsorbed),
        ("released", "1", "sum", "atoms released in the window", |w| w.released),
        ("supplied", "1", "sum", "atoms supplied from the bulk in the window", |w| w.supplied),
        ("escaped", "1", "sum", "atoms that escaped (left on unbound paths) in the window", |w| {
            w.escaped
        }),
        (
            "left_bound",
            "1",
            "sum",
            "atoms that left through the outer boundary on bound paths in the window",
            |w| w.left_bound,
        ),
        ("lost_in_flight", "1", "sum", "atoms lost in flight in the window", |w| w.lost_in_flight),
        ("stuck", "1", "sum", "atoms stuck in the window", |w| w.stuck),
        (
            "peak_local_time",
            "1",
            "",
            "local solar time (hours, 12 = subsolar) of the peak of the window-mean equatorial \
             column",
            |w| w.peak_local_time,
        ),
        (
            "peak_shift",
            "degrees",
            "",
            "shift of the equatorial column peak from the subsolar point (negative = dawn)",
            |w| w.shift_deg,
        ),
        (
            "dayside_near_surface_density",
            "cm-3",
            "mean",
            "lowest-bin density, 6-18 h, |lat| < 30 deg, window mean",
            |w| w.dayside_near_surface,
        ),
        ("spin_up", "1", "", "1 for spin-up windows, else 0", |w| f64::from(u8::from(w.spin_up))),
    ];
    for (name, units, method, long, pick) in series {
        let data: Vec<f64> = record.windows.iter().map(pick).collect();
        let mut v = Variable::new(name, &[WINDOW_DIM], data, units).with("long_name", long);
        if !method.is_empty() {
            v = v.with("cell_methods", format!("{WINDOW_DIM}: {method}"));
        }
        ds.add_variable(v);
    }
    // The column and the near-surface density of each window, for the
    // exosphere's change with phase or season: (local_time, window_end,
    // latitude), the conventions' per-window order.
    let n_w = record.windows.len();
    let per_window =
        |pick: &dyn Fn(&crate::driver::WindowRecord) -> &Vec<f64>| -> Option<Vec<f64>> {
            if record.windows.iter().any(|w| pick(w).len() != n_lt * n_lat) {
                return None;
            }
            let mut out = Vec::with_capacity(n_lt * n_w * n_lat);
            for i in 0..n_lt {
                for w in &record.windows {
                    out.extend_from_slice(&pick(w)[i * n_lat..(i + 1) * n_lat]);
                }
            }
            Some(out)
        };
    let window_dims = ["local_time", WINDOW_DIM, "latitude"];
    if let Some(data) = per_window(&|w| &w.column) {
        ds.add_variable(
            Variable::new("column_by_window", &window_dims, data, "cm-2")
                .with("long_name", format!("{sp} vertical column density, each window's mean"))
                .with("cell_methods", format!("local_time: latitude: mean {WINDOW_DIM}: mean")),
        );
    }
    if let Some(data) = per_window(&|w| &w.near_surface_density) {
        ds.add_variable(
            Variable::new("near_surface_density_by_window", &window_dims, data, "cm-3")
                .with(
                    "long_name",
                    format!(
                        "{sp} number density in the lowest altitude bin ({} to {} km), each \
                         window's mean",
                        f.altitude_edges_km[0], f.altitude_edges_km[1]
                    ),
                )
                .with("cell_methods", format!("local_time: latitude: mean {WINDOW_DIM}: mean")),
        );
    }
    // The exosphere by the source module that released each atom:
    // (source, local_time, altitude, latitude); the parts add up to the
    // totals. `source` has no coordinate variable: the names are in the
    // `sources` attribute, in order.
    let names: Vec<&str> = scenario.processes.sources.iter().map(|m| m.name()).collect();
    let a = &record.averages;
    let (by_col, by_den) = (a.column_by_source_cm2(), a.density_by_source_cm3());
    let n_src = names.len();
    if n_src > 0 && by_col.len() == n_src * n_lt * n_lat && by_den.len() == n_src * f.density.len()
    {
        ds.add_dimension("source", n_src);
        let listed = names.join(", ");
        let block = f.density.len();
        let density: Vec<f64> =
            by_den.chunks(block).flat_map(|d| swap_outer_axes(d, n_alt, n_lt, n_lat)).collect();
        let mut dims = vec!["source"];
        dims.extend(ATMOSPHERE_DIMS);
        ds.add_variable(
            Variable::new("density_by_source", &dims, density, "cm-3")
                .with("long_name", format!("{sp} number density by source module, run average"))
                .with("sources", listed.as_str())
                .with("coordinates", "time")
                .with("cell_methods", format!("local_time: altitude: latitude: mean {RUN_MEAN}")),
        );
        let mut dims = vec!["source"];
        dims.extend(COLUMN_DIMS);
        ds.add_variable(
            Variable::new("column_by_source", &dims, by_col, "cm-2")
                .with(
                    "long_name",
                    format!("{sp} vertical column density by source module, run average"),
                )
                .with("sources", listed.as_str())
                .with("coordinates", "time")
                .with("cell_methods", format!("local_time: latitude: mean {RUN_MEAN}")),
        );
    }
    // Where the body is on its orbit, at each window's middle. Angles are "degrees", not
    // degrees_east/north: these are values, not coordinates (CF 1.8 sections 4.1, 4.2).
    type Place = fn(&crate::driver::BodyPosition) -> f64;
    let orbit: [(&str, &str, &str, Place); 6] = [
        (
            "true_anomaly",
            "degrees",
            "true anomaly at the window middle (NaN at a constant distance)",
            |p| p.true_anomaly_deg,
        ),
        ("heliocentric_distance", "au", "heliocentric distance at the window middle", |p| {
            p.heliocentric_distance_au
        }),
        (
            "subsolar_longitude",
            "degrees",
            "body-fixed east longitude of the subsolar point at the window middle",
            |p| p.subsolar_longitude_deg,
        ),
        (
            "subsolar_latitude",
            "degrees",
            "latitude (north positive) of the subsolar point at the window middle",
            |p| p.subsolar_latitude_deg,
        ),
        (
            "solar_longitude",
            "degrees",
            "the Sun's orbital longitude from the northward equinox at the window middle (NaN without an obliquity)",
            |p| p.solar_longitude_deg,
        ),
        (
            "lunar_phase",
            "1",
            "fraction of the synodic month since new moon at the window middle (NaN except for the Moon)",
            |p| p.lunar_phase,
        ),
    ];
    for (name, units, long, pick) in orbit {
        let data: Vec<f64> = record.windows.iter().map(|w| pick(&w.position)).collect();
        ds.add_variable(Variable::new(name, &[WINDOW_DIM], data, units).with("long_name", long));
    }
    ds
}
