//! The mass ledger: every atom supplied, moved and lost, step by step.
//!
//! Why this exists: a Monte Carlo exosphere that silently loses or creates
//! atoms is worthless. Each step books
//!
//!   supplied from the bulk = change in (in flight + adsorbed)
//!                            + each loss in flight (photoionized, ...)
//!                            + escaped + left bound + buried
//!                            + each removal from the pool,
//!
//! and the closure error, which the tests hold to round-off.

use serde::{Deserialize, Serialize};

/// One step of the ledger. Flows are atoms during the step; stocks are
/// atoms at its end.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LedgerRow {
    /// Step number, from 0.
    pub step: u64,
    /// Simulated time at the end of the step, s.
    pub time: f64,
    /// Atoms supplied from the bulk (bulk sources and reservoir supply), atoms.
    pub supplied_from_bulk: f64,
    /// Atoms released into flight by all sources, atoms.
    pub released: f64,
    /// Super-particles launched by all sources, dimensionless.
    pub launched: u64,
    /// Of `released`, atoms taken from the adsorbed pool, atoms.
    pub released_from_adsorbed: f64,
    /// Atoms that reached the surface, atoms.
    pub landed: f64,
    /// Super-particle landings (ballistic hops completed), dimensionless.
    pub hops: u64,
    /// Atoms that stuck to the surface, atoms.
    pub stuck: f64,
    /// Atoms re-emitted at landing, atoms.
    pub bounced: f64,
    /// Atoms that escaped: they left through the outer boundary on an
    /// unbound path (two-body energy >= 0 there), or, with the
    /// remove-at-launch shortcut, were launched on an unbound path that
    /// misses the surface, atoms.
    pub escaped: f64,
    /// Atoms that left through the outer boundary on a bound path (their
    /// apocentre lies beyond it): a loss to the model's domain, not escape
    /// from the body, atoms.
    #[serde(default)]
    pub left_bound: f64,
    /// Atoms lost at the surface (buried, cold-trapped), atoms.
    pub buried: f64,
    /// Atoms removed in flight, one entry per loss module, atoms.
    pub losses: Vec<f64>,
    /// Atoms removed from the adsorbed pool, one entry per reservoir module, atoms.
    pub removed: Vec<f64>,
    /// Net atoms taken out of flight by the particle budget's Russian
    /// roulette: the weight of the particles it ended minus the weight it
    /// added to the survivors. Zero in expectation (the roulette is
    /// unbiased), not in any one step, so the ledger books it, atoms.
    #[serde(default)]
    pub roulette: f64,
    /// Atoms in flight at the end of the step, atoms.
    pub in_flight: f64,
    /// Atoms adsorbed on the surface at the end of the step, atoms.
    pub adsorbed: f64,
    /// Particles in flight at the end of the step, dimensionless.
    pub particles: u64,
    /// Closure error of this step relative to the atoms involved, dimensionless.
    pub closure_error: f64,
}

/// The ledger of a run.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Ledger {
    /// Names of the loss columns (ledger labels of the loss modules).
    pub loss_labels: Vec<String>,
    /// Names of the reservoir-removal columns.
    pub removal_labels: Vec<String>,
    /// Atoms in flight plus adsorbed at the start, atoms.
    pub initial_stock: f64,
    /// One row per step.
    pub rows: Vec<LedgerRow>,
}

impl LedgerRow {
    /// Atoms that left the system during the step, atoms.
    pub fn outflow(&self) -> f64 {
        self.escaped
            + self.left_bound
            + self.buried
            + self.losses.iter().sum::<f64>()
            + self.removed.iter().sum::<f64>()
            + self.roulette
    }

    /// The first quantity of the row that is not finite, as (its name, the
    /// loss or removal index for those columns, value); `None` when all are finite.
    pub fn first_non_finite(&self) -> Option<(&'static str, Option<usize>, f64)> {
        let scalars = [
            ("supplied_from_bulk", self.supplied_from_bulk),
            ("released", self.released),
            ("released_from_adsorbed", self.released_from_adsorbed),
            ("landed", self.landed),
            ("stuck", self.stuck),
            ("bounced", self.bounced),
            ("escaped", self.escaped),
            ("left_bound", self.left_bound),
            ("buried", self.buried),
            ("roulette", self.roulette),
            ("in_flight", self.in_flight),
            ("adsorbed", self.adsorbed),
        ];
        if let Some(&(name, x)) = scalars.iter().find(|(_, x)| !x.is_finite()) {
            return Some((name, None, x));
        }
        if let Some(i) = self.losses.iter().position(|x| !x.is_finite()) {
            return Some(("losses", Some(i), self.losses[i]));
        }
        if let Some(i) = self.removed.iter().position(|x| !x.is_finite()) {
            return Some(("removed", Some(i), self.removed[i]));
        }
        (!self.closure_error.is_finite()).then_some(("closure_error", None, self.closure_error))
    }

    /// Set `closure_error` from the stocks before the step, atoms.
    pub fn close(&mut self, stock_before: f64) {
        let stock_after = self.in_flight + self.adsorbed;
        let imbalance = self.supplied_from_bulk - (stock_after - stock_before) - self.outflow();
        let scale = self
            .supplied_from_bulk
            .abs()
            .max(stock_before.abs())
            .max(stock_after.abs())
            .max(f64::MIN_POSITIVE);
        self.closure_error = imbalance / scale;
    }
}

impl Ledger {
    /// Total of a flow over all rows.
    pub fn total(&self, flow: impl Fn(&LedgerRow) -> f64) -> f64 {
        self.rows.iter().map(flow).sum()
    }

    /// Closure of the whole run relative to the atoms involved, dimensionless.
    pub fn cumulative_closure(&self) -> f64 {
        let Some(last) = self.rows.last() else { return 0.0 };
        let supplied = self.total(|r| r.supplied_from_bulk);
        let out = self.total(LedgerRow::outflow);
        let stock = last.in_flight + last.adsorbed;
        let imbalance = supplied - (stock - self.initial_stock) - out;
        imbalance
            / supplied.abs().max(self.initial_stock.abs()).max(stock.abs()).max(f64::MIN_POSITIVE)
    }

    /// Largest |closure error| of any step.
    pub fn worst_step_closure(&self) -> f64 {
        self.rows.iter().map(|r| r.closure_error.abs()).fold(0.0, f64::max)
    }
}

/// Sum of `xs` by Neumaier's compensated summation (Neumaier 1974), so that
/// stocks of many particles of very different weights sum to within a few
/// ulp: the ledger's closure is judged at 1e-12 relative.
pub fn compensated_sum<'a>(xs: impl IntoIterator<Item = &'a f64>) -> f64 {
    let (mut sum, mut carry) = (0.0f64, 0.0f64);
    for &x in xs {
        let t = sum + x;
        if sum.abs() >= x.abs() {
            carry += (sum - t) + x;
        } else {
            carry += (x - t) + sum;
        }
        sum = t;
    }
    sum + carry
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn compensated_sum_is_exact_where_plain_sum_is_not() {
        // 1 + 1e100 + 1 - 1e100 = 2 (Neumaier's example).
        let xs = [1.0, 1e100, 1.0, -1e100];
        assert_eq!(compensated_sum(&xs), 2.0);
        assert_ne!(xs.iter().sum::<f64>(), 2.0);
    }
}
