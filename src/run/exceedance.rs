//! Exceedance of the receptors' thresholds over the whole water body: for each distinct
//! threshold, the time every cell spent at or above it and the area at or above it against
//! time. A cell counts a step as above when its value at the end of the step is at or above
//! the threshold (the rule the receptor statistics use), so the time above summed over cells
//! equals the area above integrated over the steps.

use super::receptors::csv_line;
use crate::grid::Grid;
use rayon::prelude::*;

/// One distinct threshold and the receptors that carry it.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Threshold {
    /// Concentration, tracer units.
    pub value: f64,
    /// Names of the receptors with this threshold, in scenario order.
    pub receptors: Vec<String>,
}

/// What `summary.json` and the closing table report per threshold.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
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
///
/// Per step only the cells that cross a threshold are written: a cell's time above is kept as
/// the sum of its closed spells above plus the start of the open one, so a step reads the
/// field, the wet flags and one state byte per cell and threshold (the work is that of reading
/// the field once, whatever the number of thresholds).
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct Exceedance {
    nx: usize,
    cell_area: f64,
    /// Distinct thresholds, ascending.
    pub thresholds: Vec<Threshold>,
    /// Wet flags as 0 or 1.
    wet_u8: Vec<u8>,
    /// Per threshold and cell (index `k * cells + cell`): 1 while at or above.
    above: Vec<u8>,
    /// When the open spell above began (the end of the step before the first step above).
    since: Vec<f64>,
    /// Seconds above in closed spells.
    closed: Vec<f64>,
    /// End time of the last step observed.
    t_last: f64,
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
        let cells = grid.cells();
        let mut e = Self {
            nx: grid.nx,
            cell_area: grid.cell_area(),
            wet_u8: wet.iter().map(|&w| u8::from(w)).collect(),
            above: vec![0; cells * n],
            since: vec![0.0; cells * n],
            closed: vec![0.0; cells * n],
            t_last: t0,
            area: vec![0.0; n],
            largest: vec![(0.0, t0); n],
            rows: Vec::new(),
            thresholds,
        };
        // The initial state counts for the area only (no time has passed): a cell above at
        // the start opens its spell at t0.
        e.count(grid, c, t0);
        e.keep_row(t0);
        Some(e)
    }

    /// Whether these statistics' sizes fit `grid` (statistics read back from a checkpoint are
    /// checked before they are used).
    pub fn fits(&self, grid: &Grid) -> bool {
        let (cells, n) = (grid.cells(), self.thresholds.len());
        n > 0
            && self.nx == grid.nx
            && self.wet_u8.len() == cells
            && [self.above.len(), self.since.len(), self.closed.len()] == [cells * n; 3]
            && self.area.len() == n
            && self.largest.len() == n
            && self.rows.len().is_multiple_of(n + 1)
    }

    /// Takes the padded field `c` at the end of a step ending at `t` into account: the whole
    /// step counts as above for a cell at or above the threshold at its end.
    pub fn observe(&mut self, grid: &Grid, c: &[f64], t: f64) {
        self.count(grid, c, t);
    }

    fn count(&mut self, grid: &Grid, c: &[f64], t: f64) {
        let (nx, cells) = (self.nx, self.wet_u8.len());
        let t_prev = self.t_last;
        // The first call opens the spells of cells above at the start, at the start.
        let opened = if self.rows.is_empty() { t } else { t_prev };
        // Rows in parallel only in blocks of about 64 k cells (rayon's per-task cost would
        // dominate on small grids).
        let min_rows = (65_536 / nx.max(1)).max(1);
        let wet = &self.wet_u8;
        for k in 0..self.thresholds.len() {
            let v = self.thresholds[k].value;
            let span = k * cells..(k + 1) * cells;
            let n: usize = self.above[span.clone()]
                .par_chunks_mut(nx)
                .zip(self.since[span.clone()].par_chunks_mut(nx))
                .zip(self.closed[span].par_chunks_mut(nx))
                .with_min_len(min_rows)
                .enumerate()
                .map_init(
                    || vec![0u8; nx],
                    |now, (j, ((above, since), closed))| {
                        let q = grid.idx(0, j as isize);
                        // The row's state now, branch-free (vectorises), then compared with the
                        // state before as a whole: only crossings touch `since` and `closed`.
                        for ((b, &x), &w) in now.iter_mut().zip(&c[q..q + nx]).zip(&wet[j * nx..(j + 1) * nx]) {
                            *b = u8::from(x >= v) & w;
                        }
                        let n = now.iter().fold(0u32, |s, &b| s + u32::from(b)) as usize;
                        if now[..] != above[..] {
                            for (p, (&b, a)) in now.iter().zip(above.iter_mut()).enumerate() {
                                if b != *a {
                                    if b == 1 {
                                        since[p] = opened;
                                    } else {
                                        closed[p] += t_prev - since[p];
                                    }
                                    *a = b;
                                }
                            }
                        }
                        n
                    },
                )
                .sum();
            let a = n as f64 * self.cell_area;
            self.area[k] = a;
            if a > self.largest[k].0 {
                self.largest[k] = (a, t);
            }
        }
        self.t_last = t;
    }

    /// Seconds each cell spent at or above threshold `k` up to the last step observed:
    /// `nx * ny` values, row-major, row 0 south.
    pub fn seconds_above(&self, k: usize) -> Vec<f64> {
        let cells = self.wet_u8.len();
        (0..cells)
            .map(|cell| {
                let p = k * cells + cell;
                self.closed[p]
                    + if self.above[p] == 1 {
                        self.t_last - self.since[p]
                    } else {
                        0.0
                    }
            })
            .collect()
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

    /// The header line of `exceedance.csv` (with its newline).
    pub fn csv_header(&self) -> String {
        let mut out = String::from("time");
        for t in &self.thresholds {
            out.push_str(&format!(",area_above_{}", t.value));
        }
        out.push('\n');
        out
    }

    /// The last kept row as a line of `exceedance.csv` (with its newline), if there is one.
    pub fn last_csv_row(&self) -> Option<String> {
        let w = self.thresholds.len() + 1;
        let row = self.rows.chunks_exact(w).next_back()?;
        Some(csv_line(row))
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
            out.push_str(&csv_line(row));
        }
        out
    }

    /// Hours at or above each threshold per cell, shape (thresholds, ny, nx), row 0 south, as
    /// `hours_above(threshold, y, x)` in `fields.nc`.
    pub fn hours_above(&self) -> ndarray::Array3<f64> {
        let nx = self.nx.max(1);
        let ny = self.wet_u8.len() / nx;
        let seconds: Vec<Vec<f64>> = (0..self.thresholds.len()).map(|k| self.seconds_above(k)).collect();
        ndarray::Array3::from_shape_fn((seconds.len(), ny, self.nx), |(k, j, i)| {
            seconds[k][j * nx + i] / 3600.0
        })
    }

    /// The figures per threshold; `c_max` is the envelope (`nx * ny`) and `centre` gives a
    /// cell's centre.
    pub fn figures(&self, c_max: &[f64], centre: impl Fn(usize, usize) -> (f64, f64)) -> Vec<ExceedanceFigure> {
        self.thresholds
            .iter()
            .enumerate()
            .map(|(k, th)| {
                let s = &self.seconds_above(k);
                let ever = c_max
                    .iter()
                    .zip(&self.wet_u8)
                    .filter(|(&m, &w)| w == 1 && m >= th.value)
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
        e.observe(&g, &c, 2.0);
        e.keep_row(2.0);
        // 0.2: two cells above for 2 s; 0.5: one cell.
        assert_eq!(e.seconds_above(0), vec![2.0, 2.0, 0.0, 0.0]);
        assert_eq!(e.seconds_above(1), vec![2.0, 0.0, 0.0, 0.0]);
        // A spell that closes and one that reopens: 0.2 at cell (1, 0) drops out at t = 3
        // and comes back at t = 5 (steps ending at 3, 4 and 5).
        c[g.idx(1, 0)] = 0.1;
        e.observe(&g, &c, 3.0);
        e.observe(&g, &c, 4.0);
        c[g.idx(1, 0)] = 0.3;
        e.observe(&g, &c, 5.0);
        assert_eq!(e.seconds_above(0), vec![5.0, 3.0, 0.0, 0.0]);
        let (t, a) = e.series();
        assert_eq!(t, vec![0.0, 2.0]);
        assert_eq!(a[1], vec![100.0, 50.0]);
        let f = e.figures(&[1.0, 0.5, 0.0, 9.0], |i, j| g.centre(i, j));
        assert_eq!(f[1].largest_area, 100.0);
        assert_eq!(f[1].largest_area_time, 0.0);
        assert_eq!(f[1].area_ever_above, 100.0);
        assert_eq!(f[1].longest_at, Some((5.0, 2.5)));
        assert_eq!(f[0].area_time, 8.0 * 50.0);
        assert!(e.csv().starts_with("time,area_above_0.2,area_above_0.5\n"));
    }

    #[test]
    #[ignore = "timing for the record: cargo test --release -- --ignored --nocapture exceedance"]
    fn time_per_step() {
        let g = Grid::new(200, 100, 5.0, 5.0, 0.0, 0.0).unwrap();
        let wet = vec![true; g.cells()];
        let c: Vec<f64> = (0..g.padded_len()).map(|k| (k % 97) as f64 / 97.0).collect();
        let recs = vec![("a".to_string(), Some(0.5)), ("b".to_string(), Some(0.2))];
        let mut e = Exceedance::new(&g, &wet, &recs, 0.0, &c).unwrap();
        let t0 = std::time::Instant::now();
        for s in 1..=4000 {
            e.observe(&g, &c, s as f64);
        }
        let per = t0.elapsed().as_secs_f64() / 4000.0 * 1e6;
        let mut env = crate::run::envelope::Envelope::new(&g, &c);
        let t1 = std::time::Instant::now();
        for _ in 1..=4000 {
            env.observe(&g, &c);
        }
        let per_env = t1.elapsed().as_secs_f64() / 4000.0 * 1e6;
        println!("{per:.1} us per step (2 thresholds); the envelope's running maximum {per_env:.1} us");
    }

    #[test]
    fn no_thresholds_no_statistics() {
        let g = Grid::new(2, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let c = vec![0.0; g.padded_len()];
        assert!(Exceedance::new(&g, &[true; 4], &[("a".into(), None)], 0.0, &c).is_none());
    }
}
