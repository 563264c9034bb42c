//! `tinct check`: the regime report of a scenario without marching it in time. Prints which
//! term wins where (cell Peclet numbers, regimes), the stable explicit steps and the step the
//! run will take, upwind's numerical diffusivity against the physical one, advice, and a
//! memory and run-time estimate; writes `<dir>/<name>/check/` (an extension of DESIGN §5):
//! `regime.png`, `peclet.png`, `courant.png`, `numerical_diffusion.png`, `check.json` (every
//! number) and `check.txt` (the printed report). Exits 2 when the scenario cannot run as
//! written (a fixed step above an explicit stability limit) unless `--force`.

use super::{bad_input, failed, fmt_t, Failure};
use std::path::{Path, PathBuf};
use tinct::diagnostics::advice::{self, percent, sig, Advice, Severity};
use tinct::diagnostics::regime::{self, CellMaps, Cost, Regime, RegimeReport};
use tinct::output::colour::{ramp_rgb, ColourScale, Ramp};
use tinct::output::maps::{self, Category, CategoryMap, ScalarMap};
use tinct::output::OutputError;
use tinct::scenario::{LoadOptions, Scenario};
use tinct::step::Scheme;

/// Arguments of `tinct check`.
#[derive(clap::Args)]
pub struct CheckArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Output folder (default: the scenario's `output.dir`, else `out`); the report goes to
    /// `<DIR>/<name>/check/`.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key, e.g. `--set grid.nx=400` (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// Exit 0 even when a fixed `scheme.dt` is above an explicit stability limit.
    #[arg(long)]
    force: bool,
}

/// The numerical choices, as `check.json` records them.
#[derive(serde::Serialize)]
struct SchemeJson {
    convection: String,
    time: String,
    stages: u8,
    theta: f64,
    courant: f64,
    dt: Option<f64>,
}

/// `check.json`.
#[derive(serde::Serialize)]
struct CheckJson<'a> {
    program: String,
    scenario: &'a str,
    scenario_file: String,
    scheme: SchemeJson,
    /// False when the scenario cannot run as written.
    runnable: bool,
    report: &'a RegimeReport,
    advice: &'a [Advice],
    cost: &'a Cost,
    files: Vec<&'static str>,
    caution: &'static str,
}

const FILES: [&str; 6] = [
    "regime.png",
    "peclet.png",
    "courant.png",
    "numerical_diffusion.png",
    "check.json",
    "check.txt",
];

/// Runs `tinct check`.
pub fn main(a: CheckArgs) -> Result<(), Failure> {
    // Load with the step accepted whatever it is, so an unstable fixed step is reported on.
    let options = LoadOptions {
        allow_unstable: true,
        many_frames: true,
    };
    let scn = tinct::scenario::load_with(&a.scenario, &a.sets, options).map_err(|e| bad_input(e.to_string()))?;
    let model = scn
        .build_model()
        .map_err(|e| bad_input(format!("{}: {e}", scn.path.display())))?;
    let dt = regime::run_step(&model, &scn.scheme).map_err(|e| bad_input(format!("{}: {e}", scn.path.display())))?;
    let (maps, report) = regime::analyse(&model, &scn.scheme, dt);
    let advice = advice::advise(&model, &scn.scheme, &report);
    let initial = model.field_from(|x, y| scn.initial.value_at(x, y));
    let cost = regime::measure_cost(&model, &scn.scheme, initial, dt, scn.run.end, 3)
        .map_err(|e| bad_input(format!("{}: {e}", scn.path.display())))?;
    let runnable = !advice.iter().any(|x| x.severity == Severity::Blocking);

    let dir = a
        .out
        .unwrap_or_else(|| scn.output.dir.clone())
        .join(&scn.name)
        .join("check");
    let text = report_text(&scn, &report, &advice, &cost, &dir);
    write_all(&dir, &scn, &maps, &report, &advice, &cost, runnable, &text)
        .map_err(|e| failed(format!("writing the check report: {e}")))?;
    {
        use std::io::Write;
        let _ = std::io::stdout().lock().write_all(text.as_bytes());
    }
    if !runnable && !a.force {
        return Err(bad_input(format!(
            "{}: cannot run as written (a fixed scheme.dt above an explicit stability limit; see above); --force accepts it",
            scn.path.display()
        )));
    }
    Ok(())
}

/// Writes the maps, `check.json` and `check.txt` into `dir`.
#[allow(clippy::too_many_arguments)]
fn write_all(
    dir: &Path,
    scn: &Scenario,
    m: &CellMaps,
    r: &RegimeReport,
    advice: &[Advice],
    cost: &Cost,
    runnable: bool,
    text: &str,
) -> Result<(), OutputError> {
    std::fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
    let (nx, ny) = (m.nx, m.ny);
    let wet = Some(&m.wet[..]);
    let extent = tinct::run::markers::extent(&scn.model.grid);
    let marks = tinct::run::markers::markers(scn);

    // Regime map.
    let colours = |r: Regime| match r {
        Regime::ConvectionDominated => ramp_rgb(Ramp::Diverging, 0.88),
        Regime::DiffusionDominated => ramp_rgb(Ramp::Diverging, 0.12),
        Regime::NearStagnant => ramp_rgb(Ramp::Sequential, 0.97),
        Regime::Land => tinct::output::LAND_RGB,
    };
    let cats: Vec<Category> = Regime::ALL
        .iter()
        .map(|&g| Category {
            label: g.label(),
            rgb: colours(g),
        })
        .collect();
    let codes: Vec<u8> = m.regime.iter().map(|g| g.code()).collect();
    let title = format!("{}: which term wins where", scn.name);
    maps::write_category_png(
        &dir.join("regime.png"),
        &CategoryMap {
            nx,
            ny,
            codes: &codes,
            categories: &cats,
            title: &title,
            extent: Some(extent),
        },
    )?;

    // Peclet map: log scale, the diverging ramp's near-white centre at Pe = 2 (land is mid-grey).
    let (lo, hi) = centred_log_range(&m.pe, &m.wet, 2.0);
    let no_k = r.kx == 0.0 && r.ky == 0.0;
    let caption = if no_k {
        "cell Peclet number: infinite everywhere the water moves (no physical diffusivity)".to_string()
    } else {
        "cell Peclet number (log): near-white at Pe = 2, blue below, red above; land mid-grey".to_string()
    };
    let title = format!("{}: cell Peclet number", scn.name);
    maps::write_scalar_png(
        &dir.join("peclet.png"),
        &ScalarMap {
            nx,
            ny,
            values: &m.pe,
            wet,
            range: (lo, hi),
            scale: ColourScale::Log,
            ramp: Ramp::Diverging,
            caption: &caption,
            title: &title,
            extent: Some(extent),
            markers: &marks,
        },
    )?;

    // Courant map: linear, 0 to max(1, largest).
    let cmax = r.courant.max.max(1.0);
    let caption = format!(
        "Courant-number sum |u| dt/dx + |v| dt/dy at dt = {} s (explicit limit 1)",
        sig(r.dt, 4)
    );
    let title = format!("{}: Courant number", scn.name);
    maps::write_scalar_png(
        &dir.join("courant.png"),
        &ScalarMap {
            nx,
            ny,
            values: &m.courant,
            wet,
            range: (0.0, if cmax.is_finite() { cmax } else { 1.0 }),
            scale: ColourScale::Linear,
            ramp: Ramp::Sequential,
            caption: &caption,
            title: &title,
            extent: Some(extent),
            markers: &marks,
        },
    )?;

    // Numerical diffusion: ratio on a log scale centred at 1, or the diffusivity itself when
    // there is no physical one.
    let title = format!("{}: upwind numerical diffusion", scn.name);
    if no_k {
        let knum: Vec<f64> = m.k_num_x.iter().zip(&m.k_num_y).map(|(a, b)| a.max(*b)).collect();
        let top = knum.iter().copied().fold(0.0, f64::max);
        maps::write_scalar_png(
            &dir.join("numerical_diffusion.png"),
            &ScalarMap {
                nx,
                ny,
                values: &knum,
                wet,
                range: (0.0, if top > 0.0 { top } else { 1.0 }),
                scale: ColourScale::Linear,
                ramp: Ramp::Sequential,
                caption: "upwind numerical diffusivity [m2/s] (no physical diffusivity to compare with)",
                title: &title,
                extent: Some(extent),
                markers: &marks,
            },
        )?;
    } else {
        let (lo, hi) = centred_log_range(&m.ratio, &m.wet, 1.0);
        maps::write_scalar_png(
            &dir.join("numerical_diffusion.png"),
            &ScalarMap {
                nx,
                ny,
                values: &m.ratio,
                wet,
                range: (lo, hi),
                scale: ColourScale::Log,
                ramp: Ramp::Diverging,
                caption: "numerical / physical diffusivity (log): near-white where equal, red above; land mid-grey",
                title: &title,
                extent: Some(extent),
                markers: &marks,
            },
        )?;
    }

    let json = CheckJson {
        program: format!("tinct {}", env!("CARGO_PKG_VERSION")),
        scenario: &scn.name,
        scenario_file: scn.path.display().to_string(),
        scheme: scheme_json(&scn.scheme),
        runnable,
        report: r,
        advice,
        cost,
        files: FILES.to_vec(),
        caution: tinct::run::CAUTION,
    };
    let s =
        serde_json::to_string_pretty(&json).map_err(|e| OutputError::invalid(dir.join("check.json"), e.to_string()))?;
    tinct::output::write_atomic(&dir.join("check.json"), s.as_bytes())?;
    tinct::output::write_atomic(&dir.join("check.txt"), text.as_bytes())
}

fn scheme_json(s: &Scheme) -> SchemeJson {
    SchemeJson {
        convection: s.limiter.name().into(),
        time: s.time.name().into(),
        stages: s.stages,
        theta: s.effective_theta(),
        courant: s.courant,
        dt: s.dt,
    }
}

/// A log range `(centre / R, centre * R)` with R a power of ten of at least 10 covering the
/// finite positive wet values (capped at 1e6), so `centre` sits at the ramp's middle.
fn centred_log_range(values: &[f64], wet: &[bool], centre: f64) -> (f64, f64) {
    let mut r = 10.0f64;
    for (&v, &w) in values.iter().zip(wet) {
        if w && v.is_finite() && v > 0.0 {
            r = r.max(v / centre).max(centre / v);
        }
    }
    let r = 10f64.powf(r.log10().ceil()).min(1e6);
    (centre / r, centre * r)
}

fn mb(bytes: f64) -> String {
    if bytes >= 1e9 {
        format!("{:.2} GB", bytes / 1e9)
    } else {
        format!("{:.1} MB", bytes / 1e6)
    }
}

fn spread(s: &regime::Spread) -> String {
    format!(
        "min {}, median {}, 95% {}, max {}",
        sig(s.min, 3),
        sig(s.median, 3),
        sig(s.p95, 3),
        sig(s.max, 3)
    )
}

/// The printed report (also `check.txt`).
/// Depth, volume, discharge, residence time, tidal prism and projection in one or two lines.
fn flow_text(r: &RegimeReport) -> String {
    let f = &r.flow;
    let (h0, h1) = r.depth_range;
    let mut s = if h0 == h1 {
        format!("water       depth {} m", sig(h0, 4))
    } else {
        format!("water       depth {} to {} m", sig(h0, 4), sig(h1, 4))
    };
    s += &format!(", volume {} m3 over {} m2", sig(f.volume, 4), sig(f.area, 4));
    if f.discharge > 0.0 {
        s += &format!("; through-flow {} m3/s", sig(f.discharge, 4));
    }
    if let Some(t) = f.residence {
        s += &format!(", residence V/Q = {}", fmt_t(t));
    }
    if let Some(p) = f.prism {
        s += &format!(
            "; tidal prism 2 a A = {} m3 ({} of the volume)",
            sig(p, 4),
            percent(p / f.volume)
        );
    }
    s += &format!(
        "\nflow check  cell speeds {} to {} m/s; largest cell imbalance {} of the flow",
        sig(f.speed.0, 3),
        sig(f.speed.1, 3),
        sig(f.imbalance, 2)
    );
    if f.projected {
        s += &format!(
            "; the prescribed flow's divergence ({} of its largest face discharge) was removed around land and walls (flow.project)",
            sig(f.divergence, 2)
        );
    }
    s
}

fn report_text(scn: &Scenario, r: &RegimeReport, advice: &[Advice], cost: &Cost, dir: &Path) -> String {
    let mut t = String::new();
    let mut line = |s: String| {
        t.push_str(&s);
        t.push('\n');
    };
    let sch = &scn.scheme;
    line(format!("tinct check: {} ({})", scn.name, scn.path.display()));
    line(format!(
        "scheme      {} convection, {} time{}",
        sch.limiter.name(),
        sch.time.name(),
        if sch.time.implicit_convection() {
            String::new()
        } else {
            format!(", {} stage(s)", sch.stages)
        }
    ));
    line(format!(
        "grid        {} x {} cells of {} x {} m; {} wet cells ({})",
        r.nx,
        r.ny,
        sig(r.dx, 4),
        sig(r.dy, 4),
        r.wet_cells,
        percent(r.wet_cells as f64 / (r.nx * r.ny) as f64)
    ));
    let [u0, u1, v0, v1] = r.face_velocity_range;
    line(format!(
        "flow        u {} to {} m/s, v {} to {} m/s, largest cell speed {} m/s; largest discrete divergence {} 1/s",
        sig(u0, 3),
        sig(u1, 3),
        sig(v0, 3),
        sig(v1, 3),
        sig(r.max_speed, 3),
        sig(r.max_divergence, 2)
    ));
    line(flow_text(r));
    line(format!(
        "diffusivity Kx {} m2/s, Ky {} m2/s",
        sig(r.kx, 3),
        sig(r.ky, 3)
    ));
    line(format!(
        "Peclet      Pe_x = |u| dx/Kx: {}; above 2 in {} of wet cells",
        spread(&r.peclet_x),
        percent(r.share_peclet_x_above_2)
    ));
    line(format!(
        "            Pe_y = |v| dy/Ky: {}; above 2 in {} of wet cells",
        spread(&r.peclet_y),
        percent(r.share_peclet_y_above_2)
    ));
    let regimes: Vec<String> = r
        .regimes
        .iter()
        .map(|(g, s)| format!("{} {}", g.name().replace('_', "-"), percent(*s)))
        .collect();
    line(format!("regimes     {} (of all cells)", regimes.join(", ")));
    let l = &r.limits;
    line(format!(
        "stable dt   explicit convection {} s (Courant sum <= 1; the same for 1 to 3 SSP stages), diffusion {} s, positivity of upwind with diffusion {} s",
        sig(l.convection, 4),
        sig(l.diffusion, 4),
        sig(l.positivity, 4)
    ));
    line(format!(
        "no new extrema (explicit convection; Courant-number sum, with explicit diffusion C (1 + sup psi/r / 2) + 2 D <= 1): upwind 1, minmod 0.667, van_albada 0.624, van_leer, mc, superbee and koren 0.5{}",
        match (l.no_new_extrema, l.tvd_courant) {
            (Some(b), Some(c)) => format!("; '{}' here: {} s (Courant sum {})", sch.limiter.name(), sig(b, 4), sig(c, 3)),
            (None, None) => format!("; '{}' is unbounded: it oscillates at any step", sch.limiter.name()),
            _ => String::new(),
        }
    ));
    let how = match sch.dt {
        Some(_) => "fixed".to_string(),
        None => format!("automatic, target Courant {}", sch.courant),
    };
    let bound = if l.binding.is_finite() {
        format!(", {:.0}% of the limit of this time scheme", 100.0 * r.dt_over_bound)
    } else {
        ", no explicit limit for this time scheme".to_string()
    };
    line(format!("run dt      {} s ({how}){bound}", sig(r.dt, 4)));
    line(format!(
        "            Courant sum {}; diffusion number {}",
        spread(&r.courant),
        sig(r.diffusion_number, 3)
    ));
    line(format!(
        "upwind K    numerical Kx {} m2/s; Ky {} m2/s",
        spread(&r.numerical_kx),
        spread(&r.numerical_ky)
    ));
    line(format!("            {}", advice::diffusion_sentence(r)));
    line(format!(
        "cost        about {} of fields; {} steps x {} s per step (fastest of {} timed) + {} s set-up = about {}",
        mb(cost.memory_bytes),
        cost.steps,
        sig(cost.step_seconds, 2),
        cost.steps_timed,
        sig(cost.setup_seconds, 2),
        fmt_t(cost.run_seconds)
    ));
    if advice.is_empty() {
        line("advice      none: nothing stands out".into());
    } else {
        line("advice".into());
        for a in advice {
            line(format!("  - {}: {}", a.severity.word(), a.text));
        }
    }
    line(format!("files       {}: {}", dir.display(), FILES.join(", ")));
    line(format!("caution: {}", tinct::run::CAUTION));
    t
}
