//! The run report's particle section: the grid and particle answers side by side per receptor,
//! the sentence saying which to trust, the overlay charts and a particle frame.

use super::{esc, facts, figure, num, table, time};
use crate::run::particles::{ParticleSummary, FOLDER};
use std::fmt::Write as _;
use std::path::Path;

/// The section for the particle run `p` of the run in `dir` (its charts are read from
/// `dir/particles/`), in the tracer's `units`.
pub fn section(dir: &Path, p: &ParticleSummary, units: &str) -> String {
    let mut b = String::new();
    b.push_str("<h2>Second opinion: random-walk particles</h2>\n");
    let _ = writeln!(
        b,
        "<p>The same releases were followed by {} particles moved by the same flow and spread by a random walk of the same diffusivity (no numerical diffusion), decayed alike and counted in each receptor's cell. Status: {}.</p>",
        p.particles,
        esc(&p.status)
    );
    b.push_str("<ul class=\"answers\">\n");
    for r in &p.receptors {
        let _ = writeln!(b, "<li>{}: {}.</li>", esc(&r.name), esc(&r.sentence));
    }
    b.push_str("</ul>\n");
    let opt_t = |v: Option<f64>| v.map_or_else(|| "-".to_string(), time);
    let rows: Vec<Vec<String>> = p
        .receptors
        .iter()
        .map(|r| {
            vec![
                esc(&r.name),
                num(r.grid_peak),
                format!("{} ± {}", num(r.particle_peak), num(r.particle_std_error)),
                r.particle_count.to_string(),
                num(r.kernel_peak),
                esc(&format!("{} / {}", time(r.grid_peak_time), time(r.particle_peak_time))),
                esc(&format!("{} / {}", opt_t(r.grid_arrival), opt_t(r.particle_arrival))),
            ]
        })
        .collect();
    let grid = format!("grid peak [{units}]");
    let part = format!("particle peak ± s.e. [{units}]");
    let kernel = format!("kernel peak [{units}]");
    b.push_str(&table(
        Some("Grid and particles at each receptor; s.e. is the counting error of the particle value at its peak."),
        &[
            ("receptor", false),
            (&grid, true),
            (&part, true),
            ("particles in cell", true),
            (&kernel, true),
            ("time of peak, grid / particles", true),
            ("arrival, grid / particles", true),
        ],
        &rows,
    ));
    let folder = dir.join(FOLDER);
    for (k, r) in p.receptors.iter().enumerate() {
        let name = format!("comparison-{k:02}.png");
        b.push_str(&figure(
            &folder.join(&name),
            &format!("{}: grid and particles", r.name),
            &format!(
                "{}: the grid run's concentration (solid), the particles' cell value (dashed) and their kernel value (long dashes).",
                r.name
            ),
        ));
    }
    let last = p
        .files
        .iter()
        .filter(|f| f.starts_with(&format!("{FOLDER}/frames/")))
        .max();
    if let Some(f) = last {
        b.push_str(&figure(
            &dir.join(f),
            "particle map at the end",
            "Particle concentration at the end of the run (kernel estimate).",
        ));
    }
    b.push_str(&facts(&[
        ("particle step", format!("{} s ({} steps)", num(p.dt), p.steps)),
        ("seed", p.seed.to_string()),
        (
            "kernel bandwidth",
            format!("{} cell (Gaussian standard deviation)", num(p.kernel_bandwidth_cells)),
        ),
        (
            "mass: released / in water / out / decayed",
            format!(
                "{} / {} / {} / {}",
                num(p.released),
                num(p.in_water),
                num(p.outflow),
                num(p.decayed)
            ),
        ),
        ("largest budget residual", format!("{:.1e}", p.max_abs_residual)),
        (
            "speed",
            format!(
                "{:.1} M particle steps/s over {:.2} s",
                p.particle_steps_per_second / 1e6,
                p.wall_seconds
            ),
        ),
    ]));
    b
}
