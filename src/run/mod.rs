//! Running a scenario end to end: builds the model, marches it, and writes every output of
//! DESIGN §5 into `<dir>/<name>/` (scenario as run, budget log, receptor series, frames,
//! NetCDF fields, summary). The folder is locked and cleared first ([`folder`]), the logs are
//! appended row by row as the run goes ([`logs`]) and every other file is written atomically,
//! so the folder never holds a half-written file under its final name; a run that diverges or
//! is interrupted still writes what it has (budget, receptors, fields so far, a summary saying
//! why it stopped). Nothing here prints: progress goes to a callback.

pub mod checkpoint;
pub mod cost;
pub mod envelope;
pub mod exceedance;
pub mod folder;
pub mod frames;
pub mod logs;
pub mod markers;
pub mod particles;
pub mod plots;
pub mod receptors;
pub mod summary;

use crate::budget::BudgetRow;
use crate::output::{self, FieldMeta, FieldsWriter, OutputError};
use crate::scenario::Scenario;
use crate::step::Simulation;
use crate::RunError;
use ndarray::ArrayView2;
use receptors::ReceptorLog;
use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;
pub use summary::RunSummary;

/// The caution printed with results and stored in `summary.json`.
pub const CAUTION: &str = "Screening estimate only: results depend on the prescribed flow, diffusivity, decay and \
sources, and are not a substitute for a calibrated, site-specific study. Local regulations and licensed \
professionals decide on any action affecting people or the environment.";

/// Where a run is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Progress {
    /// Simulated time, s.
    pub t: f64,
    /// End time, s.
    pub end: f64,
    /// Steps taken.
    pub step: u64,
    /// The last step, s.
    pub dt: f64,
}

/// A finished (or stopped) run: its folder and summary.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    /// `<dir>/<name>/`.
    pub dir: PathBuf,
    /// What `summary.json` holds.
    pub summary: RunSummary,
    /// Step and time of the checkpoint a resumed run continued from.
    pub resumed_from: Option<(u64, f64)>,
}

/// How a run is carried out, beyond its scenario.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// When set (by the CLI's signal handler), the run stops after the step under way and
    /// finishes like a stopped run: logs, fields and frames so far, `summary.json` with status
    /// `interrupted` ([`RunFailure::Interrupted`]).
    pub stop: Option<Arc<AtomicBool>>,
    /// Continue from `<dir>/<name>/checkpoint.bin` instead of starting afresh: the state, the
    /// logs and the fields are restored to the checkpoint and the run goes on from there, so
    /// its files end bit-identical to an uninterrupted run's (apart from wall times).
    pub resume: bool,
}

/// Why a run did not complete.
#[derive(Debug, thiserror::Error)]
pub enum RunFailure {
    /// The scenario cannot run as written (exit code 2).
    #[error("{0}")]
    BadInput(String),
    /// The output folder cannot be created, locked or written; nothing was run (exit code 2).
    #[error("the output folder cannot be used: {0}")]
    Folder(#[from] folder::FolderError),
    /// An output file could not be written during the run (exit code 1). Every file already in
    /// the folder is complete; `summary.json` says `failed` when it could still be written.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// The stop flag was raised; the outputs up to the last step were written (the CLI exits
    /// with 130).
    #[error("interrupted at t = {} s; the results up to then are in {}", .0.summary.simulated_time, .0.dir.display())]
    Interrupted(Box<RunOutcome>),
    /// The run diverged or a solve failed; the outputs up to that step were written (exit
    /// code 1).
    #[error("{error}")]
    Stopped {
        /// What happened.
        error: RunError,
        /// The partial run.
        outcome: Box<RunOutcome>,
    },
}

/// CF standard name for a few common tracers (CF standard name table), else none.
pub fn standard_name(tracer: &str) -> Option<&'static str> {
    match tracer.to_ascii_lowercase().as_str() {
        "temperature" | "heat" | "water_temperature" => Some("sea_water_temperature"),
        "salinity" | "salt" => Some("sea_water_salinity"),
        _ => None,
    }
}

/// Runs `scn`, writing into `<out_base>/<name>/`, with the default [`RunOptions`] (no stop
/// flag); see [`execute_with`].
pub fn execute(
    scn: &Scenario,
    out_base: &Path,
    on_start: &mut dyn FnMut(&[String]),
    progress: &mut (dyn FnMut(Progress) + Send),
) -> Result<RunOutcome, RunFailure> {
    execute_with(scn, out_base, &RunOptions::default(), on_start, progress)
}

/// Runs `scn`, writing into `<out_base>/<name>/`. `on_start` receives the warnings about the
/// numerical choices once the run is set up (the advice of `tinct check` of severity warning
/// and above, which includes [`crate::step::scheme_warnings`]); `progress` is called after every
/// step. Before the first step the folder is created, locked ([`folder::lock_folder`]: a second
/// run into it is refused with [`RunFailure::Folder`]), cleared of an earlier run's files and
/// marked `running` in `summary.json`; any failure there is [`RunFailure::Folder`]. A write that
/// fails later is [`RunFailure::Output`], after `summary.json` was set to `failed` if it could be.
pub fn execute_with(
    scn: &Scenario,
    out_base: &Path,
    options: &RunOptions,
    on_start: &mut dyn FnMut(&[String]),
    progress: &mut (dyn FnMut(Progress) + Send),
) -> Result<RunOutcome, RunFailure> {
    // Everything that can be refused is refused before the folder is created.
    let model = scn
        .build_model()
        .map_err(|e| RunFailure::BadInput(format!("{}: {e}", scn.path.display())))?;
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    let mut sim = Simulation::new(model, scn.scheme, c0)
        .map_err(|e| RunFailure::BadInput(format!("{}: {e}", scn.path.display())))?;
    let grid = sim.model.grid;
    let recs: Vec<_> = scn
        .receptors
        .iter()
        .map(|r| (r.name.clone(), r.at, r.threshold))
        .collect();
    let mut receptors = ReceptorLog::new(&grid, &recs)
        .ok_or_else(|| RunFailure::BadInput(format!("{}: a receptor lies outside the grid", scn.path.display())))?;

    // Advice about the numerical choices (as `tinct check` gives it); warnings go to on_start.
    let (_, regime) = crate::diagnostics::regime::analyse(&sim.model, &sim.scheme, sim.dt_max());
    let advice = crate::diagnostics::advice::advise(&sim.model, &sim.scheme, &regime);
    let start_warnings: Vec<String> = advice
        .iter()
        .filter(|a| a.severity >= crate::diagnostics::advice::Severity::Warning)
        .map(|a| a.text.clone())
        .collect();
    on_start(&start_warnings);
    let mut plume = summary::PlumeTrack::new(scn);
    let dir = out_base.join(&scn.name);
    let frames_dir = dir.join("frames");
    // The folder: every failure up to the first step means it cannot take the run (exit 2).
    let _lock = folder::lock_folder(&dir)?;
    let setup = |e: OutputError| RunFailure::Folder(e.into());
    let resumed = if options.resume {
        let ck = resume_from(&dir, scn, &mut sim)?;
        if ck.threads != rayon::current_num_threads() {
            on_start(&[format!(
                "the checkpoint was written by a run with {} thread(s) and this one has {}: sums over row blocks round differently, so the continuation matches an uninterrupted run to round-off, not bit for bit",
                ck.threads,
                rayon::current_num_threads()
            )]);
        }
        Some(ck)
    } else {
        None
    };
    let resumed_from = resumed.as_ref().map(|_| (sim.state.step, sim.state.t));
    folder::prepare_folder(&dir, options.resume).map_err(setup)?;
    let start_summary = folder::StartSummary::new(scn);
    start_summary.write(&dir).map_err(setup)?;
    std::fs::create_dir_all(&frames_dir).map_err(|e| setup(OutputError::io(&frames_dir, e)))?;
    output::write_atomic(&dir.join("scenario.toml"), scn.resolved_toml().as_bytes()).map_err(setup)?;

    let wet: Vec<bool> = sim.model.mask.as_slice().to_vec();
    let wet_yx = sim.model.mask.view().to_owned();
    let n_frames = scn.run.frames;
    let title = format!("{} ({})", scn.name, scn.scheme.limiter.name());
    let history = format!("tinct {} run {}", env!("CARGO_PKG_VERSION"), scn.path.display());
    let long_name = format!("{} concentration", scn.tracer.name);
    let named_thresholds: Vec<(String, Option<f64>)> = recs.iter().map(|(n, _, t)| (n.clone(), *t)).collect();
    let mut exceed = exceedance::Exceedance::new(&grid, &wet, &named_thresholds, sim.state.t, &sim.state.c);
    let thresholds: Vec<f64> = exceed
        .iter()
        .flat_map(|e| e.thresholds.iter().map(|t| t.value))
        .collect();
    let threshold_comment = exceed
        .as_ref()
        .map(|e| {
            let parts: Vec<String> = (0..e.thresholds.len()).map(|k| e.label(k)).collect();
            format!("threshold (receptors): {}", parts.join("; "))
        })
        .unwrap_or_default();
    let meta = FieldMeta {
        name: frames::FIELD,
        long_name: &long_name,
        units: &scn.tracer.units,
        standard_name: standard_name(&scn.tracer.name),
        title: &scn.name,
        history: &history,
        thresholds: &thresholds,
        threshold_comment: &threshold_comment,
    };
    let nc_path = dir.join("fields.nc");
    let mut fields = FieldsWriter::create(&nc_path, &grid.xs(), &grid.ys(), n_frames + 1, &meta).map_err(setup)?;

    let started = Instant::now();
    // Seconds spent writing outputs, of the wall time.
    let mut output_seconds = 0.0;
    let mut rows: Vec<BudgetRow> = vec![sim.budget_row()];
    let (mut dt_min, mut dt_max) = (f64::INFINITY, 0.0f64);
    let mut iterations = (0usize, 0usize);
    let mut envelope = envelope::Envelope::new(&grid, &sim.state.c);
    // The fields written to fields.nc so far (a checkpoint carries them).
    let mut frame_records: Vec<checkpoint::FrameRecord> = Vec::new();
    // Wall seconds of the run before this process (a resumed run).
    let mut earlier_wall = 0.0;
    // A frame's field goes to fields.nc now; its picture is drawn once the run's range is known.
    let write_frame = |t: f64,
                       values: Vec<f64>,
                       fields: &mut FieldsWriter,
                       records: &mut Vec<checkpoint::FrameRecord>,
                       secs: &mut f64|
     -> Result<(), OutputError> {
        let t0 = Instant::now();
        let r = cells_view(&grid, &values, &nc_path).and_then(|v| fields.write_record(t, v, Some(wet_yx.view())));
        records.push(checkpoint::FrameRecord { time: t, values });
        *secs += t0.elapsed().as_secs_f64();
        r
    };
    match resumed {
        Some(ck) => {
            rows = ck.rows;
            receptors = ck.receptors;
            envelope = ck.envelope;
            exceed = ck.exceedance;
            plume = ck.plume;
            (dt_min, dt_max) = ck.dt_range;
            iterations = ck.iterations;
            output_seconds = ck.output_seconds;
            earlier_wall = ck.wall_seconds;
            for r in ck.frame_records {
                write_frame(r.time, r.values, &mut fields, &mut frame_records, &mut output_seconds).map_err(setup)?;
            }
        }
        None => {
            receptors.record(0.0, 0.0, &sim.state.c);
            write_frame(
                sim.state.t,
                grid.interior(&sim.state.c),
                &mut fields,
                &mut frame_records,
                &mut output_seconds,
            )
            .map_err(setup)?;
            plume.observe(&grid, sim.state.t, sim.field_view(), sim.model.mask.view());
        }
    }
    let mut logs = logs::RunLogs::create(&dir, &rows, &receptors, exceed.as_ref()).map_err(setup)?;
    let ck_path = dir.join(checkpoint::FILE);
    let scenario_hash = checkpoint::scenario_hash(scn).map_err(|e| RunFailure::BadInput(e.to_string()))?;
    let ck_every = scn.run.checkpoint_every;
    let mut next_ck_t = ck_every.map_or(f64::INFINITY, |e| sim.state.t + e);
    let mut last_ck = Instant::now();

    // From here a write that fails is a failed run (exit 1): summary.json says so if it can.
    let fail = |e: OutputError| {
        let mut failed = start_summary.clone();
        failed.status = "failed".into();
        failed.error = Some(e.to_string());
        let _ = failed.write(&dir);
        RunFailure::Output(e)
    };
    let stop = options.stop.clone();
    let stopped = || stop.as_ref().is_some_and(|f| f.load(Ordering::Relaxed));
    let mut interrupted = false;
    let end = scn.run.end;
    let log_every = scn.run.log_every.max(1);
    // A mass, residual or value that is not finite fails the run (from the initial state on).
    let mut failure: Option<RunError> = sim.check_row(&rows[0]).err();
    let mut written = frame_records.len();
    for k in (written..=n_frames).take_while(|_| failure.is_none()) {
        let mut bad_row: Option<RunError> = None;
        let mut write_error: Option<OutputError> = None;
        let target = if k == n_frames {
            end
        } else {
            end * k as f64 / n_frames as f64
        };
        let res = sim.advance_to(target, |s| {
            let st = &s.state;
            dt_min = dt_min.min(st.last_dt);
            dt_max = dt_max.max(st.last_dt);
            let (it, corr) = s.last_iterations();
            iterations.0 += it;
            iterations.1 += corr;
            // Statistics from every step; a CSV row only with a budget row.
            receptors.sample(st.t, st.last_dt, &st.c);
            envelope.observe(&grid, &st.c);
            if let Some(e) = exceed.as_mut() {
                e.observe(&grid, &st.c, st.t);
            }
            if st.step % log_every == 0 {
                let row = s.budget_row();
                rows.push(row);
                receptors.keep_row(st.t, &st.c);
                if let Some(e) = exceed.as_mut() {
                    e.keep_row(st.t);
                }
                if let Err(e) = logs.append_last(&row, &receptors, exceed.as_ref()) {
                    write_error = Some(e);
                    return ControlFlow::Break(());
                }
                if let Err(e) = s.check_row(&row) {
                    bad_row = Some(e);
                    return ControlFlow::Break(());
                }
            }
            progress(Progress {
                t: st.t,
                end,
                step: st.step,
                dt: st.last_dt,
            });
            let stop_now = stopped();
            // A checkpoint after a whole step with its observers (never after a failure): every
            // `run.checkpoint_every` simulated seconds, else every minute of wall time, and
            // when a signal stops the run.
            let due = match ck_every {
                Some(every) => {
                    st.t >= next_ck_t && {
                        next_ck_t = ((st.t / every).floor() + 1.0) * every;
                        true
                    }
                }
                None => last_ck.elapsed().as_secs_f64() >= CHECKPOINT_WALL_SECONDS,
            };
            // Only a state that passes the budget checks (finite mass, values and residual)
            // replaces the last good checkpoint.
            if (due || stop_now) && s.check_row(&s.budget_row()).is_ok() {
                let ck = checkpoint_of(
                    scn,
                    scenario_hash,
                    s,
                    (&rows, &receptors, &envelope, exceed.as_ref(), &plume),
                    frame_records.clone(),
                    ((dt_min, dt_max), iterations),
                    (earlier_wall + started.elapsed().as_secs_f64(), output_seconds),
                );
                if let Err(e) = checkpoint::write(&ck_path, &ck) {
                    write_error = Some(e);
                    return ControlFlow::Break(());
                }
                last_ck = Instant::now();
            }
            if stop_now {
                interrupted = true;
                return ControlFlow::Break(());
            }
            ControlFlow::Continue(())
        });
        if let Some(e) = write_error {
            return Err(fail(e));
        }
        if let Some(e) = bad_row {
            failure = Some(e);
            break;
        }
        let mut keep_all = |rows: &mut Vec<BudgetRow>,
                            receptors: &mut ReceptorLog,
                            exceed: &mut Option<exceedance::Exceedance>|
         -> Result<(), RunFailure> {
            let row = sim.budget_row();
            rows.push(row);
            receptors.keep_row(sim.state.t, &sim.state.c);
            if let Some(e) = exceed.as_mut() {
                e.keep_row(sim.state.t);
            }
            logs.append_last(&row, receptors, exceed.as_ref()).map_err(fail)
        };
        if let Err(e) = res {
            keep_all(&mut rows, &mut receptors, &mut exceed)?;
            failure = Some(e);
            break;
        }
        if rows.last().map(|r| r.step) != Some(sim.state.step) {
            keep_all(&mut rows, &mut receptors, &mut exceed)?;
        }
        if interrupted {
            // The logs end at the step the run stopped at; no frame for the unfinished interval.
            // checkpoint: written here by the resume work (the state after this step).
            if let Some(e) = rows.last().and_then(|r| sim.check_row(r).err()) {
                failure = Some(e);
            }
            break;
        }
        if let Some(e) = rows.last().and_then(|r| sim.check_row(r).err()) {
            failure = Some(e);
            break;
        }
        write_frame(
            sim.state.t,
            grid.interior(&sim.state.c),
            &mut fields,
            &mut frame_records,
            &mut output_seconds,
        )
        .map_err(fail)?;
        plume.observe(&grid, sim.state.t, sim.field_view(), sim.model.mask.view());
        written += 1;
    }
    // The last checkpoint: a completed run resumed only rewrites its results.
    if failure.is_none() && !interrupted {
        let ck = checkpoint_of(
            scn,
            scenario_hash,
            &sim,
            (&rows, &receptors, &envelope, exceed.as_ref(), &plume),
            std::mem::take(&mut frame_records),
            ((dt_min, dt_max), iterations),
            (earlier_wall + started.elapsed().as_secs_f64(), output_seconds),
        );
        checkpoint::write(&ck_path, &ck).map_err(fail)?;
    }
    // The particle run beside (`run.particles`), once the grid run has completed.
    let particle_run = match scn.run.particles {
        Some(n) if failure.is_none() && !interrupted => {
            let stop = options.stop.as_deref();
            let dt = crate::particles::march::particle_dt(&sim.model, end);
            let mut step = 0;
            let mut tell = |t: f64| {
                step += 1;
                progress(Progress { t, end, step, dt });
            };
            let (run, wall) = particles::march_particles(scn, &sim.model, n, particles::DEFAULT_SEED, stop, &mut tell)
                .map_err(|e| fail(OutputError::invalid(dir.join(particles::FOLDER), e.to_string())))?;
            interrupted = run.interrupted;
            Some((run, wall))
        }
        _ => None,
    };
    // Logs, fields and pictures: written whether or not the run completed.
    let finish = || -> Result<(RunSummary, Result<(), OutputError>), OutputError> {
        let writing = Instant::now();
        logs.sync()?;
        fields.write_max(cells_view(&grid, &envelope.c_max, &nc_path)?, Some(wet_yx.view()))?;
        if let Some(e) = &exceed {
            fields.write_hours_above(e.hours_above().view(), Some(wet_yx.view()))?;
        }
        fields.finish()?;
        let lowest = rows.iter().map(|r| r.min).fold(f64::INFINITY, f64::min);
        let style = frames::FrameStyle {
            scn,
            wet: &wet,
            range: frames::run_range(scn, envelope.peak(&wet), lowest),
            title: &title,
            animate: scn.output.animation,
            extent: markers::extent(&grid),
            markers: markers::markers(scn),
        };
        let gif = frames::render_frames(&nc_path, &frames_dir, written, &style)?;
        frames::write_envelope_png(scn, &envelope.c_max, &style, &dir.join("envelope.png"))?;
        remove_stale_frames(&frames_dir, written);
        if let Some((palette, gif)) = gif {
            let delay = output::animation::frame_delay(gif.len());
            output::animation::write_gif(&gif, &palette, delay, &dir.join("animation.gif"))?;
        }
        output_seconds += writing.elapsed().as_secs_f64();
        let wall = earlier_wall + started.elapsed().as_secs_f64();
        let mut summary = RunSummary::new(
            scn,
            &sim,
            &rows,
            receptors.stats(),
            (dt_min, dt_max),
            wall,
            written,
            failure.as_ref(),
            iterations,
        );
        summary.advice = advice;
        (summary.effective_diffusivity, summary.effective_diffusivity_reason) =
            plume.finish(sim.model.kx, sim.model.ky);
        (summary.flushing, summary.flushing_reason) = summary::flushing_of(scn, &sim.model, &rows);
        summary.output_seconds = output_seconds;
        let march = wall - output_seconds;
        summary.cell_updates_per_second = if march > 0.0 {
            (summary.cells as f64) * (summary.steps as f64) / march
        } else {
            0.0
        };
        if let Some(e) = &exceed {
            summary.exceedance = e.figures(&envelope.c_max, |i, j| grid.centre(i, j));
            summary.files.push("exceedance.csv".into());
        }
        if interrupted && failure.is_none() {
            summary.status = "interrupted".into();
            summary.error = Some(match &particle_run {
                Some((p, _)) => format!(
                    "interrupted by a signal during the particle run, at its t = {} s (the grid run completed)",
                    p.times.last().copied().unwrap_or(0.0)
                ),
                None => format!("interrupted by a signal at t = {} s", sim.state.t),
            });
        }
        if let Some((run, wall)) = &particle_run {
            let p = particles::write_particle_outputs(&dir, scn, &sim.model, run, &receptors, *wall)?;
            summary.files.extend(p.files.iter().cloned());
            summary.particles = Some(p);
        }
        // Charts and the report; summary.json is written even when they fail.
        let extras = Instant::now();
        let pictures = write_charts_and_report(scn, &dir, &rows, &receptors, exceed.as_ref(), &mut summary);
        summary.output_seconds += extras.elapsed().as_secs_f64();
        let json = serde_json::to_string_pretty(&summary).expect("summary serialises");
        output::write_atomic(&dir.join("summary.json"), json.as_bytes())?;
        Ok((summary, pictures))
    };
    let (summary, pictures) = finish().map_err(fail)?;
    // A chart or report that failed: summary.json already holds the run's facts.
    pictures?;
    let outcome = Box::new(RunOutcome {
        dir,
        summary,
        resumed_from,
    });
    match failure {
        None if interrupted => Err(RunFailure::Interrupted(outcome)),
        None => Ok(*outcome),
        Some(error) => Err(RunFailure::Stopped { error, outcome }),
    }
}

/// Wall seconds between checkpoints when `run.checkpoint_every` is not given.
pub const CHECKPOINT_WALL_SECONDS: f64 = 60.0;

/// The march's observers, by reference: budget rows, receptors, envelope, exceedance, plume.
type Observers<'a> = (
    &'a [BudgetRow],
    &'a ReceptorLog,
    &'a envelope::Envelope,
    Option<&'a exceedance::Exceedance>,
    &'a summary::PlumeTrack,
);

/// The checkpoint of a run at `sim`'s state: `counts` are the dt range and the summed
/// iterations, `seconds` the wall and output seconds so far.
fn checkpoint_of(
    scn: &Scenario,
    scenario_hash: [u8; 32],
    sim: &Simulation,
    (rows, receptors, envelope, exceed, plume): Observers,
    frame_records: Vec<checkpoint::FrameRecord>,
    (dt_range, iterations): ((f64, f64), (usize, usize)),
    (wall_seconds, output_seconds): (f64, f64),
) -> checkpoint::Checkpoint {
    checkpoint::Checkpoint {
        tinct_version: env!("CARGO_PKG_VERSION").into(),
        scenario_hash,
        scenario_name: scn.name.clone(),
        sim: sim.snapshot(),
        rows: rows.to_vec(),
        receptors: receptors.clone(),
        envelope: envelope.clone(),
        exceedance: exceed.cloned(),
        plume: plume.clone(),
        frame_records,
        dt_range,
        iterations,
        wall_seconds,
        output_seconds,
        threads: rayon::current_num_threads(),
    }
}

/// Reads `<dir>/checkpoint.bin` for `scn` and restores `sim` from it; any problem is bad input
/// (exit 2) saying what differs.
fn resume_from(dir: &Path, scn: &Scenario, sim: &mut Simulation) -> Result<checkpoint::Checkpoint, RunFailure> {
    let path = dir.join(checkpoint::FILE);
    if !path.exists() {
        return Err(RunFailure::BadInput(format!(
            "--resume: {} does not exist: nothing to resume (run without --resume to start afresh)",
            path.display()
        )));
    }
    let ck = checkpoint::read(&path, scn).map_err(|e| RunFailure::BadInput(format!("--resume: {e}")))?;
    sim.restore(ck.sim.clone())
        .map_err(|e| RunFailure::BadInput(format!("--resume: {}: {e}", path.display())))?;
    Ok(ck)
}

/// `plots/*.png` from the run's series, then `report.html`; adds them to `summary.files`.
fn write_charts_and_report(
    scn: &Scenario,
    dir: &Path,
    rows: &[BudgetRow],
    receptors: &ReceptorLog,
    exceed: Option<&exceedance::Exceedance>,
    summary: &mut RunSummary,
) -> Result<(), OutputError> {
    let (times, values) = receptors.times_and_values();
    let curves = receptors
        .stats()
        .iter()
        .zip(&values)
        .map(|(s, v)| plots::ReceptorCurve {
            name: &s.name,
            threshold: s.threshold,
            times: &times,
            values: v,
            arrival: s.arrival_time,
            peak: s.peak,
            peak_time: s.peak_time,
        })
        .collect();
    let row_times: Vec<f64> = rows.iter().map(|r| r.time).collect();
    let m0 = rows.first().map_or(0.0, |r| r.mass);
    let fraction: Vec<f64> = rows.iter().map(|r| r.mass / m0).collect();
    let flushing = summary.flushing.as_ref().map(|f| plots::FlushingCurve {
        times: &row_times,
        fraction: &fraction,
        rate: f.fitted_rate,
        e_folding: f.e_folding_time,
    });
    let series = exceed.map(|e| e.series());
    let exceedance = match (exceed, &series) {
        (Some(e), Some((t, areas))) => Some((
            &t[..],
            areas
                .iter()
                .enumerate()
                .map(|(k, a)| {
                    let t = &e.thresholds[k];
                    let label = format!("above {} {} ({})", t.value, scn.tracer.units, t.receptors.join(", "));
                    (label, a.clone())
                })
                .collect(),
        )),
        _ => None,
    };
    let input = plots::RunPlots {
        scenario: &scn.name,
        tracer: &scn.tracer.name,
        units: &scn.tracer.units,
        scale: scn.output.colour,
        rows,
        receptors: curves,
        flushing,
        exceedance,
    };
    let written = plots::write_run_plots(&dir.join("plots"), &input)?;
    for p in written {
        if let Ok(rel) = p.strip_prefix(dir) {
            summary.files.push(rel.to_string_lossy().replace('\\', "/"));
        }
    }
    summary.files.push(crate::report::REPORT_FILE.into());
    crate::report::write_run_report(dir, scn, summary)?;
    Ok(())
}

/// `budget.csv` with the DESIGN §5 columns.
pub fn budget_csv(rows: &[BudgetRow]) -> String {
    let mut out = String::from("time,step,dt,mass,added,inflow,outflow,decayed,residual,min,max,courant\n");
    for r in rows {
        out.push_str(&format!(
            "{:e},{},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e}\n",
            r.time, r.step, r.dt, r.mass, r.added, r.inflow, r.outflow, r.decayed, r.residual, r.min, r.max, r.courant
        ));
    }
    out
}

/// Removes `NNNNN.png` frames numbered `count` or above, left by an earlier, longer run.
fn remove_stale_frames(frames_dir: &Path, count: usize) {
    let Ok(entries) = std::fs::read_dir(frames_dir) else {
        return;
    };
    for e in entries.flatten() {
        let name = e.file_name();
        let Some(stem) = name.to_str().and_then(|n| n.strip_suffix(".png")) else {
            continue;
        };
        if stem.len() == 5 && stem.parse::<usize>().is_ok_and(|k| k >= count) {
            let _ = std::fs::remove_file(e.path());
        }
    }
}

/// `values` (`nx * ny`, row 0 south, as a checkpoint keeps them) as a (ny, nx) view; another
/// length (a damaged record) is an output error naming `path`.
fn cells_view<'a>(
    grid: &crate::grid::Grid,
    values: &'a [f64],
    path: &Path,
) -> Result<ArrayView2<'a, f64>, OutputError> {
    ArrayView2::from_shape(grid.shape(), values).map_err(|_| {
        OutputError::invalid(
            path,
            format!(
                "a field of {} values, expected ny * nx = {}",
                values.len(),
                grid.cells()
            ),
        )
    })
}
