//! Checkpoints: a run stopped after any step, written to `checkpoint.bin` bytes, read back and
//! restored into a simulation freshly built from the same scenario, continues bit for bit (the
//! field, every budget-row column, receptor rows and statistics, envelope, exceedance, plume
//! moments and the `fields.nc` records); and a checkpoint of another scenario, a damaged file,
//! another magic or another format version is refused with a message saying which.

use std::ops::ControlFlow;
use std::path::Path;
use tinct::budget::BudgetRow;
use tinct::run::checkpoint::{self, Checkpoint, CheckpointError, FrameRecord};
use tinct::run::envelope::Envelope;
use tinct::run::exceedance::Exceedance;
use tinct::run::receptors::ReceptorLog;
use tinct::run::summary::PlumeTrack;
use tinct::scenario::Scenario;
use tinct::step::Simulation;

/// A 40 x 24 channel with openings west and east, a tide that fills and drains it, diffusion,
/// decay, a continuous source and an instantaneous release in mid-run, and two receptors with
/// thresholds; `scheme` is the `[scheme]` table.
fn scenario_text(scheme: &str) -> String {
    format!(
        r#"
name = "ckp"
[grid]
nx = 40
ny = 24
dx = 10.0
depth = 2.0
[tracer]
name = "dye"
diffusivity = 0.5
t90 = 4000.0
[flow]
kind = "openings"
tide = {{ period = 24000.0, phase = 0.0, amplitude = 0.3 }}
[[flow.opening]]
name = "in"
side = "west"
from = 40.0
to = 200.0
discharge = 40.0
[[flow.opening]]
name = "out"
side = "east"
from = 40.0
to = 200.0
discharge = -40.0
[boundary]
west = {{ kind = "open", value = 0.2 }}
east = "open"
south = "wall"
north = "wall"
[[source]]
name = "pipe"
at = [80.0, 120.0]
rate = 50.0
start = 500.0
stop = 3000.0
[[source]]
name = "spill"
at = [150.0, 100.0]
mass = 4000.0
start = 1500.0
spread = 15.0
[[receptor]]
name = "near"
at = [200.0, 110.0]
threshold = 0.3
[[receptor]]
name = "far"
at = [330.0, 130.0]
threshold = 0.05
[scheme]
{scheme}
[run]
end = 6000.0
frames = 6
log_every = 5
"#
    )
}

fn parse(text: &str) -> Scenario {
    tinct::scenario::parse(text, Path::new("ckp.toml"), &[]).expect("test scenario parses")
}

/// The march loop of `run::execute` without files: the simulation and every observer.
struct Run {
    sim: Simulation,
    rows: Vec<BudgetRow>,
    receptors: ReceptorLog,
    envelope: Envelope,
    exceed: Option<Exceedance>,
    plume: PlumeTrack,
    frames: Vec<FrameRecord>,
    dt_range: (f64, f64),
    iterations: (usize, usize),
}

impl Run {
    fn start(scn: &Scenario) -> Self {
        let sim = fresh_sim(scn);
        let grid = sim.model.grid;
        let wet: Vec<bool> = sim.model.mask.as_slice().to_vec();
        let recs: Vec<_> = scn
            .receptors
            .iter()
            .map(|r| (r.name.clone(), r.at, r.threshold))
            .collect();
        let mut receptors = ReceptorLog::new(&grid, &recs).expect("receptors inside");
        let named: Vec<(String, Option<f64>)> = recs.iter().map(|(n, _, t)| (n.clone(), *t)).collect();
        let exceed = Exceedance::new(&grid, &wet, &named, sim.state.t, &sim.state.c);
        receptors.record(0.0, 0.0, &sim.state.c);
        let envelope = Envelope::new(&grid, &sim.state.c);
        let mut plume = PlumeTrack::new(scn);
        plume.observe(&grid, sim.state.t, sim.field_view(), sim.model.mask.view());
        let frames = vec![FrameRecord {
            time: sim.state.t,
            values: sim.field().into_iter().collect(),
        }];
        Self {
            rows: vec![sim.budget_row()],
            sim,
            receptors,
            envelope,
            exceed,
            plume,
            frames,
            dt_range: (f64::INFINITY, 0.0),
            iterations: (0, 0),
        }
    }

    /// Marches on (from the next frame not yet written) until the end, or until the step
    /// count reaches `stop_at`; returns whether the end was reached.
    fn march(&mut self, scn: &Scenario, stop_at: Option<u64>) -> bool {
        let n_frames = scn.run.frames;
        let end = scn.run.end;
        let log_every = scn.run.log_every.max(1);
        let grid = self.sim.model.grid;
        for k in self.frames.len()..=n_frames {
            let target = if k == n_frames {
                end
            } else {
                end * k as f64 / n_frames as f64
            };
            let Self {
                sim,
                rows,
                receptors,
                envelope,
                exceed,
                dt_range,
                iterations,
                ..
            } = self;
            let mut stopped = false;
            sim.advance_to(target, |s| {
                let st = &s.state;
                dt_range.0 = dt_range.0.min(st.last_dt);
                dt_range.1 = dt_range.1.max(st.last_dt);
                let (it, corr) = s.last_iterations();
                iterations.0 += it;
                iterations.1 += corr;
                receptors.sample(st.t, st.last_dt, &st.c);
                envelope.observe(&grid, &st.c);
                if let Some(e) = exceed.as_mut() {
                    e.observe(&grid, &st.c, st.t);
                }
                if st.step % log_every == 0 {
                    rows.push(s.budget_row());
                    receptors.keep_row(st.t, &st.c);
                    if let Some(e) = exceed.as_mut() {
                        e.keep_row(st.t);
                    }
                }
                if Some(st.step) == stop_at {
                    stopped = true;
                    return ControlFlow::Break(());
                }
                ControlFlow::Continue(())
            })
            .expect("the test run marches");
            if stopped {
                return false;
            }
            if rows.last().map(|r| r.step) != Some(sim.state.step) {
                rows.push(sim.budget_row());
                receptors.keep_row(sim.state.t, &sim.state.c);
                if let Some(e) = exceed.as_mut() {
                    e.keep_row(sim.state.t);
                }
            }
            self.frames.push(FrameRecord {
                time: self.sim.state.t,
                values: self.sim.field().into_iter().collect(),
            });
            self.plume.observe(
                &grid,
                self.sim.state.t,
                self.sim.field_view(),
                self.sim.model.mask.view(),
            );
        }
        true
    }

    fn checkpoint(&self, scn: &Scenario) -> Checkpoint {
        Checkpoint {
            tinct_version: env!("CARGO_PKG_VERSION").to_string(),
            scenario_hash: checkpoint::scenario_hash(scn).expect("hash"),
            scenario_name: scn.name.clone(),
            sim: self.sim.snapshot(),
            rows: self.rows.clone(),
            receptors: self.receptors.clone(),
            envelope: self.envelope.clone(),
            exceedance: self.exceed.clone(),
            plume: self.plume.clone(),
            frame_records: self.frames.clone(),
            dt_range: self.dt_range,
            iterations: self.iterations,
            wall_seconds: 1.5,
            output_seconds: 0.25,
            threads: rayon::current_num_threads(),
        }
    }

    /// A run rebuilt from the scenario and the checkpoint.
    fn resume(scn: &Scenario, ck: Checkpoint) -> Self {
        let mut sim = fresh_sim(scn);
        sim.restore(ck.sim).expect("restore fits");
        Self {
            sim,
            rows: ck.rows,
            receptors: ck.receptors,
            envelope: ck.envelope,
            exceed: ck.exceedance,
            plume: ck.plume,
            frames: ck.frame_records,
            dt_range: ck.dt_range,
            iterations: ck.iterations,
        }
    }
}

fn fresh_sim(scn: &Scenario) -> Simulation {
    let model = scn.build_model().expect("model");
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    Simulation::new(model, scn.scheme, c0).expect("simulation")
}

fn bytes<T: serde::Serialize>(x: &T) -> Vec<u8> {
    postcard::to_stdvec(x).expect("serialises")
}

/// Asserts two finished runs are bit-identical, naming the first difference.
fn assert_identical(a: &Run, b: &Run, what: &str) {
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<u64>>();
    let view_bits = |s: &Simulation| s.field_view().mapv(f64::to_bits);
    assert_eq!(a.sim.state.step, b.sim.state.step, "{what}: steps");
    assert_eq!(a.sim.state.t.to_bits(), b.sim.state.t.to_bits(), "{what}: time");
    // The interior: halo cells are refilled before every read, and the halo corners of the
    // buffers the stepper rotates through hold whatever scratch they were (never read).
    assert!(
        view_bits(&a.sim) == view_bits(&b.sim),
        "{what}: the final fields differ"
    );
    assert_eq!(a.rows.len(), b.rows.len(), "{what}: budget row count");
    for (ra, rb) in a.rows.iter().zip(&b.rows) {
        let cols = |r: &BudgetRow| {
            [
                r.time, r.dt, r.mass, r.added, r.inflow, r.outflow, r.decayed, r.residual, r.min, r.max, r.courant,
            ]
            .map(f64::to_bits)
        };
        assert_eq!(ra.step, rb.step, "{what}: budget row step");
        assert_eq!(cols(ra), cols(rb), "{what}: budget row at step {} differs", ra.step);
    }
    assert!(
        bytes(&a.receptors) == bytes(&b.receptors),
        "{what}: receptor rows or statistics differ"
    );
    assert!(
        bits(&a.envelope.c_max) == bits(&b.envelope.c_max),
        "{what}: envelopes differ"
    );
    assert!(
        bytes(&a.exceed) == bytes(&b.exceed),
        "{what}: exceedance statistics differ"
    );
    assert!(bytes(&a.plume) == bytes(&b.plume), "{what}: plume moments differ");
    assert!(bytes(&a.frames) == bytes(&b.frames), "{what}: fields.nc records differ");
    assert_eq!(a.iterations, b.iterations, "{what}: solver iterations");
    assert_eq!(a.dt_range.0.to_bits(), b.dt_range.0.to_bits(), "{what}: smallest step");
    assert_eq!(a.dt_range.1.to_bits(), b.dt_range.1.to_bits(), "{what}: largest step");
    let state = |r: &Run| {
        let mut s = r.sim.snapshot();
        s.c = r.sim.field().into_iter().collect();
        bytes(&s)
    };
    assert!(state(a) == state(b), "{what}: final simulation states differ");
    assert_eq!(a.sim.warnings(), b.sim.warnings(), "{what}: warnings");
}

/// Runs `scheme` straight through, then from checkpoints at six steps spread over the run
/// (the first step, either side of the mid-run release at a quarter of the run, half-way,
/// three quarters, the last step but one), and checks every continuation against the
/// straight run.
fn continues_bit_for_bit(scheme: &str) {
    continues_bit_for_bit_in(scheme, &scenario_text(scheme));
}

/// The same in a steady flow (no tide): the implicit steppers then reuse their assembled
/// matrix from step to step within a frame interval, while a restored one assembles afresh.
fn continues_bit_for_bit_steady(scheme: &str) {
    let text = scenario_text(scheme);
    let steady: String = text
        .lines()
        .filter(|l| !l.starts_with("tide"))
        .map(|l| format!("{l}\n"))
        .collect();
    assert_ne!(steady, text);
    continues_bit_for_bit_in(scheme, &steady);
}

fn continues_bit_for_bit_in(scheme: &str, text: &str) {
    let scn = parse(text);
    let mut whole = Run::start(&scn);
    assert!(whole.march(&scn, None));
    let n = whole.sim.state.step;
    assert!(n >= 40, "{scheme}: {n} steps only");
    // The run exercises what a checkpoint must carry.
    assert!(whole.sim.budget.added() > 0.0 && whole.sim.budget.decayed() > 0.0);
    assert!(whole.sim.budget.inflow() > 0.0 && whole.sim.budget.outflow() > 0.0);
    assert!(
        whole.receptors.stats().iter().all(|s| s.arrival_time.is_some()),
        "{scheme}: receptors reached"
    );
    assert!(whole.exceed.as_ref().is_some_and(|e| e.thresholds.len() == 2));
    if scheme.contains("implicit") || scheme.contains("crank_nicolson") {
        assert!(
            whole.iterations.1 > n as usize,
            "{scheme}: deferred corrections iterate"
        );
    }
    for split in [1, n / 4 - 1, n / 4 + 1, n / 2, 3 * n / 4, n - 1] {
        let mut first = Run::start(&scn);
        assert!(
            !first.march(&scn, Some(split)),
            "{scheme}: the run stops at step {split}"
        );
        let file = checkpoint::to_bytes(&first.checkpoint(&scn)).expect("encodes");
        let ck = checkpoint::from_bytes(&file, Path::new("checkpoint.bin"), &scn).expect("reads back");
        assert_eq!(ck.sim.step, split);
        assert_eq!(ck.threads, rayon::current_num_threads());
        let mut resumed = Run::resume(&scn, ck);
        assert!(resumed.march(&scn, None));
        assert_identical(&whole, &resumed, &format!("{scheme}, split at step {split}"));
        // The stopped run itself goes on identically too (snapshotting changes nothing).
        assert!(first.march(&scn, None));
        assert_identical(&whole, &first, &format!("{scheme}, continued after step {split}"));
    }
}

#[test]
fn explicit_van_leer_three_stages_continues_bit_for_bit() {
    continues_bit_for_bit("convection = \"van_leer\"\ntime = \"explicit\"\nstages = 3");
}

#[test]
fn implicit_backward_euler_with_deferred_correction_continues_bit_for_bit() {
    continues_bit_for_bit("convection = \"van_leer\"\ntime = \"implicit\"\ncourant = 1.5");
}

#[test]
fn crank_nicolson_with_deferred_correction_continues_bit_for_bit() {
    continues_bit_for_bit("convection = \"minmod\"\ntime = \"crank_nicolson\"\ncourant = 1.0");
}

#[test]
fn implicit_and_imex_in_a_steady_flow_continue_bit_for_bit() {
    continues_bit_for_bit_steady("convection = \"van_leer\"\ntime = \"implicit\"\ncourant = 1.5");
    continues_bit_for_bit_steady("convection = \"minmod\"\ntime = \"imex\"\ncourant = 0.8");
}

#[test]
fn imex_continues_bit_for_bit() {
    continues_bit_for_bit("convection = \"minmod\"\ntime = \"imex\"\ncourant = 0.8");
}

#[test]
fn a_split_on_a_frame_time_resumes_with_that_frame() {
    let scn = parse(&scenario_text("convection = \"van_leer\"\nstages = 3"));
    // Find the step that lands on the first frame time.
    let mut probe = Run::start(&scn);
    let mut at_frame = None;
    let t1 = scn.run.end / scn.run.frames as f64;
    probe
        .sim
        .advance_to(t1, |s| {
            at_frame = Some(s.state.step);
            ControlFlow::Continue(())
        })
        .expect("marches");
    let split = at_frame.expect("steps taken");
    let mut whole = Run::start(&scn);
    whole.march(&scn, None);
    let mut first = Run::start(&scn);
    assert!(!first.march(&scn, Some(split)));
    assert_eq!(first.sim.state.t, t1, "stopped exactly on the frame time");
    assert_eq!(first.frames.len(), 1, "the frame at t1 is not written yet");
    let ck = checkpoint::from_bytes(
        &checkpoint::to_bytes(&first.checkpoint(&scn)).expect("encodes"),
        Path::new("c"),
        &scn,
    )
    .unwrap();
    let mut resumed = Run::resume(&scn, ck);
    resumed.march(&scn, None);
    assert_identical(&whole, &resumed, "split on a frame time");
}

#[test]
fn a_small_difference_in_the_restored_state_is_detected() {
    // The comparison above is sharp: a relative change of 1e-12 in one cell shows in the end
    // state (a single ulp can be rounded away by the next step's arithmetic).
    let scn = parse(&scenario_text("convection = \"van_leer\"\nstages = 3"));
    let mut whole = Run::start(&scn);
    whole.march(&scn, None);
    let mut first = Run::start(&scn);
    first.march(&scn, Some(200));
    let mut ck = first.checkpoint(&scn);
    // The water cell holding the largest value.
    let g = first.sim.model.grid;
    let p = (0..g.ny)
        .flat_map(|j| (0..g.nx).map(move |i| g.idx(i as isize, j as isize)))
        .max_by(|&a, &b| ck.sim.c[a].total_cmp(&ck.sim.c[b]))
        .expect("cells");
    assert!(ck.sim.c[p] > 0.0);
    ck.sim.c[p] *= 1.0 + 1e-12;
    let mut resumed = Run::resume(&scn, ck);
    resumed.march(&scn, None);
    let same = whole
        .sim
        .field_view()
        .iter()
        .zip(&resumed.sim.field_view())
        .all(|(a, b)| a.to_bits() == b.to_bits());
    assert!(!same, "a one-ulp change must show in the final field");
}

fn explicit_checkpoint() -> (Scenario, Vec<u8>) {
    let scn = parse(&scenario_text("convection = \"van_leer\"\nstages = 3"));
    let mut run = Run::start(&scn);
    run.march(&scn, Some(12));
    let file = checkpoint::to_bytes(&run.checkpoint(&scn)).expect("encodes");
    (scn, file)
}

#[test]
fn a_checkpoint_of_another_scenario_is_refused_naming_it() {
    let (scn, file) = explicit_checkpoint();
    let other = parse(&scenario_text("convection = \"van_leer\"\nstages = 3").replace("t90 = 4000.0", "t90 = 4001.0"));
    let e = checkpoint::from_bytes(&file, Path::new("out/ckp/checkpoint.bin"), &other).unwrap_err();
    assert!(matches!(e, CheckpointError::Scenario { .. }), "{e:?}");
    let msg = e.to_string();
    assert!(msg.contains("scenario 'ckp'") && msg.contains("ckp.toml"), "{msg}");
    assert!(msg.contains("out/ckp/checkpoint.bin"), "{msg}");
    // The unchanged scenario reads it.
    assert!(checkpoint::from_bytes(&file, Path::new("c"), &scn).is_ok());
}

#[test]
fn an_input_file_that_changed_makes_another_scenario() {
    let dir = tempfile::tempdir().unwrap();
    let depth: String = (0..24).map(|_| vec!["2.0"; 40].join(",") + "\n").collect();
    std::fs::write(dir.path().join("depth.csv"), &depth).unwrap();
    let text = scenario_text("convection = \"upwind\"").replace("depth = 2.0", "depth = \"depth.csv\"");
    let path = dir.path().join("ckp.toml");
    std::fs::write(&path, text).unwrap();
    let scn = tinct::scenario::load(&path, &[]).expect("loads");
    let mut run = Run::start(&scn);
    run.march(&scn, Some(4));
    let ck_path = dir.path().join("checkpoint.bin");
    checkpoint::write(&ck_path, &run.checkpoint(&scn)).expect("writes");
    assert!(checkpoint::read(&ck_path, &scn).is_ok());
    // One depth value changed: the scenario text is the same, the input file is not.
    std::fs::write(dir.path().join("depth.csv"), depth.replacen("2.0", "2.1", 1)).unwrap();
    let changed = tinct::scenario::load(&path, &[]).expect("loads");
    assert_eq!(changed.resolved_toml(), scn.resolved_toml());
    let e = checkpoint::read(&ck_path, &changed).unwrap_err();
    assert!(matches!(e, CheckpointError::Scenario { .. }), "{e:?}");
}

#[test]
fn a_damaged_checkpoint_is_an_error_not_a_panic() {
    let (scn, file) = explicit_checkpoint();
    let p = Path::new("checkpoint.bin");
    // Truncated anywhere.
    for cut in [
        0,
        5,
        8,
        12,
        19,
        20,
        21,
        100,
        file.len() / 2,
        file.len() - 33,
        file.len() - 1,
    ] {
        let e = checkpoint::from_bytes(&file[..cut], p, &scn).unwrap_err();
        let msg = e.to_string();
        if cut < 8 {
            assert!(matches!(e, CheckpointError::NotACheckpoint { .. }), "cut {cut}: {msg}");
        } else {
            assert!(matches!(e, CheckpointError::Damaged { .. }), "cut {cut}: {msg}");
            assert!(msg.contains("damaged"), "{msg}");
        }
    }
    // One flipped bit anywhere after the header.
    let mut rng = 0x9E37_79B9_7F4A_7C15u64;
    for _ in 0..200 {
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        let k = 20 + (rng % (file.len() as u64 - 20)) as usize;
        let mut bad = file.clone();
        bad[k] ^= 1 << (rng % 8);
        let e = checkpoint::from_bytes(&bad, p, &scn).unwrap_err();
        assert!(matches!(e, CheckpointError::Damaged { .. }), "byte {k}: {e}");
    }
    // A consistent file (digest recomputed) whose body does not decode.
    let mut forged = file[..20].to_vec();
    let body = vec![0xFFu8; 64];
    forged[12..20].copy_from_slice(&(body.len() as u64).to_le_bytes());
    forged.extend_from_slice(&body);
    use sha2::Digest;
    forged.extend_from_slice(&sha2::Sha256::digest(&body));
    let e = checkpoint::from_bytes(&forged, p, &scn).unwrap_err();
    assert!(matches!(e, CheckpointError::Damaged { .. }), "{e}");
    // An absurd announced length.
    let mut huge = file.clone();
    huge[12..20].copy_from_slice(&u64::MAX.to_le_bytes());
    assert!(matches!(
        checkpoint::from_bytes(&huge, p, &scn),
        Err(CheckpointError::Damaged { .. })
    ));
}

#[test]
fn another_magic_or_format_version_is_refused_saying_which() {
    let (scn, file) = explicit_checkpoint();
    let p = Path::new("checkpoint.bin");
    let mut png = file.clone();
    png[..8].copy_from_slice(b"\x89PNG\r\n\x1a\n");
    let e = checkpoint::from_bytes(&png, p, &scn).unwrap_err();
    assert!(e.to_string().contains("not a tinct checkpoint"), "{e}");
    let mut v2 = file.clone();
    v2[8..12].copy_from_slice(&(checkpoint::FORMAT_VERSION + 1).to_le_bytes());
    let e = checkpoint::from_bytes(&v2, p, &scn).unwrap_err();
    match &e {
        CheckpointError::FormatVersion { found, expected, .. } => {
            assert_eq!(
                (*found, *expected),
                (checkpoint::FORMAT_VERSION + 1, checkpoint::FORMAT_VERSION)
            );
        }
        other => panic!("expected a format-version refusal, got {other:?}"),
    }
    assert!(e.to_string().contains("format version 2"), "{e}");
}

#[test]
fn another_tinct_version_is_refused_saying_which() {
    let scn = parse(&scenario_text("convection = \"van_leer\"\nstages = 3"));
    let mut run = Run::start(&scn);
    run.march(&scn, Some(5));
    let mut ck = run.checkpoint(&scn);
    ck.tinct_version = "0.0.1-old".into();
    let e = checkpoint::from_bytes(&checkpoint::to_bytes(&ck).expect("encodes"), Path::new("c"), &scn).unwrap_err();
    assert!(matches!(e, CheckpointError::TinctVersion { .. }), "{e:?}");
    let msg = e.to_string();
    assert!(
        msg.contains("0.0.1-old") && msg.contains(env!("CARGO_PKG_VERSION")),
        "{msg}"
    );
}

#[test]
fn restore_refuses_a_state_of_another_run() {
    let scn = parse(&scenario_text("convection = \"van_leer\"\nstages = 3"));
    let mut run = Run::start(&scn);
    run.march(&scn, Some(5));
    let snap = run.sim.snapshot();
    // Another scheme (implicit): another largest step and another stepper.
    let other = parse(&scenario_text(
        "convection = \"van_leer\"\ntime = \"implicit\"\ncourant = 2.0",
    ));
    let mut sim = fresh_sim(&other);
    assert!(sim.restore(snap.clone()).is_err());
    // A field of the wrong size.
    let mut short = snap.clone();
    short.c.pop();
    let mut sim = fresh_sim(&scn);
    let e = sim.restore(short).unwrap_err();
    assert!(e.contains("another grid"), "{e}");
    // A non-finite cell value.
    let mut nan = snap.clone();
    let p = sim.model.grid.idx(3, 4);
    nan.c[p] = f64::NAN;
    let e = sim.restore(nan).unwrap_err();
    assert!(e.contains("cell (3, 4)"), "{e}");
    // Nothing was changed by the refusals; the good one restores.
    assert_eq!(sim.state.step, 0);
    sim.restore(snap).expect("fits");
    assert_eq!(sim.state.step, 5);
}
