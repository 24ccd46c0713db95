//! The surface: the latitude-longitude grid, its temperature, its bulk
//! composition and the adsorbed reservoir.
//!
//! Why this exists: the surface is where atoms come from and where they
//! go back. The adsorbed pool is kept per cell as a number of atoms (not a
//! density), so that every transfer into and out of it is an exact
//! addition and the mass ledger closes to round-off.

pub mod grid;
pub mod temperature;

pub use grid::Grid;
pub use temperature::TemperatureLaw;

/// The surface reservoir and bulk composition, per cell of a [`Grid`].
#[derive(Clone, Debug, PartialEq)]
pub struct Reservoir {
    /// Adsorbed atoms in each cell, atoms (not per area).
    pub adsorbed: Vec<f64>,
    /// Bulk abundance relative to nominal regolith in each cell, dimensionless.
    pub bulk_abundance: Vec<f64>,
}

impl Reservoir {
    /// A reservoir with a uniform adsorbed surface density `density_cm2`
    /// (atoms cm^-2) and uniform nominal bulk abundance (1).
    pub fn uniform(grid: &Grid, density_cm2: f64) -> Reservoir {
        Reservoir {
            adsorbed: (0..grid.len()).map(|c| density_cm2 * grid.area_cm2(c)).collect(),
            bulk_abundance: vec![1.0; grid.len()],
        }
    }

    /// Total adsorbed atoms on the body, atoms.
    pub fn total(&self) -> f64 {
        crate::tally::ledger::compensated_sum(&self.adsorbed)
    }

    /// Adsorbed surface density of `cell`, atoms cm^-2.
    pub fn density_cm2(&self, grid: &Grid, cell: usize) -> f64 {
        self.adsorbed[cell] / grid.area_cm2(cell)
    }
}
