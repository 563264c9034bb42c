//! Candidate release points ranked by their influence: dose per unit mass at the receptor and,
//! when the receptor has a threshold, the release mass that would reach it.
//!
//! The mass to reach a threshold `C*` is defined on the window-mean concentration: for a
//! window `(start, end]` the dose of a mass `m` is `m I` and the window-mean concentration
//! `m I / (end - start)`, so `m* = C* (end - start) / I`; for a single time `m* = C* / I`. The
//! peak over the window is at least the mean, so a release of `m*` exceeds the threshold at
//! some time of the window (a smaller one may too).

use super::{Influence, Window};

/// One candidate with its influence.
#[derive(Debug, Clone, PartialEq)]
pub struct Ranked {
    /// Name.
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// Its cell (i, j).
    pub cell: (usize, usize),
    /// Dose at the receptor per unit mass released there ([`Influence::units`]).
    pub dose_per_mass: f64,
    /// Release mass whose window-mean concentration (or concentration at the single time)
    /// reaches the threshold; `None` without a threshold or with no influence (below 1e-12 of
    /// the map's largest value).
    pub mass_to_threshold: Option<f64>,
}

/// The candidates `(name, position)` for release time number `k`, largest dose first (ties by
/// name); candidates outside the grid or on land are left out (the scenario refuses them).
pub fn rank(
    inf: &Influence,
    k: usize,
    grid: &crate::grid::Grid,
    candidates: &[(String, (f64, f64))],
    threshold: Option<f64>,
) -> Vec<Ranked> {
    let map = inf.map(k);
    let span = match inf.window {
        Window::Span { start, end } => end - start,
        Window::At(_) => 1.0,
    };
    // Influence below this (round-off of the largest, relative 1e-12) is no influence: a
    // release there cannot reach the threshold at any mass worth quoting.
    let floor = 1e-12 * map.iter().copied().filter(|v| v.is_finite()).fold(0.0, f64::max);
    let mut out: Vec<Ranked> = candidates
        .iter()
        .filter_map(|(name, at)| {
            let (i, j) = grid.cell_at(at.0, at.1)?;
            let v = map[[j, i]];
            v.is_finite().then(|| Ranked {
                name: name.clone(),
                at: *at,
                cell: (i, j),
                dose_per_mass: v,
                mass_to_threshold: threshold.filter(|_| v > floor && v > 0.0).map(|c| c * span / v),
            })
        })
        .collect();
    out.sort_by(|a, b| {
        b.dose_per_mass
            .total_cmp(&a.dose_per_mass)
            .then_with(|| a.name.cmp(&b.name))
    });
    out
}

/// The ranked table as CSV: `rank,name,x,y,i,j,dose_per_mass,mass_to_threshold` (the last
/// empty without a threshold).
pub fn csv(rows: &[Ranked]) -> String {
    let mut s = String::from("rank,name,x,y,i,j,dose_per_mass,mass_to_threshold\n");
    for (k, r) in rows.iter().enumerate() {
        s.push_str(&format!(
            "{},{},{},{},{},{},{:e},{}\n",
            k + 1,
            crate::run::receptors::csv_field(&r.name),
            r.at.0,
            r.at.1,
            r.cell.0,
            r.cell.1,
            r.dose_per_mass,
            r.mass_to_threshold.map(|m| format!("{m:e}")).unwrap_or_default()
        ));
    }
    s
}
