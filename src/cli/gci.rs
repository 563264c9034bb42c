//! `tinct gci`: the three-grid procedure of Celik et al. (2008) for values from any code,
//! printed as a small table.

use super::{bad_input, Failure};
use tinct::diagnostics::advice::sig;
use tinct::diagnostics::gci::{gci, spacing_from_cells, GciParams};

/// Arguments of `tinct gci`.
#[derive(clap::Args)]
pub struct GciArgs {
    /// The quantity on each grid, finest first: f1,f2,f3 (with a negative first value write
    /// `--values=-1.2,3,4`).
    #[arg(long, value_delimiter = ',', required = true, allow_negative_numbers = true)]
    values: Vec<f64>,
    /// Cell counts, finest first: N1,N2,N3 (h = (1/N)^(1/dims)).
    #[arg(
        long,
        value_delimiter = ',',
        conflicts_with = "spacing",
        required_unless_present = "spacing"
    )]
    cells: Vec<f64>,
    /// Representative cell sizes, finest first: h1,h2,h3.
    #[arg(long, value_delimiter = ',')]
    spacing: Vec<f64>,
    /// Dimensions of the grids (with --cells).
    #[arg(long, default_value_t = 2)]
    dims: u32,
}

fn three(v: &[f64], what: &str) -> Result<[f64; 3], Failure> {
    <[f64; 3]>::try_from(v).map_err(|_| bad_input(format!("--{what}: expected exactly three numbers, got {}", v.len())))
}

/// The numbers of `--what` as a comma-separated list with at most 4 significant digits.
fn listed(v: &[f64; 3]) -> String {
    v.map(|x| sig(x, 4)).join(",")
}

/// Every number of `--what` must be finite, and positive when `positive`.
fn check_numbers(v: &[f64; 3], what: &str, positive: bool) -> Result<(), Failure> {
    for (k, &x) in v.iter().enumerate() {
        let bad = if !x.is_finite() {
            "is not a finite number"
        } else if positive && x <= 0.0 {
            "must be positive"
        } else {
            continue;
        };
        return Err(bad_input(format!(
            "--{what} {}: number {} ({}) {bad}",
            listed(v),
            k + 1,
            sig(x, 4)
        )));
    }
    Ok(())
}

/// The grids must come finest first: spacings strictly growing, cell counts strictly falling.
fn check_order(v: &[f64; 3], what: &str, growing: bool) -> Result<(), Failure> {
    let ok = if growing {
        v[0] < v[1] && v[1] < v[2]
    } else {
        v[0] > v[1] && v[1] > v[2]
    };
    if ok {
        return Ok(());
    }
    let (rule, sorted) = if growing {
        ("the spacings must grow strictly, h1 < h2 < h3", {
            let mut s = *v;
            s.sort_by(f64::total_cmp);
            s
        })
    } else {
        ("the cell counts must fall strictly, N1 > N2 > N3", {
            let mut s = *v;
            s.sort_by(|a, b| b.total_cmp(a));
            s
        })
    };
    let hint = if sorted[0] != sorted[1] && sorted[1] != sorted[2] {
        format!(
            " (e.g. --{what} {}, with --values in the same grid order)",
            listed(&sorted)
        )
    } else {
        " (three different grids are needed)".to_string()
    };
    Err(bad_input(format!(
        "--{what} {}: the grids must be listed finest first: {rule}{hint}",
        listed(v)
    )))
}

fn pct(v: Option<f64>) -> String {
    v.map_or_else(|| "-".into(), |x| format!("{:.3}%", 100.0 * x))
}

/// Runs `tinct gci`.
pub fn main(a: GciArgs) -> Result<(), Failure> {
    if !(1..=3).contains(&a.dims) {
        return Err(bad_input(format!("--dims {}: must be 1, 2 or 3", a.dims)));
    }
    let f = three(&a.values, "values")?;
    check_numbers(&f, "values", false)?;
    let h = if a.spacing.is_empty() {
        let n = three(&a.cells, "cells")?;
        check_numbers(&n, "cells", true)?;
        check_order(&n, "cells", false)?;
        n.map(|n| spacing_from_cells(n, a.dims))
    } else {
        let h = three(&a.spacing, "spacing")?;
        check_numbers(&h, "spacing", true)?;
        check_order(&h, "spacing", true)?;
        h
    };
    let g = gci(f, h, &GciParams::default());
    println!("grid  h             value");
    for k in 0..3 {
        println!("{:<5} {:<13.6e} {}", k + 1, g.h[k], g.f[k]);
    }
    println!();
    println!("{:<36} {:.6}", "r21", g.r21);
    println!("{:<36} {:.6}", "r32", g.r32);
    println!("{:<36} {}", "convergence", g.convergence.word());
    println!(
        "{:<36} {}",
        "apparent order p",
        g.p.map_or_else(|| "-".into(), |p| format!("{p:.4}"))
    );
    println!(
        "{:<36} {}",
        "extrapolated value phi_ext21",
        g.extrapolated.map_or_else(|| "-".into(), |e| format!("{e:.6}"))
    );
    println!("{:<36} {}", "approximate relative error e_a21", pct(g.e_a21));
    println!("{:<36} {}", "extrapolated relative error e_ext21", pct(g.e_ext21));
    println!("{:<36} {}", "GCI_fine21", pct(g.gci_fine21));
    let why = g.convergence.explain();
    if !why.is_empty() {
        println!("note: {why}");
    }
    println!("procedure: Celik et al. (2008), J. Fluids Eng. 130, 078001 (safety factor 1.25)");
    Ok(())
}
