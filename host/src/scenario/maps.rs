//! Surface maps: a quantity given on a regular latitude-longitude grid in
//! a small CSV layout of our own, resampled onto the run's surface grid.
//!
//! Why this exists: composition (the bulk abundance of the species) and the
//! initial adsorbed reservoir vary over the surface, and users bring them
//! from their own analyses at their own resolution. The layout is
//!
//! ```text
//! # exobound surface map
//! # quantity: bulk_abundance
//! # unit: 1
//! latitude_deg,longitude_deg,value
//! -85,5,1.0
//! ...
//! ```
//!
//! Lines starting with `#` are comments, except the `quantity:` and `unit:`
//! declarations, which must match what the scenario key expects. The
//! points must form a complete regular grid (every latitude with every
//! longitude) with east longitudes in [0, 360). The map is resampled by
//! bilinear interpolation, periodic in longitude and held constant beyond
//! the outermost latitudes.

use std::fmt::Write as _;

/// A parsed map on its own regular grid.
#[derive(Clone, Debug, PartialEq)]
pub struct SurfaceMap {
    /// Quantity declared in the file.
    pub quantity: String,
    /// Unit declared in the file.
    pub unit: String,
    /// Latitudes of the rows, deg, increasing.
    pub latitudes: Vec<f64>,
    /// East longitudes of the columns, deg, increasing in [0, 360).
    pub longitudes: Vec<f64>,
    /// Values, row-major `[lat][lon]`, in `unit`.
    pub values: Vec<f64>,
}

/// Parse a map's text; `origin` names the file in messages. `quantity` and
/// `unit` are what the caller expects the file to declare.
pub fn parse(text: &str, origin: &str, quantity: &str, unit: &str) -> Result<SurfaceMap, String> {
    let mut declared_q = None;
    let mut declared_u = None;
    let mut header_seen = false;
    let mut points: Vec<(f64, f64, f64)> = Vec::new();
    for (n, line) in text.lines().enumerate() {
        let line_no = n + 1;
        let t = line.trim();
        if t.is_empty() {
            continue;
        }
        if let Some(c) = t.strip_prefix('#') {
            let c = c.trim();
            if let Some(q) = c.strip_prefix("quantity:") {
                declared_q = Some(q.trim().to_string());
            } else if let Some(u) = c.strip_prefix("unit:") {
                declared_u = Some(u.trim().to_string());
            }
            continue;
        }
        if !header_seen {
            let cols: Vec<&str> = t.split(',').map(str::trim).collect();
            if cols != ["latitude_deg", "longitude_deg", "value"] {
                return Err(format!(
                    "{origin}: line {line_no}: expected the header `latitude_deg,longitude_deg,value`, found `{t}`"
                ));
            }
            header_seen = true;
            continue;
        }
        let fields: Vec<&str> = t.split(',').map(str::trim).collect();
        if fields.len() != 3 {
            return Err(format!(
                "{origin}: line {line_no}: expected 3 comma-separated numbers, found {}",
                fields.len()
            ));
        }
        let mut xs = [0.0; 3];
        for (x, f) in xs.iter_mut().zip(&fields) {
            *x =
                f.parse::<f64>().ok().filter(|v| v.is_finite()).ok_or_else(|| {
                    format!("{origin}: line {line_no}: `{f}` is not a finite number")
                })?;
        }
        let [lat, lon, v] = xs;
        if !(-90.0..=90.0).contains(&lat) {
            return Err(format!(
                "{origin}: line {line_no}: latitude {lat} deg is outside [-90, 90]"
            ));
        }
        if !(0.0..360.0).contains(&lon) {
            return Err(format!(
                "{origin}: line {line_no}: longitude {lon} deg is outside [0, 360) (use east longitudes)"
            ));
        }
        if v < 0.0 {
            return Err(format!("{origin}: line {line_no}: value {v} is negative"));
        }
        points.push((lat, lon, v));
    }
    let declared_q = declared_q
        .ok_or_else(|| format!("{origin}: missing the `# quantity: {quantity}` declaration"))?;
    if declared_q != quantity {
        return Err(format!(
            "{origin}: declares quantity `{declared_q}`, but this key needs `{quantity}`"
        ));
    }
    let declared_u =
        declared_u.ok_or_else(|| format!("{origin}: missing the `# unit: {unit}` declaration"))?;
    if declared_u != unit {
        return Err(format!("{origin}: declares unit `{declared_u}`, but this key needs `{unit}`"));
    }
    if points.is_empty() {
        return Err(format!("{origin}: no data lines"));
    }
    let axis = |pick: fn(&(f64, f64, f64)) -> f64| {
        let mut v: Vec<f64> = points.iter().map(pick).collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    };
    let latitudes = axis(|p| p.0);
    let longitudes = axis(|p| p.1);
    let (nl, nm) = (latitudes.len(), longitudes.len());
    let mut values = vec![f64::NAN; nl * nm];
    for &(lat, lon, v) in &points {
        let i = latitudes.partition_point(|&x| x < lat);
        let j = longitudes.partition_point(|&x| x < lon);
        let slot = &mut values[i * nm + j];
        if !slot.is_nan() {
            return Err(format!("{origin}: the point ({lat}, {lon}) appears twice"));
        }
        *slot = v;
    }
    if let Some(k) = values.iter().position(|v| v.is_nan()) {
        let mut msg = String::new();
        let _ = write!(
            msg,
            "{origin}: the points do not form a complete grid: ({}, {}) is missing ({} latitudes x {} longitudes expected)",
            latitudes[k / nm],
            longitudes[k % nm],
            nl,
            nm
        );
        return Err(msg);
    }
    Ok(SurfaceMap { quantity: declared_q, unit: declared_u, latitudes, longitudes, values })
}

impl SurfaceMap {
    /// The map at latitude `lat_deg` and east longitude `lon_deg` (deg),
    /// bilinear, periodic in longitude, constant beyond the outer rows.
    pub fn at(&self, lat_deg: f64, lon_deg: f64) -> f64 {
        let (lats, lons) = (&self.latitudes, &self.longitudes);
        let nm = lons.len();
        let (i0, i1, fy) = bracket(lats, lat_deg);
        // Longitude: periodic; between the last column and the first + 360.
        let lon = lon_deg.rem_euclid(360.0);
        let (j0, j1, fx) = if nm == 1 {
            (0, 0, 0.0)
        } else {
            let j = lons.partition_point(|&x| x <= lon);
            // Before the first column or after the last: between the last and the first + 360.
            let (a, b) = if j == 0 || j == nm { (nm - 1, 0) } else { (j - 1, j) };
            let (xa, mut xb) = (lons[a], lons[b]);
            if xb <= xa {
                xb += 360.0;
            }
            let mut x = lon;
            if x < xa {
                x += 360.0;
            }
            (a, b, ((x - xa) / (xb - xa)).clamp(0.0, 1.0))
        };
        let v = |i: usize, j: usize| self.values[i * nm + j];
        let lo = v(i0, j0) * (1.0 - fx) + v(i0, j1) * fx;
        let hi = v(i1, j0) * (1.0 - fx) + v(i1, j1) * fx;
        lo * (1.0 - fy) + hi * fy
    }
}

/// Indices and weight of `x` between the entries of increasing `xs`, clamped.
fn bracket(xs: &[f64], x: f64) -> (usize, usize, f64) {
    let n = xs.len();
    if n == 1 || x <= xs[0] {
        return (0, 0, 0.0);
    }
    if x >= xs[n - 1] {
        return (n - 1, n - 1, 0.0);
    }
    let j = xs.partition_point(|&v| v <= x);
    (j - 1, j, (x - xs[j - 1]) / (xs[j] - xs[j - 1]))
}

/// Write `values` (row-major `[lat][lon]` at the given axes, deg) as a map file.
pub fn render(
    quantity: &str,
    unit: &str,
    comment: &str,
    latitudes: &[f64],
    longitudes: &[f64],
    values: &[f64],
) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# exobound surface map");
    for line in comment.lines() {
        let _ = writeln!(s, "# {line}");
    }
    let _ = writeln!(s, "# quantity: {quantity}");
    let _ = writeln!(s, "# unit: {unit}");
    let _ = writeln!(s, "latitude_deg,longitude_deg,value");
    for (i, lat) in latitudes.iter().enumerate() {
        for (j, lon) in longitudes.iter().enumerate() {
            let _ = writeln!(s, "{lat},{lon},{}", values[i * longitudes.len() + j]);
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(rows: &str) -> String {
        format!("# quantity: q\n# unit: 1\nlatitude_deg,longitude_deg,value\n{rows}")
    }

    #[test]
    fn bilinear_and_periodic() {
        let m = parse(&text("-45,0,0\n-45,180,2\n45,0,4\n45,180,6\n"), "m.csv", "q", "1").unwrap();
        assert_eq!(m.at(-45.0, 0.0), 0.0);
        assert_eq!(m.at(45.0, 180.0), 6.0);
        assert_eq!(m.at(0.0, 90.0), 3.0); // centre of the four corners
        assert_eq!(m.at(-45.0, 270.0), 1.0); // half way from 180 to 360 = 0
        assert_eq!(m.at(80.0, 0.0), 4.0); // held beyond the last row
        assert_eq!(m.at(-45.0, -90.0), 1.0); // -90 deg east = 270 deg east
    }

    #[test]
    fn refusals_name_the_file_and_line() {
        let e = parse(&text("0,0,1\n0,x,2\n"), "m.csv", "q", "1").unwrap_err();
        assert!(e.contains("m.csv: line 5") && e.contains("`x`"), "{e}");
        let e = parse(&text("0,0,1\n0,90,2\n10,0,3\n"), "m.csv", "q", "1").unwrap_err();
        assert!(e.contains("complete grid") && e.contains("(10, 90)"), "{e}");
        let e = parse(&text("0,0,1\n"), "m.csv", "q", "cm^-2").unwrap_err();
        assert!(e.contains("unit `1`") && e.contains("needs `cm^-2`"), "{e}");
        let e = parse(&text("0,400,1\n"), "m.csv", "q", "1").unwrap_err();
        assert!(e.contains("outside [0, 360)"), "{e}");
        let e = parse("0,0,1\n", "m.csv", "q", "1").unwrap_err();
        assert!(e.contains("header"), "{e}");
    }

    #[test]
    fn render_round_trips() {
        let (lats, lons) = ([-30.0, 30.0], [0.0, 120.0, 240.0]);
        let vals = [1.0, 2.0, 3.0, 4.0, 5.0, 6.5];
        let t = render("q", "1", "test map", &lats, &lons, &vals);
        let m = parse(&t, "r.csv", "q", "1").unwrap();
        assert_eq!(m.values, vals);
        assert_eq!(m.latitudes, lats);
        assert_eq!(m.longitudes, lons);
    }
}
