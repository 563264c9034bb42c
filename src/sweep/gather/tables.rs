//! The gather's CSV files: `receptors.csv` (one row per receptor and quantity: counts,
//! quantiles 5/50/95 (Hyndman & Fan 1996 type 7), min, max, mean and the worst member),
//! `members_receptors.csv` (one row per member: index, status, axis values, per receptor peak,
//! time of peak, arrival and time above) and `failed.csv` (members that did not finish, with
//! their exit code and the tail of `stderr.log`). Times are in seconds; an empty field means
//! no value (never arrived, no threshold, or the member did not finish).

use super::stats::{Quantity, ReceptorGather};
use super::{MemberOutcome, MemberState};
use crate::output::{write_atomic, OutputError};
use std::path::Path;

fn csv_bytes(path: &Path, rows: &[Vec<String>]) -> Result<Vec<u8>, OutputError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    for r in rows {
        w.write_record(r)
            .map_err(|e| OutputError::invalid(path, format!("CSV: {e}")))?;
    }
    w.into_inner()
        .map_err(|e| OutputError::invalid(path, format!("CSV: {e}")))
}

fn write(dir: &Path, name: &str, rows: &[Vec<String>], files: &mut Vec<String>) -> Result<(), OutputError> {
    let path = dir.join(name);
    write_atomic(&path, &csv_bytes(&path, rows)?)?;
    files.push(format!("{}/{name}", super::GATHER_DIR));
    Ok(())
}

fn opt(v: Option<f64>) -> String {
    v.map(|v| format!("{v}")).unwrap_or_default()
}

/// Writes the three CSV files into `dir`.
pub fn write_all(
    dir: &Path,
    keys: &[String],
    members: &[MemberOutcome],
    receptors: &[ReceptorGather],
    files: &mut Vec<String>,
) -> Result<(), OutputError> {
    let mut rows = vec![[
        "receptor",
        "quantity",
        "unit",
        "threshold",
        "members",
        "with_value",
        "without_value",
        "p5",
        "p50",
        "p95",
        "min",
        "max",
        "mean",
        "worst_member",
        "worst_value",
    ]
    .map(String::from)
    .to_vec()];
    for r in receptors {
        for q in &r.quantities {
            let d = q.dist;
            let f = |g: fn(&super::Distribution) -> f64| opt(d.as_ref().map(g));
            rows.push(vec![
                r.name.clone(),
                q.quantity.key().into(),
                if q.quantity.is_time() {
                    "s".into()
                } else {
                    "tracer units".into()
                },
                opt(r.threshold),
                r.members.to_string(),
                d.map_or(0, |d| d.n).to_string(),
                q.missing.to_string(),
                f(|d| d.p5),
                f(|d| d.p50),
                f(|d| d.p95),
                f(|d| d.min),
                f(|d| d.max),
                f(|d| d.mean),
                q.worst.as_ref().map(|w| w.member.to_string()).unwrap_or_default(),
                opt(q.worst.as_ref().map(|w| w.value)),
            ]);
        }
    }
    write(dir, "receptors.csv", &rows, files)?;

    let mut head: Vec<String> = vec!["index".into(), "status".into()];
    head.extend(keys.iter().cloned());
    for r in receptors {
        for q in Quantity::ALL {
            head.push(format!("{} {}", r.name, q.key()));
        }
    }
    let mut rows = vec![head];
    for m in members {
        let status = match &m.state {
            MemberState::Finished => "finished",
            MemberState::Failed { .. } => "failed",
            MemberState::NotRun => "not run",
        };
        let mut row = vec![m.index.to_string(), status.into()];
        row.extend(m.values.iter().cloned());
        for r in receptors {
            let s = m.receptors.iter().find(|s| s.name == r.name);
            row.push(opt(s.map(|s| s.peak)));
            row.push(opt(s.map(|s| s.peak_time)));
            row.push(opt(s.and_then(|s| s.arrival_time)));
            row.push(opt(s.and_then(|s| s.time_above_threshold)));
        }
        rows.push(row);
    }
    write(dir, "members_receptors.csv", &rows, files)?;

    let mut head: Vec<String> = vec!["index".into()];
    head.extend(keys.iter().cloned());
    head.extend(["state", "exit_code", "reason", "stderr_tail"].map(String::from));
    let mut rows = vec![head];
    for m in members {
        let (state, code, reason, tail) = match &m.state {
            MemberState::Finished => continue,
            MemberState::Failed {
                exit_code,
                reason,
                stderr_tail,
            } => (
                "failed",
                exit_code.map(|c| c.to_string()).unwrap_or_default(),
                reason.clone(),
                stderr_tail.join("\n"),
            ),
            MemberState::NotRun => ("not run", String::new(), "no member folder".to_string(), String::new()),
        };
        let mut row = vec![m.index.to_string()];
        row.extend(m.values.iter().cloned());
        row.extend([state.to_string(), code, reason, tail]);
        rows.push(row);
    }
    write(dir, "failed.csv", &rows, files)
}
