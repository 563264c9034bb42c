//! `tinct verify`: runs the built-in verification cases and prints one row per case; exit 1 if
//! any fails.

use super::{failed, Failure};

/// Arguments of `tinct verify` (none yet).
#[derive(clap::Args)]
pub struct VerifyArgs {}

/// Runs `tinct verify`.
pub fn main(_: VerifyArgs) -> Result<(), Failure> {
    let started = std::time::Instant::now();
    let rows = tinct::studies::verify::verify();
    println!(
        "{:<38} | {:<78} | {:<36} | {:>11} | {:<46} | pass",
        "case", "published source", "metric", "value", "tolerance"
    );
    for r in &rows {
        let v = r.value.map_or_else(|| "failed".into(), |v| format!("{v:.4e}"));
        println!(
            "{:<38} | {:<78} | {:<36} | {:>11} | {:<46} | {}",
            r.case,
            r.source,
            r.metric,
            v,
            r.tolerance,
            if r.pass { "yes" } else { "NO" }
        );
    }
    println!();
    for r in &rows {
        if !r.note.is_empty() {
            println!("{}: {}", r.case, r.note);
        }
    }
    let bad = rows.iter().filter(|r| !r.pass).count();
    println!(
        "{} of {} cases pass ({:.1} s)",
        rows.len() - bad,
        rows.len(),
        started.elapsed().as_secs_f64()
    );
    if bad > 0 {
        return Err(failed(format!("{bad} verification case(s) failed")));
    }
    Ok(())
}
