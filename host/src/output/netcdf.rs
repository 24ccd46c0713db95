//! `exosphere.nc`: the run's fields as a CF-convention NetCDF dataset.
//!
//! Why this exists: modellers load results into xarray, Panoply or their
//! own codes. The dataset holds density(altitude, local_time, latitude),
//! column(local_time, latitude), the surface maps over (longitude,
//! latitude) and the per-window time series, with units on every variable
//! and the provenance in the global attributes. The writing itself is in
//! the `exobound-products` crate; this module only assembles the dataset.

use exobound_products::{Dataset, Variable};

use super::fields::Fields;
use super::provenance::Provenance;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;

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
    // The thread count, the checkpoint interval and the sandbox limits never
    // change the results, so they are left out here (a run resumed with other values
    // must give the same file); provenance.json keeps every override as given.
    let overrides: Vec<&str> = prov
        .overrides
        .iter()
        .map(String::as_str)
        .filter(|o| {
            let o = o.trim_start();
            !o.starts_with("run.threads")
                && !o.starts_with("run.checkpoint_every")
                && !o.starts_with("sandbox.")
        })
        .collect();
    ds.set_attribute("overrides", overrides.join("; "));
    let modules: Vec<String> = prov
        .modules
        .iter()
        .map(|m| format!("{}@{} ({}) sha256:{}", m.name, m.version, m.role, m.sha256))
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

    ds.add_coordinate(
        Variable::coordinate(
            "altitude",
            f.altitude_km.clone(),
            "km",
            "altitude above the mean radius (bin centre)",
        )
        .with("positive", "up")
        .with("bounds", "altitude_bounds"),
    );
    ds.add_dimension("bound", 2);
    let bounds: Vec<f64> = f.altitude_edges_km.windows(2).flat_map(|w| [w[0], w[1]]).collect();
    ds.add_variable(Variable::new("altitude_bounds", &["altitude", "bound"], bounds, "km"));
    ds.add_coordinate(Variable::coordinate(
        "local_time",
        f.local_time_h.clone(),
        "hours",
        "local solar time (12 = subsolar meridian)",
    ));
    ds.add_coordinate(
        Variable::coordinate(
            "latitude",
            f.latitude_deg.clone(),
            "degrees_north",
            "latitude (tally bin centre)",
        )
        .with("standard_name", "latitude"),
    );
    ds.add_coordinate(
        Variable::coordinate(
            "cell_longitude",
            f.grid_longitude_deg.clone(),
            "degrees_east",
            "body-fixed east longitude of surface cells",
        )
        .with("standard_name", "longitude"),
    );
    ds.add_coordinate(
        Variable::coordinate(
            "cell_latitude",
            f.grid_latitude_deg.clone(),
            "degrees_north",
            "latitude of surface cells",
        )
        .with("standard_name", "latitude"),
    );
    let ends: Vec<f64> = record.windows.iter().map(|w| w.end).collect();
    ds.add_coordinate(Variable::coordinate(
        "window_end",
        ends,
        "s",
        "simulated time at the end of each averaging window, since the run start",
    ));

    let sp = &scenario.model.species.name;
    ds.add_variable(
        Variable::new(
            "density",
            &["altitude", "local_time", "latitude"],
            f.density.clone(),
            "cm-3",
        )
        .with("long_name", format!("{sp} number density, run average after spin-up")),
    );
    ds.add_variable(
        Variable::new("column", &["local_time", "latitude"], f.column.clone(), "cm-2")
            .with("long_name", format!("{sp} vertical column density, run average after spin-up")),
    );
    let surf = |name: &str, data: Vec<f64>, units: &str, long: String| {
        Variable::new(name, &["cell_longitude", "cell_latitude"], data, units)
            .with("long_name", long)
    };
    ds.add_variable(surf(
        "reservoir",
        f.reservoir.clone(),
        "cm-2",
        format!("adsorbed {sp} surface density at the end of the run"),
    ));
    ds.add_variable(surf(
        "bulk_abundance",
        f.bulk_abundance.clone(),
        "1",
        "bulk abundance relative to nominal regolith".into(),
    ));
    ds.add_variable(surf(
        "source_flux",
        f.source_flux.clone(),
        "cm-2 s-1",
        format!("{sp} released from the surface, all sources, run average"),
    ));
    ds.add_variable(surf(
        "stick_flux",
        f.stick_flux.clone(),
        "cm-2 s-1",
        format!("{sp} sticking to the surface, run average"),
    ));
    ds.add_variable(surf(
        "loss_flux",
        f.loss_flux.clone(),
        "cm-2 s-1",
        format!("{sp} lost in flight above each cell, run average"),
    ));

    type Pick = fn(&crate::driver::WindowRecord) -> f64;
    let series: [(&str, &str, &str, Pick); 13] = [
        ("content", "1", "atoms in flight, window mean", |w| w.content),
        ("sunlit_content", "1", "atoms in flight and in sunlight, window mean", |w| {
            w.sunlit_content
        }),
        ("adsorbed_total", "1", "atoms adsorbed at the window end", |w| w.adsorbed),
        ("released", "1", "atoms released in the window", |w| w.released),
        ("supplied", "1", "atoms supplied from the bulk in the window", |w| w.supplied),
        ("escaped", "1", "atoms that escaped (left on unbound paths) in the window", |w| w.escaped),
        (
            "left_bound",
            "1",
            "atoms that left through the outer boundary on bound paths in the window",
            |w| w.left_bound,
        ),
        ("lost_in_flight", "1", "atoms lost in flight in the window", |w| w.lost_in_flight),
        ("stuck", "1", "atoms stuck in the window", |w| w.stuck),
        ("peak_local_time", "hours", "local time of the equatorial column peak", |w| {
            w.peak_local_time
        }),
        (
            "peak_shift",
            "degrees",
            "shift of the equatorial column peak from the subsolar point (negative = dawn)",
            |w| w.shift_deg,
        ),
        (
            "dayside_near_surface_density",
            "cm-3",
            "lowest-bin density, 6-18 h, |lat| < 30 deg",
            |w| w.dayside_near_surface,
        ),
        ("spin_up", "1", "1 for spin-up windows, else 0", |w| f64::from(u8::from(w.spin_up))),
    ];
    for (name, units, long, pick) in series {
        let data: Vec<f64> = record.windows.iter().map(pick).collect();
        ds.add_variable(Variable::new(name, &["window_end"], data, units).with("long_name", long));
    }
    // Where the body is on its orbit, at each window's middle.
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
            "degrees_east",
            "body-fixed longitude of the subsolar point at the window middle",
            |p| p.subsolar_longitude_deg,
        ),
        (
            "subsolar_latitude",
            "degrees_north",
            "latitude of the subsolar point at the window middle",
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
        ds.add_variable(Variable::new(name, &["window_end"], data, units).with("long_name", long));
    }
    ds
}
