//! Exceedance of the receptors' thresholds over the whole water body: for each distinct
//! threshold, the time every cell spent at or above it and the area at or above it against
//! time. A cell counts a step as above when its value at the end of the step is at or above
//! the threshold (the rule the receptor statistics use), so the time above summed over cells
//! equals the area above integrated over the steps.

use crate::grid::Grid;
use rayon::prelude::*;

/// One distinct threshold and the receptors that carry it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Threshold {
    /// Concentration, tracer units.
    pub value: f64,
    /// Names of the receptors with this threshold, in scenario order.
    pub receptors: Vec<String>,
}

/// What `summary.json` and the closing table report per threshold.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ExceedanceFigure {
    /// Concentration, tracer units.
    pub threshold: f64,
    /// Receptors with this threshold.
    pub receptors: Vec<String>,
    /// Largest water area at or above the threshold at any step, m2.
    pub largest_area: f64,
    /// When that area was reached, s.
    pub largest_area_time: f64,
    /// Water area that was at or above the threshold at some step (the envelope's footprint),
    /// m2.
    pub area_ever_above: f64,
    /// Longest time one cell spent at or above the threshold, s.
    pub longest_time_above: f64,
    /// Centre of that cell, m (absent when no cell ever exceeded).
    pub longest_at: Option<(f64, f64)>,
    /// Area above integrated over time, m2 s (the sum over cells of time above times cell
    /// area).
    pub area_time: f64,
}

/// Running exceedance statistics of a run.
#[derive(Debug, Clone)]
pub struct Exceedance {
    nx: usize,
    cell_area: f64,
    wet: Vec<bool>,
    /// Distinct thresholds, ascending.
    pub thresholds: Vec<Threshold>,
    /// Seconds each cell spent at or above each threshold: one `nx * ny` row-major vector
    /// (row 0 south) per threshold.
    pub seconds_above: Vec<Vec<f64>>,
    /// Current area at or above each threshold, m2.
    area: Vec<f64>,
    /// Largest area and its time per threshold.
    largest: Vec<(f64, f64)>,
    /// Kept rows: time, then one area per threshold.
    rows: Vec<f64>,
}

impl Exceedance {
    /// Starts the statistics from the padded initial field `c` at time `t0`; `receptors` are
    /// (name, threshold) pairs (receptors without a threshold are skipped). Returns `None` when
    /// no receptor has a threshold.
    pub fn new(grid: &Grid, wet: &[bool], receptors: &[(String, Option<f64>)], t0: f64, c: &[f64]) -> Option<Self> {
        let mut thresholds: Vec<Threshold> = Vec::new();
        for (name, th) in receptors {
            let Some(v) = *th else { continue };
            match thresholds.iter_mut().find(|t| t.value == v) {
                Some(t) => t.receptors.push(name.clone()),
                None => thresholds.push(Threshold {
                    value: v,
                    receptors: vec![name.clone()],
                }),
            }
        }
        if thresholds.is_empty() {
            return None;
        }
        thresholds.sort_by(|a, b| a.value.total_cmp(&b.value));
        let n = thresholds.len();
        let mut e = Self {
            nx: grid.nx,
            cell_area: grid.cell_area(),
            wet: wet.to_vec(),
            seconds_above: vec![vec![0.0; grid.cells()]; n],
            area: vec![0.0; n],
            largest: vec![(0.0, t0); n],
            rows: Vec::new(),
            thresholds,
        };
        e.count(grid, c, 0.0, t0);
        e.keep_row(t0);
        Some(e)
    }

    /// Takes the padded field `c` at the end of a step of `dt` ending at `t` into account.
    pub fn observe(&mut self, grid: &Grid, c: &[f64], dt: f64, t: f64) {
        self.count(grid, c, dt, t);
    }

    fn count(&mut self, grid: &Grid, c: &[f64], dt: f64, t: f64) {
        let nx = self.nx;
        let wet = &self.wet;
        for (k, th) in self.thresholds.iter().enumerate() {
            let v = th.value;
            let cells: usize = self.seconds_above[k]
                .par_chunks_mut(nx)
                .enumerate()
                .map(|(j, row)| {
                    let q = grid.idx(0, j as isize);
                    let w = &wet[j * nx..(j + 1) * nx];
                    let mut n = 0usize;
                    for ((s, &x), &w) in row.iter_mut().zip(&c[q..q + nx]).zip(w) {
                        if w && x >= v {
                            *s += dt;
                            n += 1;
                        }
                    }
                    n
                })
                .sum();
            let a = cells as f64 * self.cell_area;
            self.area[k] = a;
            if a > self.largest[k].0 {
                self.largest[k] = (a, t);
            }
        }
    }

    /// Keeps the current areas as a row of `exceedance.csv` at time `t`.
    pub fn keep_row(&mut self, t: f64) {
        self.rows.push(t);
        self.rows.extend_from_slice(&self.area);
    }

    /// Kept times and, per threshold, the area at those times (m2).
    pub fn series(&self) -> (Vec<f64>, Vec<Vec<f64>>) {
        let w = self.thresholds.len() + 1;
        let times = self.rows.chunks_exact(w).map(|r| r[0]).collect();
        let areas = (0..self.thresholds.len())
            .map(|k| self.rows.chunks_exact(w).map(|r| r[k + 1]).collect())
            .collect();
        (times, areas)
    }

    /// A short label per threshold, e.g. `0.1 (beach, pier)`.
    pub fn label(&self, k: usize) -> String {
        let t = &self.thresholds[k];
        format!("{} ({})", t.value, t.receptors.join(", "))
    }

    /// `exceedance.csv`: `time` (s), then `area_above_<value>` (m2) per threshold.
    pub fn csv(&self) -> String {
        let w = self.thresholds.len() + 1;
        let mut out = String::from("time");
        for t in &self.thresholds {
            out.push_str(&format!(",area_above_{}", t.value));
        }
        out.push('\n');
        for row in self.rows.chunks_exact(w) {
            let line: Vec<String> = row.iter().map(|v| format!("{v:e}")).collect();
            out.push_str(&line.join(","));
            out.push('\n');
        }
        out
    }

    /// Hours above each threshold per cell (`nx * ny` per threshold), for `fields.nc`.
    pub fn hours_above(&self) -> Vec<Vec<f64>> {
        self.seconds_above
            .iter()
            .map(|s| s.iter().map(|&x| x / 3600.0).collect())
            .collect()
    }

    /// The figures per threshold; `c_max` is the envelope (`nx * ny`) and `centre` gives a
    /// cell's centre.
    pub fn figures(&self, c_max: &[f64], centre: impl Fn(usize, usize) -> (f64, f64)) -> Vec<ExceedanceFigure> {
        self.thresholds
            .iter()
            .enumerate()
            .map(|(k, th)| {
                let s = &self.seconds_above[k];
                let ever = c_max
                    .iter()
                    .zip(&self.wet)
                    .filter(|(&m, &w)| w && m >= th.value)
                    .count();
                let (mut best, mut at) = (0.0f64, None);
                for (p, &v) in s.iter().enumerate() {
                    if v > best {
                        best = v;
                        at = Some(centre(p % self.nx, p / self.nx));
                    }
                }
                ExceedanceFigure {
                    threshold: th.value,
                    receptors: th.receptors.clone(),
                    largest_area: self.largest[k].0,
                    largest_area_time: self.largest[k].1,
                    area_ever_above: ever as f64 * self.cell_area,
                    longest_time_above: best,
                    longest_at: at,
                    area_time: crate::field::sum_compensated(s) * self.cell_area,
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_are_merged_sorted_and_counted() {
        let g = Grid::new(2, 2, 10.0, 5.0, 0.0, 0.0).unwrap();
        let wet = vec![true, true, true, false];
        let mut c = vec![0.0; g.padded_len()];
        c[g.idx(0, 0)] = 1.0;
        c[g.idx(1, 0)] = 0.5;
        c[g.idx(1, 1)] = 9.0; // land: never counted
        let recs = vec![
            ("a".to_string(), Some(0.5)),
            ("b".to_string(), None),
            ("c".to_string(), Some(0.2)),
            ("d".to_string(), Some(0.5)),
        ];
        let mut e = Exceedance::new(&g, &wet, &recs, 0.0, &c).unwrap();
        assert_eq!(e.thresholds.len(), 2);
        assert_eq!(e.thresholds[0].value, 0.2);
        assert_eq!(e.thresholds[1].receptors, vec!["a", "d"]);
        c[g.idx(1, 0)] = 0.3;
        e.observe(&g, &c, 2.0, 2.0);
        e.keep_row(2.0);
        // 0.2: two cells above for 2 s; 0.5: one cell.
        assert_eq!(e.seconds_above[0], vec![2.0, 2.0, 0.0, 0.0]);
        assert_eq!(e.seconds_above[1], vec![2.0, 0.0, 0.0, 0.0]);
        let (t, a) = e.series();
        assert_eq!(t, vec![0.0, 2.0]);
        assert_eq!(a[1], vec![100.0, 50.0]);
        let f = e.figures(&[1.0, 0.5, 0.0, 9.0], |i, j| g.centre(i, j));
        assert_eq!(f[1].largest_area, 100.0);
        assert_eq!(f[1].largest_area_time, 0.0);
        assert_eq!(f[1].area_ever_above, 100.0);
        assert_eq!(f[1].longest_at, Some((5.0, 2.5)));
        assert_eq!(f[0].area_time, 4.0 * 50.0);
        assert!(e.csv().starts_with("time,area_above_0.2,area_above_0.5\n"));
    }

    #[test]
    fn no_thresholds_no_statistics() {
        let g = Grid::new(2, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let c = vec![0.0; g.padded_len()];
        assert!(Exceedance::new(&g, &[true; 4], &[("a".into(), None)], 0.0, &c).is_none());
    }
}
