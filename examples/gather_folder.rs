//! Gathers a sweep folder until `tinct sweep FILE --gather` is wired:
//! `cargo run --release --example gather_folder -- SWEEP_DIR`. Prints what the command will.

fn main() {
    let Some(dir) = std::env::args().nth(1) else {
        eprintln!("usage: gather_folder SWEEP_DIR");
        std::process::exit(2);
    };
    match tinct::sweep::gather::gather(std::path::Path::new(&dir)) {
        Ok(s) => {
            println!("{}: {}", s.name, s.finished_line());
            for r in &s.receptors {
                let p = r.get(tinct::sweep::gather::Quantity::Peak);
                if let Some(d) = p.dist {
                    println!(
                        "  {}: peak 5/50/95 % {:.4e} / {:.4e} / {:.4e}; reached in {} of {}",
                        r.name, d.p5, d.p50, d.p95, r.reached, r.members
                    );
                }
            }
            println!("  report: {}", s.report.display());
        }
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(e.exit_code());
        }
    }
}
