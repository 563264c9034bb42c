//! Receptor time series: the concentration of the cell holding each receptor, sampled after
//! every step for the peak, arrival and time-above-threshold statistics, and kept as a row of
//! `receptors.csv` only at the log interval (the rows of `budget.csv`).

use crate::grid::Grid;

/// Statistics of one receptor over the run.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ReceptorStats {
    /// Name.
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// Threshold, if given.
    pub threshold: Option<f64>,
    /// Largest sampled concentration.
    pub peak: f64,
    /// Time of the peak, s.
    pub peak_time: f64,
    /// First sample time at which the concentration reached the threshold, s.
    pub arrival_time: Option<f64>,
    /// Total time the concentration was at or above the threshold, s (each step counted when
    /// its end-of-step sample is).
    pub time_above_threshold: Option<f64>,
}

/// Recorder of every receptor.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct ReceptorLog {
    cells: Vec<usize>,
    stats: Vec<ReceptorStats>,
    rows: Vec<f64>,
}

impl ReceptorLog {
    /// Receptors given as (name, position, threshold); positions must lie in the grid.
    pub fn new(grid: &Grid, receptors: &[(String, (f64, f64), Option<f64>)]) -> Option<Self> {
        let mut cells = Vec::new();
        let mut stats = Vec::new();
        for (name, at, threshold) in receptors {
            let (i, j) = grid.cell_at(at.0, at.1)?;
            cells.push(grid.idx(i as isize, j as isize));
            stats.push(ReceptorStats {
                name: name.clone(),
                at: *at,
                threshold: *threshold,
                peak: f64::NEG_INFINITY,
                peak_time: 0.0,
                arrival_time: None,
                time_above_threshold: threshold.map(|_| 0.0),
            });
        }
        Some(Self {
            cells,
            stats,
            rows: Vec::new(),
        })
    }

    /// Samples the padded field `c` at time `t`, the end of a step of `dt` (0 for the start),
    /// into the statistics and keeps it as a row of `receptors.csv`.
    pub fn record(&mut self, t: f64, dt: f64, c: &[f64]) {
        self.sample(t, dt, c);
        self.keep_row(t, c);
    }

    /// Keeps the padded field `c` at time `t` as a row of `receptors.csv` (the statistics are
    /// not touched: [`sample`](Self::sample) every step for those).
    pub fn keep_row(&mut self, t: f64, c: &[f64]) {
        self.rows.push(t);
        self.rows.extend(self.cells.iter().map(|&p| c[p]));
    }

    /// Samples the padded field `c` at time `t`, the end of a step of `dt` (0 for the start),
    /// into the peak, arrival and time-above-threshold statistics only (no `receptors.csv` row).
    pub fn sample(&mut self, t: f64, dt: f64, c: &[f64]) {
        for (s, &p) in self.stats.iter_mut().zip(&self.cells) {
            let v = c[p];
            if v > s.peak {
                s.peak = v;
                s.peak_time = t;
            }
            if let Some(th) = s.threshold {
                if v >= th {
                    if s.arrival_time.is_none() {
                        s.arrival_time = Some(t);
                    }
                    if let Some(above) = s.time_above_threshold.as_mut() {
                        *above += dt;
                    }
                }
            }
        }
    }

    /// Whether this log's sizes fit a padded field of `padded_len` values (a log read back
    /// from a checkpoint is checked before it is used).
    pub fn fits(&self, padded_len: usize) -> bool {
        self.cells.len() == self.stats.len()
            && self.cells.iter().all(|&p| p < padded_len)
            && self.rows.len().is_multiple_of(self.cells.len() + 1)
    }

    /// The statistics so far.
    pub fn stats(&self) -> &[ReceptorStats] {
        &self.stats
    }

    /// Whether there are receptors.
    pub fn is_empty(&self) -> bool {
        self.stats.is_empty()
    }

    /// The kept rows as sample times and one series per receptor (the data of `receptors.csv`).
    pub fn times_and_values(&self) -> (Vec<f64>, Vec<Vec<f64>>) {
        let w = self.stats.len() + 1;
        let mut times = Vec::new();
        let mut values = vec![Vec::new(); self.stats.len()];
        for row in self.rows.chunks_exact(w) {
            times.push(row[0]);
            for (s, &v) in values.iter_mut().zip(&row[1..]) {
                s.push(v);
            }
        }
        (times, values)
    }

    /// The header line of `receptors.csv` (with its newline).
    pub fn csv_header(&self) -> String {
        let mut out = String::from("time");
        for s in &self.stats {
            out.push(',');
            out.push_str(&csv_field(&s.name));
        }
        out.push('\n');
        out
    }

    /// The last kept row as a line of `receptors.csv` (with its newline), if there is one.
    pub fn last_csv_row(&self) -> Option<String> {
        let w = self.stats.len() + 1;
        let row = self.rows.chunks_exact(w).next_back()?;
        Some(csv_line(row))
    }

    /// `receptors.csv`: `time`, then one column per receptor.
    pub fn csv(&self) -> String {
        let w = self.stats.len() + 1;
        let mut out = String::from("time");
        for s in &self.stats {
            out.push(',');
            out.push_str(&csv_field(&s.name));
        }
        out.push('\n');
        for row in self.rows.chunks_exact(w) {
            out.push_str(&csv_line(row));
        }
        out
    }
}

/// One CSV line of numbers in `{:e}` form, with its newline (the rows of the run's logs).
pub fn csv_line(row: &[f64]) -> String {
    let line: Vec<String> = row.iter().map(|v| format!("{v:e}")).collect();
    format!("{}\n", line.join(","))
}

/// Quotes a CSV field when it needs it.
pub fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn peak_arrival_and_time_above() {
        let g = Grid::new(4, 4, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut log = ReceptorLog::new(&g, &[("beach, north".into(), (1.5, 1.5), Some(0.5))]).unwrap();
        let p = g.idx(1, 1);
        let mut c = vec![0.0; g.padded_len()];
        for (k, v) in [0.0, 0.2, 0.6, 0.9, 0.4, 0.7].into_iter().enumerate() {
            c[p] = v;
            log.record(k as f64 * 10.0, if k == 0 { 0.0 } else { 10.0 }, &c);
        }
        let s = &log.stats()[0];
        assert_eq!((s.peak, s.peak_time), (0.9, 30.0));
        assert_eq!(s.arrival_time, Some(20.0));
        assert_eq!(s.time_above_threshold, Some(30.0));
        let csv = log.csv();
        assert!(csv.starts_with("time,\"beach, north\"\n0e0,0e0\n"), "{csv}");
        assert_eq!(csv.lines().count(), 7);
        assert!(ReceptorLog::new(&g, &[("out".into(), (9.0, 1.0), None)]).is_none());
    }

    #[test]
    fn samples_without_rows_count_in_the_statistics() {
        // Worked by hand: the peak 0.9 at t = 30 falls between the kept rows at t = 0 and 50.
        let g = Grid::new(4, 4, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut log = ReceptorLog::new(&g, &[("beach".into(), (1.5, 1.5), Some(0.5))]).unwrap();
        let p = g.idx(1, 1);
        let mut c = vec![0.0; g.padded_len()];
        for (k, v) in [0.0, 0.2, 0.6, 0.9, 0.4, 0.7].into_iter().enumerate() {
            c[p] = v;
            let t = k as f64 * 10.0;
            if k % 5 == 0 {
                log.record(t, if k == 0 { 0.0 } else { 10.0 }, &c);
            } else {
                log.sample(t, 10.0, &c);
            }
        }
        let s = &log.stats()[0];
        assert_eq!((s.peak, s.peak_time, s.arrival_time), (0.9, 30.0, Some(20.0)));
        assert_eq!(s.time_above_threshold, Some(30.0));
        assert_eq!(log.csv(), "time,beach\n0e0,0e0\n5e1,7e-1\n");
        // The same kept rows through the accessor.
        assert_eq!(log.times_and_values(), (vec![0.0, 50.0], vec![vec![0.0, 0.7]]));
    }
}
