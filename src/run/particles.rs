//! The particle run of a scenario and its files in `<dir>/<name>/particles/`: receptor series
//! with their errors, the particle budget, frames of the kernel map, the comparison with the
//! grid run (table, one chart per receptor, a sentence each) and `particles.json`.
//!
//! `tinct run` with `run.particles = N` marches the particles after the grid run and puts the
//! comparison into `summary.json` and `report.html`; `tinct particles` runs them alone,
//! marching the grid model in memory for the comparison (no grid files are written), and adds
//! its summary to the grid run's `summary.json` and report when the folder holds a completed
//! run of the same scenario.

use super::frames::run_range;
use super::markers;
use super::receptors::{ReceptorLog, ReceptorStats};
use super::{RunFailure, CAUTION};
use crate::model::Model;
use crate::output::chart::{auto_style, time_unit, Axis, Chart, Dash, Line};
use crate::output::{self, FrameSpec, OutputError};
use crate::particles::compare::{self, ReceptorComparison};
use crate::particles::march::{self, MarchSpec, ParticleRun};
use crate::scenario::Scenario;
use crate::step::Simulation;
use std::ops::ControlFlow;
use std::path::Path;
use std::sync::atomic::AtomicBool;

/// The particle folder inside the run's folder.
pub const FOLDER: &str = "particles";

/// Particles when neither `--particles` nor `run.particles` says.
pub const DEFAULT_COUNT: usize = 200_000;

/// Seed when `--seed` is not given.
pub const DEFAULT_SEED: u64 = 1;

/// What `particles.json` (and the `particles` entry of `summary.json`) holds.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ParticleSummary {
    /// `completed` or `interrupted`.
    pub status: String,
    /// Particles in all.
    pub particles: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// The particle step, s.
    pub dt: f64,
    /// Steps taken.
    pub steps: u64,
    /// Simulated time reached, s.
    pub simulated_time: f64,
    /// Kernel bandwidth (standard deviation), cells.
    pub kernel_bandwidth_cells: f64,
    /// Wall seconds of the particle march (files excluded).
    pub wall_seconds: f64,
    /// Particle steps per wall second of the march.
    pub particle_steps_per_second: f64,
    /// Mass released.
    pub released: f64,
    /// Mass in the water at the end.
    pub in_water: f64,
    /// Mass out through the sides.
    pub outflow: f64,
    /// Mass removed by decay.
    pub decayed: f64,
    /// Largest |budget residual| over the rows.
    pub max_abs_residual: f64,
    /// Per receptor: grid and particles side by side, the verdict and its sentence.
    pub receptors: Vec<ReceptorComparison>,
    /// Files, relative to the run's folder.
    pub files: Vec<String>,
    /// The caution that goes with every result.
    pub caution: String,
}

/// The particle spec of `scn` with `count` particles and `seed`.
pub fn spec_of(scn: &Scenario, count: usize, seed: u64) -> MarchSpec {
    MarchSpec {
        count,
        seed,
        end: scn.run.end,
        frames: scn.run.frames,
        receptors: scn
            .receptors
            .iter()
            .map(|r| (r.name.clone(), r.at, r.threshold))
            .collect(),
        bandwidth: march::DEFAULT_BANDWIDTH,
        dt: None,
    }
}

/// Marches the particles of `scn` on `model` (built from it); returns the run and its wall
/// seconds.
pub fn march_particles(
    scn: &Scenario,
    model: &Model,
    count: usize,
    seed: u64,
    stop: Option<&AtomicBool>,
    progress: &mut dyn FnMut(f64),
) -> Result<(ParticleRun, f64), RunFailure> {
    let bad = |e: crate::error::ModelError| RunFailure::BadInput(format!("{}: {e}", scn.path.display()));
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    let started = std::time::Instant::now();
    let run = march::march(model, c0.view(), &spec_of(scn, count, seed), stop, progress).map_err(bad)?;
    Ok((run, started.elapsed().as_secs_f64()))
}

/// The grid run's receptor log, marched in memory (no files), for a comparison.
pub fn grid_receptors(scn: &Scenario, stop: Option<&AtomicBool>) -> Result<ReceptorLog, RunFailure> {
    let bad = |m: String| RunFailure::BadInput(format!("{}: {m}", scn.path.display()));
    let model = scn.build_model().map_err(|e| bad(e.to_string()))?;
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    let mut sim = Simulation::new(model, scn.scheme, c0).map_err(|e| bad(e.to_string()))?;
    let recs: Vec<_> = scn
        .receptors
        .iter()
        .map(|r| (r.name.clone(), r.at, r.threshold))
        .collect();
    let mut log =
        ReceptorLog::new(&sim.model.grid, &recs).ok_or_else(|| bad("a receptor lies outside the grid".into()))?;
    log.record(0.0, 0.0, &sim.state.c);
    let every = scn.run.log_every.max(1);
    let halted = std::sync::atomic::AtomicBool::new(false);
    sim.advance_to(scn.run.end, |s| {
        log.sample(s.state.t, s.state.last_dt, &s.state.c);
        if s.state.step % every == 0 {
            log.keep_row(s.state.t, &s.state.c);
        }
        if stop.is_some_and(|f| f.load(std::sync::atomic::Ordering::Relaxed)) {
            halted.store(true, std::sync::atomic::Ordering::Relaxed);
            return ControlFlow::Break(());
        }
        ControlFlow::Continue(())
    })
    .map_err(|e| {
        RunFailure::BadInput(format!(
            "{}: the grid run for the comparison failed: {e}",
            scn.path.display()
        ))
    })?;
    log.keep_row(sim.state.t, &sim.state.c);
    Ok(log)
}

/// Writes the particle files of `run` into `<run_dir>/particles/`, comparing with the grid
/// receptors in `grid`; returns the summary (also written as `particles.json`).
pub fn write_particle_outputs(
    run_dir: &Path,
    scn: &Scenario,
    model: &Model,
    run: &ParticleRun,
    grid: &ReceptorLog,
    wall_seconds: f64,
) -> Result<ParticleSummary, OutputError> {
    let dir = run_dir.join(FOLDER);
    let frames_dir = dir.join("frames");
    std::fs::create_dir_all(&frames_dir).map_err(|e| OutputError::io(&frames_dir, e))?;
    clear(&dir, false)?;
    let mut files = Vec::new();
    let mut put = |name: &str, text: String| -> Result<(), OutputError> {
        output::write_atomic(&dir.join(name), text.as_bytes())?;
        files.push(format!("{FOLDER}/{name}"));
        Ok(())
    };
    put("receptors.csv", receptors_csv(run))?;
    put("budget.csv", budget_csv(run))?;
    let comparisons = comparisons(scn, model, run, grid.stats());
    put("comparison.csv", comparison_csv(&comparisons))?;
    let written = draw_frames(scn, model, run, &frames_dir)?;
    files.extend((0..written).map(|k| format!("{FOLDER}/frames/{k:05}.png")));
    let (times, values) = grid.times_and_values();
    for (k, (r, g)) in run.receptors.iter().zip(values.iter()).enumerate() {
        let name = format!("comparison-{k:02}.png");
        comparison_chart(scn, run, k, r.name.as_str(), &times, g).write(&dir.join(&name))?;
        files.push(format!("{FOLDER}/{name}"));
    }
    let last = run.budget.last();
    let summary = ParticleSummary {
        status: if run.interrupted { "interrupted" } else { "completed" }.into(),
        particles: run.particles,
        seed: run.seed,
        dt: run.dt,
        steps: run.steps,
        simulated_time: run.times.last().copied().unwrap_or(0.0),
        kernel_bandwidth_cells: run.bandwidth,
        wall_seconds,
        particle_steps_per_second: if wall_seconds > 0.0 {
            run.particle_steps as f64 / wall_seconds
        } else {
            0.0
        },
        released: last.map_or(0.0, |b| b.released),
        in_water: last.map_or(0.0, |b| b.in_water),
        outflow: last.map_or(0.0, |b| b.out.iter().sum()),
        decayed: last.map_or(0.0, |b| b.decayed),
        max_abs_residual: run.budget.iter().map(|b| b.residual.abs()).fold(0.0, f64::max),
        receptors: comparisons,
        files: {
            let mut f = files;
            f.push(format!("{FOLDER}/particles.json"));
            f
        },
        caution: CAUTION.into(),
    };
    let json = serde_json::to_string_pretty(&summary).expect("the particle summary serialises");
    output::write_atomic(&dir.join("particles.json"), json.as_bytes())?;
    Ok(summary)
}

/// Per receptor, the comparison of the grid statistics with the particles'.
fn comparisons(scn: &Scenario, model: &Model, run: &ParticleRun, grid: &[ReceptorStats]) -> Vec<ReceptorComparison> {
    let g = &model.grid;
    let released = run.budget.last().map_or(0.0, |b| b.released);
    let per_particle = if run.particles > 0 {
        released / run.particles as f64
    } else {
        0.0
    };
    grid.iter()
        .zip(&run.receptors)
        .map(|(gs, p)| {
            let volume = g
                .cell_at(p.at.0, p.at.1)
                .filter(|&(i, j)| model.mask.is_wet(i, j))
                .map_or(0.0, |(i, j)| model.depth_at(i, j, p.peak_time) * g.cell_area());
            let one = if volume > 0.0 { per_particle / volume } else { 0.0 };
            compare::compare(gs, p, one, run.particles, &scn.tracer.units)
        })
        .collect()
}

/// The files a particle run writes in its folder, besides `frames/NNNNN.png` and
/// `comparison-NN.png`.
pub const RESULT_FILES: [&str; 4] = ["particles.json", "receptors.csv", "budget.csv", "comparison.csv"];

/// Removes what an earlier particle run left in `<run_dir>/particles/` (files it did not
/// write stay).
pub fn clear_folder(run_dir: &Path) -> Result<(), OutputError> {
    clear(&run_dir.join(FOLDER), true)
}

/// Removes the frames and charts in `dir`, and with `all` the result files too.
fn clear(dir: &Path, all: bool) -> Result<(), OutputError> {
    let is_frame = |n: &str| {
        n.strip_suffix(".png")
            .is_some_and(|s| s.len() == 5 && s.bytes().all(|b| b.is_ascii_digit()))
    };
    let is_chart = |n: &str| n.starts_with("comparison-") && n.ends_with(".png");
    let is_result = |n: &str| all && RESULT_FILES.contains(&n);
    for (d, frames) in [(dir.join("frames"), true), (dir.to_path_buf(), false)] {
        let Ok(entries) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            let name = e.file_name();
            let Some(n) = name.to_str() else { continue };
            if (frames && is_frame(n)) || (!frames && (is_chart(n) || is_result(n))) {
                std::fs::remove_file(e.path()).map_err(|err| OutputError::io(e.path(), err))?;
            }
        }
    }
    Ok(())
}

/// `time`, then per receptor its cell value, standard error, particle count and kernel value.
fn receptors_csv(run: &ParticleRun) -> String {
    let mut out = String::from("time");
    for r in &run.receptors {
        let n = r.name.replace(',', ";");
        out.push_str(&format!(
            ",{n},{n}_std_error,{n}_particles,{n}_kernel,{n}_kernel_std_error"
        ));
    }
    out.push('\n');
    for (k, t) in run.times.iter().enumerate() {
        out.push_str(&format!("{t:e}"));
        for r in &run.receptors {
            let s = r.samples[k];
            out.push_str(&format!(
                ",{:e},{:e},{},{:e},{:e}",
                s.value, s.std_error, s.count, s.kernel, s.kernel_error
            ));
        }
        out.push('\n');
    }
    out
}

/// The particle budget, one row per step.
fn budget_csv(run: &ParticleRun) -> String {
    let mut out = String::from(
        "time,step,released,in_water,out_west,out_east,out_south,out_north,decayed,residual,particles_released,particles_in_water\n",
    );
    for b in &run.budget {
        out.push_str(&format!(
            "{:e},{},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{},{}\n",
            b.time,
            b.step,
            b.released,
            b.in_water,
            b.out[0],
            b.out[1],
            b.out[2],
            b.out[3],
            b.decayed,
            b.residual,
            b.released_count,
            b.in_water_count
        ));
    }
    out
}

fn opt(v: Option<f64>) -> String {
    v.map(|x| format!("{x:e}")).unwrap_or_default()
}

/// One row per receptor: the two peaks, times and arrivals, the particle error and count,
/// the verdict and the sentence.
fn comparison_csv(c: &[ReceptorComparison]) -> String {
    let mut out = String::from(
        "receptor,grid_peak,particle_peak,particle_std_error,particle_count,kernel_peak,grid_peak_time,particle_peak_time,grid_arrival,particle_arrival,verdict,sentence\n",
    );
    for r in c {
        let verdict = r.verdict.as_str();
        out.push_str(&format!(
            "{},{:e},{:e},{:e},{},{:e},{:e},{:e},{},{},{},\"{}\"\n",
            r.name.replace(',', ";"),
            r.grid_peak,
            r.particle_peak,
            r.particle_std_error,
            r.particle_count,
            r.kernel_peak,
            r.grid_peak_time,
            r.particle_peak_time,
            opt(r.grid_arrival),
            opt(r.particle_arrival),
            verdict,
            r.sentence.replace('"', "'")
        ));
    }
    out
}

/// Frames `NNNNN.png` of the kernel maps, in one colour range; returns how many.
fn draw_frames(scn: &Scenario, model: &Model, run: &ParticleRun, dir: &Path) -> Result<usize, OutputError> {
    let g = &model.grid;
    let wet = model.mask.as_slice();
    let peak = run
        .frames
        .iter()
        .flat_map(|f| f.kernel.iter().copied())
        .fold(0.0, f64::max);
    let range = run_range(scn, peak, 0.0);
    let title = format!(
        "{}: {} particles, kernel of {} cell",
        scn.name, run.particles, run.bandwidth
    );
    let marks = markers::markers(scn);
    for (k, f) in run.frames.iter().enumerate() {
        let values: Vec<f64> = f.kernel.iter().copied().collect();
        let spec = FrameSpec {
            nx: g.nx,
            ny: g.ny,
            values: &values,
            wet: Some(wet),
            tracer: &scn.tracer.name,
            units: &scn.tracer.units,
            time_s: f.time,
            scale: scn.output.colour,
            range,
            title: Some(&title),
            extent: Some(markers::extent(g)),
            markers: &marks,
        };
        output::write_frame_png(&dir.join(format!("{k:05}.png")), &spec)?;
    }
    Ok(run.frames.len())
}

/// Grid and particle curves of receptor `k`: the grid, the particle cell values and the
/// particle kernel values; the caption gives the error at the particle peak.
fn comparison_chart(scn: &Scenario, run: &ParticleRun, k: usize, name: &str, grid_t: &[f64], grid_c: &[f64]) -> Chart {
    let r = &run.receptors[k];
    let (d, unit) = time_unit(
        run.times
            .last()
            .copied()
            .unwrap_or(1.0)
            .max(grid_t.last().copied().unwrap_or(1.0)),
    );
    let label = format!("{} [{}]", scn.tracer.name, scn.tracer.units);
    let mut c = Chart::new(
        format!("{}: {name}, grid and particles", scn.name),
        Axis::linear(format!("time [{unit}]")),
        Axis::linear(label),
    );
    let t: Vec<f64> = run.times.iter().map(|t| t / d).collect();
    let (grid_colour, _) = auto_style(0);
    let (part_colour, _) = auto_style(1);
    c.lines.push(
        Line::new(
            format!("grid ({})", scn.scheme.limiter.name()),
            grid_t.iter().map(|t| t / d).collect(),
            grid_c.to_vec(),
        )
        .colour(grid_colour)
        .dash(Dash::Solid),
    );
    c.lines.push(
        Line::new(
            format!("particles ({}, cell value)", run.particles),
            t.clone(),
            r.samples.iter().map(|s| s.value).collect(),
        )
        .colour(part_colour)
        .dash(Dash::Dashed),
    );
    let (kernel_colour, _) = auto_style(2);
    c.lines.push(
        Line::new(
            format!("particles, kernel of {} cell", run.bandwidth),
            t,
            r.samples.iter().map(|s| s.kernel).collect(),
        )
        .colour(kernel_colour)
        .dash(Dash::Long),
    );
    c.caption = Some(format!(
        "particle cell value at its peak: {:.3e} ± {:.2e} (one standard error, {} particles in the cell)",
        r.at_peak.value, r.at_peak.std_error, r.at_peak.count
    ));
    c
}

/// Adds the particle summary `p` to the grid run in `run_dir` (its `summary.json` and
/// `report.html`) when the folder holds a completed run of the same scenario; returns whether
/// it did. Call it holding the folder's lock.
pub fn attach_to_run(run_dir: &Path, scn: &Scenario, p: &ParticleSummary) -> Result<bool, OutputError> {
    let Some(mut summary) = super::folder::completed_run_summary(run_dir, scn) else {
        return Ok(false);
    };
    summary.files.retain(|f| !f.starts_with(&format!("{FOLDER}/")));
    summary.files.extend(p.files.iter().cloned());
    summary.particles = Some(p.clone());
    let json = serde_json::to_string_pretty(&summary).expect("summary serialises");
    output::write_atomic(&run_dir.join("summary.json"), json.as_bytes())?;
    crate::report::write_run_report(run_dir, scn, &summary)?;
    Ok(true)
}
