//! Resonance-scattering g-factors and the brightness they give.
//!
//! Why this exists: an optically thin exosphere scatters g photons per
//! second per atom, and g depends on where the atoms sit in the solar
//! Fraunhofer line, i.e. on their heliocentric radial velocity (Doppler
//! shift), and on the solar flux (1 / r^2). The brightness of a column N is
//! 4 pi I = g N / 10^6 rayleigh. A user supplies a table measured or
//! computed for their case; a built-in sodium table, recalled from memory,
//! serves for quick looks.
//!
//! Table file (our own layout): comment lines start with `#`; the first
//! other line is the header `radial_velocity_km_s,g_photons_per_s_per_atom`
//! (the units are in the names); then one row per velocity, increasing.
//! g is given at 1 AU.

use std::path::Path;

/// Photons cm^-2 s^-1 (into 4 pi sr) per rayleigh: 1 R = 10^6 / (4 pi)
/// photons cm^-2 s^-1 sr^-1 (Hunten, Roach & Chamberlain 1956).
pub const PHOTONS_PER_RAYLEIGH: f64 = 1.0e6;

/// The header a table file must have.
pub const TABLE_HEADER: &str = "radial_velocity_km_s,g_photons_per_s_per_atom";

/// g at 1 AU against heliocentric radial velocity.
#[derive(Clone, Debug, PartialEq)]
pub struct GFactorTable {
    /// Heliocentric radial velocities, km s^-1, increasing.
    pub velocity_km_s: Vec<f64>,
    /// g-factors at 1 AU, photons s^-1 atom^-1.
    pub g_1au: Vec<f64>,
    /// Where the table came from (a file, or the built-in note).
    pub origin: String,
}

impl GFactorTable {
    /// The built-in table for sodium (D2 + D1 together). From memory: the
    /// shape of Killen, Shemansky & Mouawad (2009, ApJS 181, 351), about
    /// 0.8 photons s^-1 atom^-1 at rest at 1 AU (from memory, Killen, Shemansky
    /// & Mouawad 2009, ApJS 181, 351: D2 0.3-0.6
    /// plus D1 0.2-0.35) rising about four-fold by 10 km s^-1 as the line
    /// leaves the Fraunhofer core; symmetric in the velocity. Good to a
    /// factor of about 2: supply a table for quantitative work.
    pub fn sodium_from_memory() -> GFactorTable {
        let half = [
            (0.0, 0.80),
            (1.0, 0.85),
            (2.0, 1.00),
            (3.0, 1.25),
            (4.0, 1.55),
            (5.0, 1.90),
            (6.0, 2.20),
            (8.0, 2.70),
            (10.0, 3.10),
            (12.0, 3.40),
            (15.0, 3.60),
            (20.0, 3.70),
            (30.0, 3.80),
        ];
        let mut velocity_km_s = Vec::new();
        let mut g_1au = Vec::new();
        for &(v, g) in half.iter().rev().filter(|(v, _)| *v > 0.0) {
            velocity_km_s.push(-v);
            g_1au.push(g);
        }
        for &(v, g) in &half {
            velocity_km_s.push(v);
            g_1au.push(g);
        }
        GFactorTable {
            velocity_km_s,
            g_1au,
            origin: "built-in Na D1+D2 table, from memory (Killen, Shemansky & Mouawad 2009 \
                     shape), good to a factor of about 2"
                .into(),
        }
    }

    /// The built-in table for `species`, or an error saying to supply one.
    pub fn built_in(species: &str) -> Result<GFactorTable, String> {
        match species {
            "Na" => Ok(GFactorTable::sodium_from_memory()),
            other => Err(format!(
                "there is no built-in g-factor table for `{other}`; give one with \
                 `g_factor_table = \"FILE.csv\"` in the view's [brightness] table \
                 (header `{TABLE_HEADER}`)"
            )),
        }
    }

    /// Parse a table file's text; `file` names it in errors.
    pub fn parse(text: &str, file: &str) -> Result<GFactorTable, String> {
        let mut lines = text
            .lines()
            .enumerate()
            .map(|(i, l)| (i + 1, l.trim()))
            .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
        let Some((hl, header)) = lines.next() else {
            return Err(format!("`{file}`: empty g-factor table"));
        };
        let header: String = header.split(',').map(str::trim).collect::<Vec<_>>().join(",");
        if header != TABLE_HEADER {
            return Err(format!(
                "`{file}` line {hl}: the header is `{header}`; a g-factor table starts with \
                 `{TABLE_HEADER}` (velocity in km/s, g at 1 AU in photons s^-1 atom^-1)"
            ));
        }
        let mut velocity_km_s = Vec::new();
        let mut g_1au = Vec::new();
        for (ln, l) in lines {
            let cols: Vec<&str> = l.split(',').map(str::trim).collect();
            let num = |s: &str| s.parse::<f64>().ok().filter(|x| x.is_finite());
            let (Some(v), Some(g), 2) =
                (cols.first().and_then(|s| num(s)), cols.get(1).and_then(|s| num(s)), cols.len())
            else {
                return Err(format!(
                    "`{file}` line {ln}: expected two numbers `velocity,g`, found `{l}`"
                ));
            };
            if g < 0.0 {
                return Err(format!("`{file}` line {ln}: a g-factor cannot be negative ({g})"));
            }
            if let Some(&last) = velocity_km_s.last()
                && v <= last
            {
                return Err(format!(
                    "`{file}` line {ln}: velocities must increase ({v} after {last})"
                ));
            }
            velocity_km_s.push(v);
            g_1au.push(g);
        }
        if velocity_km_s.is_empty() {
            return Err(format!("`{file}`: the g-factor table has no rows"));
        }
        Ok(GFactorTable { velocity_km_s, g_1au, origin: format!("file {file}") })
    }

    /// Read a table file.
    pub fn read(path: &Path) -> Result<GFactorTable, String> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| format!("cannot read the g-factor table `{}`: {e}", path.display()))?;
        GFactorTable::parse(&text, &path.display().to_string())
    }

    /// g at heliocentric radial velocity `v_km_s` (km s^-1) and distance
    /// `r_au` (AU), photons s^-1 atom^-1: linear interpolation in the
    /// table, scaled by 1 / r_AU^2. A table of non-negative velocities only
    /// is read as symmetric (|v|). Outside the table is an error.
    pub fn at(&self, v_km_s: f64, r_au: f64) -> Result<f64, String> {
        let (vs, gs) = (&self.velocity_km_s, &self.g_1au);
        let v = if vs[0] >= 0.0 { v_km_s.abs() } else { v_km_s };
        let (lo, hi) = (vs[0], vs[vs.len() - 1]);
        if !(v >= lo && v <= hi) {
            return Err(format!(
                "radial velocity {v_km_s} km/s is outside the g-factor table ({lo} to {hi} \
                 km/s, {})",
                self.origin
            ));
        }
        if !(r_au > 0.0) {
            return Err(format!("heliocentric distance {r_au} AU must be positive"));
        }
        let g = if vs.len() == 1 {
            gs[0]
        } else {
            let k = vs.partition_point(|&x| x <= v).clamp(1, vs.len() - 1);
            let f = (v - vs[k - 1]) / (vs[k] - vs[k - 1]);
            gs[k - 1] + f * (gs[k] - gs[k - 1])
        };
        Ok(g / (r_au * r_au))
    }
}

/// Brightness 4 pi I, rayleigh, of an optically thin column `column_cm2`
/// (atoms cm^-2) scattering `g` photons s^-1 atom^-1: g N / 10^6.
pub fn brightness_rayleigh(g: f64, column_cm2: f64) -> f64 {
    g * column_cm2 / PHOTONS_PER_RAYLEIGH
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn rayleigh_conversion() {
        // Hunten, Roach & Chamberlain (1956): 1 R = 10^6 / (4 pi) photons
        // cm^-2 s^-1 sr^-1, so 4 pi I [R] = g N / 10^6. Worked example from
        // Hunten, Roach & Chamberlain 1956 (J. Atmos. Terr. Phys. 8), from memory:
        // 4 pi I [R] = g N / 1e6, so N = 1e11 cm^-2, g = 5 gives 5.0e5 R.
        assert!((brightness_rayleigh(5.0, 1.0e11) - 5.0e5).abs() < 1e-6);
        // One rayleigh of emission: g N = 10^6 photons cm^-2 s^-1 into 4 pi sr,
        // i.e. an intensity of 10^6 / (4 pi) per steradian.
        let per_sr = brightness_rayleigh(1.0, 1.0e6) * PHOTONS_PER_RAYLEIGH / (4.0 * PI);
        assert!((per_sr - 1.0e6 / (4.0 * PI)).abs() < 1e-6);
    }

    #[test]
    fn built_in_sodium_table_is_within_the_published_range() {
        // From memory: Killen, Shemansky & Mouawad 2009 (ApJS 181, 351) tables:
        // at rest D2 0.3-0.6 plus D1 0.2-0.35, rising 3-5x by 10 km/s.
        let t = GFactorTable::built_in("Na").unwrap();
        let g0 = t.at(0.0, 1.0).unwrap();
        assert!((0.5..=0.95).contains(&g0), "{g0}");
        let ratio = t.at(10.0, 1.0).unwrap() / g0;
        assert!((3.0..=5.0).contains(&ratio), "{ratio}");
        assert_eq!(t.at(-7.0, 1.0).unwrap(), t.at(7.0, 1.0).unwrap());
        // Solar flux falls as 1/r^2 (law): at 0.4 AU, 6.25 times more.
        assert!((t.at(3.0, 0.4).unwrap() / t.at(3.0, 1.0).unwrap() - 6.25).abs() < 1e-12);
        assert!(GFactorTable::built_in("K").unwrap_err().contains("g_factor_table"));
    }

    #[test]
    fn table_files_parse_and_refuse() {
        let t = GFactorTable::parse(
            "# made up for the test\nradial_velocity_km_s, g_photons_per_s_per_atom\n\
             -10,2\n0,1\n10,3\n",
            "t.csv",
        )
        .unwrap();
        // Linear interpolation between rows (definition).
        assert!((t.at(5.0, 1.0).unwrap() - 2.0).abs() < 1e-12);
        assert!((t.at(-5.0, 1.0).unwrap() - 1.5).abs() < 1e-12);
        assert!(t.at(11.0, 1.0).unwrap_err().contains("outside"));
        let e = GFactorTable::parse("v,g\n0,1\n", "t.csv").unwrap_err();
        assert!(e.contains("t.csv") && e.contains(TABLE_HEADER), "{e}");
        let e = GFactorTable::parse(&format!("{TABLE_HEADER}\n0,1\n0,2\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 3") && e.contains("increase"), "{e}");
        let e = GFactorTable::parse(&format!("{TABLE_HEADER}\n0,x\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 2"), "{e}");
    }
}
