//! The envelope of a run: the largest concentration each cell reached at any step (the map a
//! guideline is checked against), kept without allocation as the run goes.

use crate::grid::Grid;

/// Running maximum per cell, `nx * ny` values row-major, row 0 south.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct Envelope {
    /// The largest value seen in each cell.
    pub c_max: Vec<f64>,
}

impl Envelope {
    /// Starts from the padded field `c` (the initial state).
    pub fn new(grid: &Grid, c: &[f64]) -> Self {
        Self {
            c_max: grid.interior(c),
        }
    }

    /// Takes the padded field `c` of a step into account.
    pub fn observe(&mut self, grid: &Grid, c: &[f64]) {
        for j in 0..grid.ny {
            let q = grid.idx(0, j as isize);
            let row = &mut self.c_max[j * grid.nx..(j + 1) * grid.nx];
            for (m, &v) in row.iter_mut().zip(&c[q..q + grid.nx]) {
                *m = m.max(v);
            }
        }
    }

    /// The largest value over the water cells.
    pub fn peak(&self, wet: &[bool]) -> f64 {
        self.c_max
            .iter()
            .zip(wet)
            .filter(|(_, &w)| w)
            .fold(f64::NEG_INFINITY, |a, (&v, _)| a.max(v))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_envelope_is_the_running_maximum() {
        let g = Grid::new(3, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut c = vec![0.0; g.padded_len()];
        c[g.idx(1, 1)] = 2.0;
        let mut e = Envelope::new(&g, &c);
        c[g.idx(1, 1)] = 1.0;
        c[g.idx(0, 0)] = 3.0;
        e.observe(&g, &c);
        assert_eq!(e.c_max, vec![3.0, 0.0, 0.0, 0.0, 2.0, 0.0]);
        assert_eq!(e.peak(&[true, true, true, true, false, true]), 3.0);
    }
}
