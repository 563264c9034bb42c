//! Shared helpers for the integration tests: building models and runs in a few lines, and
//! error norms against exact solutions.
#![allow(dead_code)]

use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use tinct::flow::{FlowKind, FlowSpec};
use tinct::grid::{Grid, Mask};
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::Boundaries;
use tinct::ops::limiter::Limiter;
use tinct::step::{Scheme, Simulation};

/// A model spec with no land, no diffusion, no decay, no sources.
pub fn spec(grid: Grid, flow: FlowKind, boundaries: Boundaries) -> ModelSpec {
    ModelSpec {
        grid,
        mask: None,
        depth: 1.0.into(),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec::steady(flow),
        boundaries,
        sources: vec![],
    }
}

/// A scheme with the given limiter and stages at the default Courant number.
pub fn scheme(limiter: Limiter, stages: u8) -> Scheme {
    Scheme {
        limiter,
        stages,
        ..Scheme::default()
    }
}

/// Builds a simulation from a spec, a scheme and an initial field given as a function.
pub fn sim(spec: ModelSpec, scheme: Scheme, f: impl Fn(f64, f64) -> f64) -> Simulation {
    let model = Model::new(spec).expect("valid model");
    let c0 = model.field_from(f);
    Simulation::new(model, scheme, c0).expect("valid run")
}

/// Runs to `t`, calling `each` after every step.
pub fn run_to(s: &mut Simulation, t: f64, mut each: impl FnMut(&Simulation) + Send) {
    s.advance_to(t, |s| {
        each(s);
        ControlFlow::Continue(())
    })
    .expect("run completes");
}

/// Relative L1 error of the interior field against `exact` at cell centres:
/// sum |c - e| / sum |e| over water cells.
pub fn l1_error(s: &Simulation, exact: impl Fn(f64, f64) -> f64) -> f64 {
    let g = &s.model.grid;
    let (mut num, mut den) = (0.0, 0.0);
    for ((j, i), &c) in s.field_view().indexed_iter() {
        if !s.model.mask.is_wet(i, j) {
            continue;
        }
        let (x, y) = g.centre(i, j);
        let e = exact(x, y);
        num += (c - e).abs();
        den += e.abs();
    }
    num / den
}

/// Observed order of convergence from errors on grids refined by `ratio`.
pub fn order(coarse: f64, fine: f64, ratio: f64) -> f64 {
    (coarse / fine).ln() / ratio.ln()
}

/// A mask with a rectangular island.
pub fn island(grid: &Grid, x: (f64, f64), y: (f64, f64)) -> Mask {
    Mask::all_water(grid)
        .with_land(grid, |cx, cy| cx > x.0 && cx < x.1 && cy > y.0 && cy < y.1)
        .expect("some water")
}

/// Runs the real `tinct` binary with `args` in the folder `cwd`.
pub fn tinct(args: &[&str], cwd: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tinct"))
        .args(args)
        .current_dir(cwd)
        .output()
        .expect("binary runs")
}

/// The project's root folder.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Limits the size of any file `cmd`'s process writes to `limit` bytes (RLIMIT_FSIZE), with
/// SIGXFSZ ignored so that a write past it fails with EFBIG ("File too large") instead of
/// killing the process: how a full disk or a quota looks to the program.
#[allow(dead_code)]
pub fn limit_file_size(cmd: &mut std::process::Command, limit: u64) {
    use std::os::unix::process::CommandExt;
    // SAFETY: only async-signal-safe calls between fork and exec.
    unsafe {
        cmd.pre_exec(move || {
            let lim = libc::rlimit {
                rlim_cur: limit,
                rlim_max: limit,
            };
            if libc::setrlimit(libc::RLIMIT_FSIZE, &lim) != 0 {
                return Err(std::io::Error::last_os_error());
            }
            libc::signal(libc::SIGXFSZ, libc::SIG_IGN);
            Ok(())
        });
    }
}

/// Writes a small explicit base scenario for sweep tests into `dir` (`base.toml`): `nx` x
/// `nx/2` cells of 10 m, a uniform current east, a puff released at `start`, a receptor
/// downstream with a threshold, `end` seconds, two frames.
pub fn write_sweep_base(dir: &Path, nx: usize, end: f64) -> PathBuf {
    let text = format!(
        r#"name = "base"
[grid]
nx = {nx}
ny = {ny}
dx = 10.0
depth = 3.0
[tracer]
diffusivity = 0.5
[flow]
kind = "uniform"
velocity = [0.1, 0.0]
[boundary]
west = "open"
east = "open"
south = "wall"
north = "wall"
[[source]]
name = "spill"
at = [60.0, 100.0]
mass = 1.0e6
start = 0.0
spread = 20.0
[[receptor]]
name = "beach"
at = [300.0, 100.0]
threshold = 1.0
[scheme]
convection = "van_leer"
[run]
end = {end:?}
frames = 2
"#,
        ny = nx / 2
    );
    let path = dir.join("base.toml");
    std::fs::write(&path, text).unwrap();
    path
}

/// `c_max(y, x)` of a run's `fields.nc`.
pub fn c_max(fields_nc: &Path) -> Vec<f64> {
    let mut r = netcdf3::FileReader::open(fields_nc).unwrap();
    r.read_var("c_max").unwrap().get_f64_into().unwrap()
}
