//! The demo scenario: the Moon's sodium exosphere over one lunation, with an
//! invented patch of sodium-enriched regolith.
//!
//! Why this exists: `exobound run` with no scenario runs it, `exobound demo
//! --write DIR` writes it out for editing, and the tests run its quick
//! preset end to end. Every number here that is not a physical constant or
//! a module default is our own choice for the demo, not a measurement: the
//! enriched patch (position, size, contrast), the initial reservoir, the
//! shielded interval and the run settings.

use super::maps;

/// Path of the invented bulk-abundance map inside a demo directory.
pub const BULK_MAP: &str = "maps/bulk-sodium.csv";

/// The demo scenario's TOML; `quick` gives the short smoke-test preset.
pub fn scenario_text(quick: bool) -> String {
    let (title, grid, run, window) = if quick {
        (
            "Demo (quick preset): lunar sodium, invented enriched patch",
            "latitude_cells = 12\nlongitude_cells = 24",
            "dt = \"900 s\"\nduration = \"1.5 d\"\nspin_up = \"6 h\"\nseed = 20261202\nparticles = 8000\nthreads = 0",
            "6 h",
        )
    } else {
        (
            "Demo: lunar sodium over one lunation, invented enriched patch",
            "latitude_cells = 18\nlongitude_cells = 36",
            "dt = \"600 s\"\nduration = \"29.53 d\"\nspin_up = \"3 d\"\nseed = 20261202\nparticles = 60000\nthreads = 0",
            "1 d",
        )
    };
    format!(
        r#"# exobound demo scenario. Invented for demonstration: the enriched patch,
# the initial reservoir, the shielded interval and the run settings are our
# own choices, not measurements. Edit freely; `docs/scenario.md` lists every key.
title = "{title}"

[body]
name = "moon"
# New moon at the start (the Sun over the far side), so full moon falls at
# day 14.8, inside the geomagnetic-tail interval below.
start_lunar_phase = 0.0

[species]
name = "sodium"

[surface]
{grid}
adsorbed = "1e11 cm^-2"
bulk_map = "{BULK_MAP}"

[surface.temperature]
subsolar = "390 K"
night = "100 K"

[environment]
heliocentric_distance = "1 AU"
solar_wind_flux = "2e8 cm^-2 s^-1"
meteoroid_factor = 1.0

# The Moon crosses the geomagnetic tail for several days around full moon;
# while inside it the solar wind does not reach the surface.
[[environment.solar_wind]]
start = "12 d"
end = "17.5 d"
factor = 0.0
note = "inside the geomagnetic tail (demo timing)"

[[processes]]
module = "standard:photon-desorption"
role = "source"

[[processes]]
module = "standard:impact-vapor"
role = "source"
[processes.parameters]
pattern = "apex"

[[processes]]
module = "standard:ion-sputter"
role = "source"

[[processes]]
module = "standard:surface-accommodation"
role = "surface-interaction"

[[processes]]
module = "standard:photoionization"
role = "loss"

[run]
{run}

[outputs]
local_time_bins = 24
latitude_bins = 18
window = "{window}"
products = ["netcdf", "csv", "plots"]
"#
    )
}

/// Latitudes and east longitudes of the demo map's grid, deg (5 deg spacing).
fn map_axes() -> (Vec<f64>, Vec<f64>) {
    let lats = (0..36).map(|i| -87.5 + 5.0 * i as f64).collect();
    let lons = (0..72).map(|j| 2.5 + 5.0 * j as f64).collect();
    (lats, lons)
}

/// The invented bulk-abundance map: nominal regolith (1) with one enriched
/// patch, a gaussian of 12 deg width and contrast 1.5 centred at 25 N,
/// 310 E, on a 5 deg grid.
pub fn bulk_map_text() -> String {
    let (lats, lons) = map_axes();
    let (lat0, lon0, width, contrast) = (25.0f64, 310.0f64, 12.0f64, 1.5);
    let mut values = Vec::with_capacity(lats.len() * lons.len());
    for &lat in &lats {
        for &lon in &lons {
            let d = great_circle_deg(lat, lon, lat0, lon0);
            let v = 1.0 + contrast * (-(d * d) / (2.0 * width * width)).exp();
            values.push((v * 1e4).round() / 1e4);
        }
    }
    maps::render(
        "bulk_abundance",
        "1",
        "Invented for the exobound demo, not a measurement: nominal regolith (1)\n\
         with one sodium-enriched patch (gaussian, 12 deg wide, +150 %) at 25 N, 310 E.",
        &lats,
        &lons,
        &values,
    )
}

/// Angular distance between two points on a sphere, deg (haversine form).
fn great_circle_deg(lat1: f64, lon1: f64, lat2: f64, lon2: f64) -> f64 {
    let (p1, p2) = (lat1.to_radians(), lat2.to_radians());
    let dp = p2 - p1;
    let dl = (lon2 - lon1).to_radians();
    let a = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    (2.0 * a.sqrt().min(1.0).asin()).to_degrees()
}

/// The text of a demo input file, by its relative path.
pub fn input(rel: &str) -> Option<String> {
    (rel == BULK_MAP).then(bulk_map_text)
}

/// Write the demo (full scenario, quick scenario and maps) into `dir`.
pub fn write(dir: &std::path::Path) -> std::io::Result<Vec<std::path::PathBuf>> {
    let mut written = Vec::new();
    std::fs::create_dir_all(dir.join("maps"))?;
    for (name, text) in [
        ("demo.toml", scenario_text(false)),
        ("demo-quick.toml", scenario_text(true)),
        (BULK_MAP, bulk_map_text()),
    ] {
        let p = dir.join(name);
        crate::output::atomic_write(&p, text.as_bytes())?;
        written.push(p);
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_demo_map_parses_and_peaks_at_the_patch() {
        let m = maps::parse(&bulk_map_text(), "demo", "bulk_abundance", "1").unwrap();
        // The grid nodes sit at cell centres (22.5 and 27.5 N, 307.5 and
        // 312.5 E around the patch), so at a node the map holds the gaussian
        // 1 + 1.5 exp(-d^2 / (2 * 12^2)) of its great-circle distance d,
        // rounded to 1e-4.
        let node = |lat: f64, lon: f64| {
            let d = great_circle_deg(lat, lon, 25.0, 310.0);
            1.0 + 1.5 * (-(d * d) / (2.0 * 144.0)).exp()
        };
        for (lat, lon) in [(27.5, 312.5), (22.5, 307.5), (-87.5, 2.5)] {
            assert!((m.at(lat, lon) - node(lat, lon)).abs() <= 0.5e-4, "{lat} {lon}");
        }
        // Between the four nodes around the patch centre, bilinear
        // interpolation returns a value among theirs, below the true peak.
        let centre = m.at(25.0, 310.0);
        assert!(centre > 2.4 && centre < 2.5, "{centre}");
        assert!((m.at(-60.0, 100.0) - 1.0).abs() < 1e-3);
    }

    #[test]
    fn haversine_worked_values() {
        // A quarter of a great circle along the equator, and pole to equator.
        assert!((great_circle_deg(0.0, 0.0, 0.0, 90.0) - 90.0).abs() < 1e-12);
        assert!((great_circle_deg(90.0, 0.0, 0.0, 45.0) - 90.0).abs() < 1e-12);
    }

    #[test]
    fn both_presets_parse() {
        for quick in [false, true] {
            let f: super::super::ScenarioFile = toml::from_str(&scenario_text(quick)).unwrap();
            assert_eq!(f.processes.len(), 5);
        }
    }
}
