//! `tinct example`: prints a ready-to-run scenario.

use super::{bad_input, Failure};

/// Arguments of `tinct example`.
#[derive(clap::Args)]
pub struct ExampleArgs {
    /// Example name; omit to list them.
    name: Option<String>,
}

/// Runs `tinct example`.
pub fn main(a: ExampleArgs) -> Result<(), Failure> {
    let name = a.name.as_deref();
    let names = tinct::scenario::EXAMPLES.join(", ");
    match name {
        None => {
            println!("examples: {names}");
            Ok(())
        }
        Some(n) => match tinct::scenario::example(n) {
            Some(text) => {
                print!("{text}");
                Ok(())
            }
            None => Err(bad_input(format!("unknown example '{n}': allowed are {names}"))),
        },
    }
}
