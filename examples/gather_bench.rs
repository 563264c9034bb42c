//! Times the gather of a fabricated sweep: `cargo run --release --example gather_bench --
//! [MEMBERS] [REPS] [DIR]` (defaults 1000, 3, a temporary folder). Prints each gather's
//! seconds and their median; the machine's load is worth quoting beside it (`uptime`).

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let members = args.first().and_then(|a| a.parse().ok()).unwrap_or(1000);
    let reps = args.get(1).and_then(|a| a.parse().ok()).unwrap_or(3);
    let tmp = std::env::temp_dir().join(format!("tinct-gather-bench-{}", std::process::id()));
    let dir = args.get(2).map(std::path::PathBuf::from).unwrap_or(tmp.clone());
    match tinct::sweep::gather::bench::run(&dir, members, reps) {
        Ok(r) => {
            println!(
                "gather of {} members x {} cells: fabricated in {:.1} s; gathers {:?} s; median {:.2} s",
                r.members,
                r.cells,
                r.fabricate_seconds,
                r.seconds
                    .iter()
                    .map(|s| (s * 100.0).round() / 100.0)
                    .collect::<Vec<_>>(),
                r.median()
            );
        }
        Err(e) => {
            eprintln!("gather bench failed: {e}");
            std::process::exit(1);
        }
    }
    if args.get(2).is_none() {
        let _ = std::fs::remove_dir_all(&tmp);
    }
}
