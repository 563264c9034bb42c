//! The files of one receptor's influence maps, in `<dir>/<name>/influence/<receptor>/`:
//! `influence.png` (the map of the first release time, log colours, the receptor marked and the
//! ten most influential cells numbered), `influence.nc` (CF-1.8, one `(y, x)` variable per
//! release time, land as `_FillValue`), `candidates.csv` (the scenario's `[[candidate]]` points
//! ranked per release time) and `influence.json` (the facts: adjoint, window, release times,
//! units, wall seconds, caution). Every file is written atomically.

use super::rank::{rank, Ranked};
use super::{Influence, Window};
use crate::output::maps::{write_scalar_png, ScalarMap};
use crate::output::ncmaps::{write_maps, MapVar};
use crate::output::{write_atomic, ColourScale, Marker, MarkerKind, OutputError, Ramp};
use crate::scenario::Scenario;
use std::path::{Path, PathBuf};

/// The folder of a receptor's maps under a run folder `<dir>/<name>/`.
pub fn folder(run_dir: &Path, receptor: &str) -> PathBuf {
    run_dir.join("influence").join(receptor)
}

/// Decades of the map's log colour range below its largest value.
pub const DECADES: f64 = 4.0;

/// The files [`write`] puts in a receptor's folder (a new `tinct run` removes them).
pub const RESULT_FILES: [&str; 4] = ["influence.png", "influence.nc", "candidates.csv", "influence.json"];

/// Writes the four files of `inf` for the receptor named `receptor` (threshold `threshold`)
/// of `scn` into `dir` (created); `seconds` is the wall time of the backward run. Returns the
/// ranked candidates of each release time.
pub fn write(
    dir: &Path,
    scn: &Scenario,
    receptor: &str,
    threshold: Option<f64>,
    inf: &Influence,
    seconds: f64,
) -> Result<Vec<Vec<Ranked>>, OutputError> {
    std::fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
    let g = &scn.model.grid;
    let candidates: Vec<(String, (f64, f64))> = scn.candidates.iter().map(|c| (c.name.clone(), c.at)).collect();
    let ranked: Vec<Vec<Ranked>> = (0..inf.release_times.len())
        .map(|k| rank(inf, k, g, &candidates, threshold))
        .collect();
    // candidates.csv
    let mut csv = String::from("release_time,rank,name,x,y,i,j,dose_per_mass,mass_to_threshold\n");
    for (k, rows) in ranked.iter().enumerate() {
        for line in super::rank::csv(rows).lines().skip(1) {
            csv.push_str(&format!("{},{line}\n", inf.release_times[k]));
        }
    }
    write_atomic(&dir.join("candidates.csv"), csv.as_bytes())?;
    // influence.nc
    let names: Vec<String> = if inf.release_times.len() == 1 {
        vec!["influence".into()]
    } else {
        (0..inf.release_times.len())
            .map(|k| format!("influence_{k:03}"))
            .collect()
    };
    let comments: Vec<String> = inf
        .release_times
        .iter()
        .map(|t| {
            format!(
                "dose at receptor {receptor} per unit mass released in the cell at t = {t} s; {}; adjoint: {}",
                window_words(inf.window),
                inf.kind.label()
            )
        })
        .collect();
    let flat: Vec<Vec<f64>> = (0..inf.release_times.len())
        .map(|k| inf.map(k).iter().copied().collect())
        .collect();
    let units = format!("{} per unit mass", inf.units());
    let vars: Vec<MapVar> = (0..names.len())
        .map(|k| MapVar {
            name: &names[k],
            long_name: "receptor influence per unit released mass",
            units: &units,
            valid_range: None,
            comment: &comments[k],
            values: &flat[k],
        })
        .collect();
    write_maps(
        &dir.join("influence.nc"),
        &g.xs(),
        &g.ys(),
        &vars,
        &format!("{}: influence on receptor {receptor}", scn.name),
        "tinct influence",
    )?;
    // influence.png
    let top = inf.top_cells(0, 10);
    let hi = top.first().map_or(1.0, |c| c.2);
    let hi = if hi > 0.0 { hi } else { 1.0 };
    let mut markers = vec![Marker {
        x: inf.at.0,
        y: inf.at.1,
        label: receptor.to_string(),
        kind: MarkerKind::Receptor,
    }];
    for (n, (i, j, _)) in top.iter().enumerate() {
        let (x, y) = g.centre(*i, *j);
        markers.push(Marker {
            x,
            y,
            label: format!("{}", n + 1),
            kind: MarkerKind::Source,
        });
    }
    let wet: Vec<bool> = scn_wet(inf);
    let title = format!(
        "Influence on {receptor}: release at t = {}",
        crate::output::format_time(inf.release_times[0])
    );
    let caption = format!(
        "dose per unit mass released, {} ({}); log colours; 1-10: the most influential cells",
        inf.units(),
        window_words(inf.window)
    );
    write_scalar_png(
        &dir.join("influence.png"),
        &ScalarMap {
            nx: g.nx,
            ny: g.ny,
            values: &flat[0],
            wet: Some(&wet),
            range: (hi * 10f64.powf(-DECADES), hi),
            scale: ColourScale::Log,
            ramp: Ramp::Sequential,
            caption: &caption,
            title: &title,
            extent: Some(crate::run::markers::extent(g)),
            markers: &markers,
        },
    )?;
    // influence.json
    let json = serde_json::json!({
        "receptor": receptor,
        "at": [inf.at.0, inf.at.1],
        "cell": [inf.cell.0, inf.cell.1],
        "adjoint": inf.kind.label(),
        "duality": inf.kind.duality(),
        "window": match inf.window {
            Window::Span { start, end } => serde_json::json!({ "start": start, "end": end }),
            Window::At(t) => serde_json::json!({ "at": t }),
        },
        "dose": window_words(inf.window),
        "release_times": inf.release_times,
        "units": format!("{} per unit mass released (kg {} per kg)", inf.units(), inf.units()),
        "threshold": threshold,
        "mass_to_threshold": "the release mass whose window-mean concentration at the receptor (or concentration at the single time) reaches the threshold",
        "steps": inf.steps,
        "wall_seconds": seconds,
        "top_cells": top.iter().map(|(i, j, v)| {
            let (x, y) = g.centre(*i, *j);
            serde_json::json!({ "i": i, "j": j, "x": x, "y": y, "influence": v })
        }).collect::<Vec<_>>(),
        "caution": crate::run::CAUTION,
    });
    let text = serde_json::to_string_pretty(&json)
        .map_err(|e| OutputError::invalid(dir.join("influence.json"), e.to_string()))?;
    write_atomic(&dir.join("influence.json"), text.as_bytes())?;
    Ok(ranked)
}

/// Wet flags of the map (finite values), row-major, row 0 south.
fn scn_wet(inf: &Influence) -> Vec<bool> {
    inf.map(0).iter().map(|v| v.is_finite()).collect()
}

/// The dose in words.
pub fn window_words(w: Window) -> String {
    match w {
        Window::Span { start, end } => format!("concentration integrated over t = {start} to {end} s"),
        Window::At(t) => format!("concentration at t = {t} s"),
    }
}
