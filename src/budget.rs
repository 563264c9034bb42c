//! Mass budget: running totals of what sources added, what crossed each side, what decay
//! removed, and the residual that must stay at round-off (DESIGN §2, §3).

use crate::field::Neumaier;
use crate::ops::boundary::Side;

/// Running totals since the start of the run (mass = concentration times m3).
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Budget {
    /// Mass in the domain at the start (after releases at t = 0).
    pub mass0: f64,
    added: Neumaier,
    inflow: [Neumaier; 4],
    outflow: [Neumaier; 4],
    decayed: Neumaier,
}

/// One line of `budget.csv`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BudgetRow {
    /// Simulated time, s.
    pub time: f64,
    /// Steps taken.
    pub step: u64,
    /// The last step, s.
    pub dt: f64,
    /// Mass in the domain.
    pub mass: f64,
    /// Mass released by sources since the start.
    pub added: f64,
    /// Mass carried in through the sides.
    pub inflow: f64,
    /// Mass carried out through the sides.
    pub outflow: f64,
    /// Mass removed by decay.
    pub decayed: f64,
    /// `(mass - (mass0 + added + inflow - outflow - decayed)) / max(mass0 + added + inflow, 1e-300)`.
    pub residual: f64,
    /// Smallest concentration over water.
    pub min: f64,
    /// Largest concentration over water.
    pub max: f64,
    /// Largest per-cell `|u| dt/dx + |v| dt/dy` of the last step.
    pub courant: f64,
}

impl Budget {
    /// A budget starting from `mass0`.
    pub fn new(mass0: f64) -> Self {
        Self {
            mass0,
            ..Default::default()
        }
    }

    /// Records mass released by sources.
    pub fn add_released(&mut self, m: f64) {
        self.added.add(m);
    }

    /// Records mass carried in (`m_in >= 0`) and out (`m_out >= 0`) through `side`.
    pub fn add_side(&mut self, side: Side, m_in: f64, m_out: f64) {
        self.inflow[side.index()].add(m_in);
        self.outflow[side.index()].add(m_out);
    }

    /// Records mass removed by decay.
    pub fn add_decayed(&mut self, m: f64) {
        self.decayed.add(m);
    }

    /// Mass released so far.
    pub fn added(&self) -> f64 {
        self.added.value()
    }

    /// Mass carried in through all sides.
    pub fn inflow(&self) -> f64 {
        sum4(&self.inflow)
    }

    /// Mass carried out through all sides.
    pub fn outflow(&self) -> f64 {
        sum4(&self.outflow)
    }

    /// Mass carried in through one side.
    pub fn inflow_through(&self, side: Side) -> f64 {
        self.inflow[side.index()].value()
    }

    /// Mass carried out through one side.
    pub fn outflow_through(&self, side: Side) -> f64 {
        self.outflow[side.index()].value()
    }

    /// Mass removed by decay.
    pub fn decayed(&self) -> f64 {
        self.decayed.value()
    }

    /// The relative residual for a measured `mass` (DESIGN §3).
    pub fn residual(&self, mass: f64) -> f64 {
        let mut expect = Neumaier::default();
        for x in [
            self.mass0,
            self.added(),
            self.inflow(),
            -self.outflow(),
            -self.decayed(),
        ] {
            expect.add(x);
        }
        let scale = (self.mass0 + self.added() + self.inflow()).max(1e-300);
        (mass - expect.value()) / scale
    }

    /// Builds a row from the totals and the measured state.
    #[allow(clippy::too_many_arguments)]
    pub fn row(&self, time: f64, step: u64, dt: f64, mass: f64, min: f64, max: f64, courant: f64) -> BudgetRow {
        let residual = self.residual(mass);
        BudgetRow {
            time,
            step,
            dt,
            mass,
            added: self.added(),
            inflow: self.inflow(),
            outflow: self.outflow(),
            decayed: self.decayed(),
            residual,
            min,
            max,
            courant,
        }
    }
}

fn sum4(a: &[Neumaier; 4]) -> f64 {
    let mut s = Neumaier::default();
    for x in a {
        s.add(x.value());
    }
    s.value()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn residual_closes_when_the_books_balance() {
        let mut b = Budget::new(10.0);
        b.add_released(2.0);
        b.add_side(Side::West, 3.0, 0.0);
        b.add_side(Side::North, 0.0, 4.0);
        b.add_decayed(1.0);
        assert_eq!(b.residual(10.0), 0.0);
        let r = b.row(1.0, 1, 1.0, 10.15, 0.0, 1.0, 0.3);
        assert!((r.residual - 0.01).abs() < 1e-15);
        assert_eq!((r.inflow, r.outflow), (3.0, 4.0));
    }
}
