//! `tinct example`: prints a ready-to-run scenario, or writes it with its data files.

use super::{bad_input, failed, Failure};
use std::path::PathBuf;

/// Arguments of `tinct example`.
#[derive(clap::Args)]
pub struct ExampleArgs {
    /// Example name; omit to list them.
    name: Option<String>,
    /// Write NAME.toml and the files it reads (land image, depth grid) into this folder
    /// instead of printing the scenario.
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
}

/// Runs `tinct example`.
pub fn main(a: ExampleArgs) -> Result<(), Failure> {
    let names = tinct::scenario::EXAMPLES.join(", ");
    let Some(n) = a.name.as_deref() else {
        if a.out.is_some() {
            return Err(bad_input(format!("--out needs an example name: one of {names}")));
        }
        println!("examples: {names}");
        return Ok(());
    };
    let unknown = || bad_input(format!("unknown example '{n}': allowed are {names}"));
    match a.out {
        None => {
            let text = tinct::scenario::example(n).ok_or_else(unknown)?;
            print!("{text}");
            let files = tinct::scenario::example_files(n).unwrap_or_default();
            if !files.is_empty() {
                let list: Vec<&str> = files.iter().map(|f| f.name).collect();
                eprintln!(
                    "note: {n} reads {} next to it; `tinct example {n} --out DIR` writes the scenario and its files into DIR",
                    list.join(" and ")
                );
            }
            Ok(())
        }
        Some(dir) => {
            let written = tinct::scenario::write_example(n, &dir)
                .map_err(|e| failed(format!("cannot write example '{n}' into {}: {e}", dir.display())))?
                .ok_or_else(unknown)?;
            for p in &written {
                println!("wrote {}", p.display());
            }
            println!("run it with: tinct run {}", written[0].display());
            Ok(())
        }
    }
}
