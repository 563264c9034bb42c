//! The data files that ship with the example scenarios (land images, depth grids), so that
//! `tinct example NAME --out DIR` can write a scenario that runs anywhere.

use std::path::{Path, PathBuf};

/// A file an example scenario reads, named as the scenario names it (relative to the scenario
/// file), with its bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ExampleFile {
    /// File name, relative to the scenario file.
    pub name: &'static str,
    /// Contents.
    pub bytes: &'static [u8],
}

const MARINA: &[ExampleFile] = &[ExampleFile {
    name: "marina-land.png",
    bytes: include_bytes!("../../scenarios/marina-land.png"),
}];

const OUTFALL: &[ExampleFile] = &[
    ExampleFile {
        name: "outfall-land.png",
        bytes: include_bytes!("../../scenarios/outfall-land.png"),
    },
    ExampleFile {
        name: "outfall-depth.csv",
        bytes: include_bytes!("../../scenarios/outfall-depth.csv"),
    },
];

/// The data files of the shipped example `name` (empty for an example that reads none), or
/// `None` when there is no such example.
pub fn example_files(name: &str) -> Option<&'static [ExampleFile]> {
    super::example(name)?;
    Some(match name {
        "marina" => MARINA,
        "outfall" => OUTFALL,
        _ => &[],
    })
}

/// Writes the example `name` into `dir` (created if need be): `<name>.toml` and its data
/// files. Returns the paths written, the scenario first. A file already there is left alone
/// when it holds the same bytes and is an error otherwise, so nothing of the user's is
/// overwritten; `Ok(None)` means there is no such example.
pub fn write_example(name: &str, dir: &Path) -> std::io::Result<Option<Vec<PathBuf>>> {
    let (Some(text), Some(files)) = (super::example(name), example_files(name)) else {
        return Ok(None);
    };
    let scenario = format!("{name}.toml");
    let all: Vec<(&str, &[u8])> = std::iter::once((scenario.as_str(), text.as_bytes()))
        .chain(files.iter().map(|f| (f.name, f.bytes)))
        .collect();
    // Check every target before writing any, so a refusal leaves the folder as it was.
    for (file, bytes) in &all {
        let path = dir.join(file);
        if path.exists() && std::fs::read(&path).ok().as_deref() != Some(*bytes) {
            return Err(std::io::Error::new(
                std::io::ErrorKind::AlreadyExists,
                format!(
                    "{} exists and differs from the example's {file}: remove it or choose another folder",
                    path.display()
                ),
            ));
        }
    }
    std::fs::create_dir_all(dir)?;
    let mut written = Vec::with_capacity(all.len());
    for (file, bytes) in all {
        let path = dir.join(file);
        std::fs::write(&path, bytes)?;
        written.push(path);
    }
    Ok(Some(written))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scenario_example_files_are_the_shipped_ones_and_the_written_example_loads() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
        for name in super::super::EXAMPLES {
            for f in example_files(name).unwrap() {
                assert_eq!(std::fs::read(root.join(f.name)).unwrap(), f.bytes, "{}", f.name);
                assert!(
                    super::super::example(name).unwrap().contains(f.name),
                    "{name}: {}",
                    f.name
                );
            }
        }
        assert_eq!(example_files("no-such-example"), None);
        let d = tempfile::tempdir().unwrap();
        let dir = d.path().join("new");
        let written = write_example("outfall", &dir).unwrap().unwrap();
        assert_eq!(written[0], dir.join("outfall.toml"));
        assert_eq!(written.len(), 3);
        let s = super::super::load(&written[0], &["run.end=60".into()]).unwrap_or_else(|e| panic!("{e}"));
        assert!(s.land.is_some() && s.depth_file.is_some());
        // Again: the same bytes are accepted; a changed file is refused and kept.
        assert!(write_example("outfall", &dir).unwrap().is_some());
        std::fs::write(dir.join("outfall-depth.csv"), "mine").unwrap();
        let e = write_example("outfall", &dir).unwrap_err();
        assert!(e.to_string().contains("outfall-depth.csv exists and differs"), "{e}");
        assert_eq!(std::fs::read(dir.join("outfall-depth.csv")).unwrap(), b"mine");
        assert_eq!(write_example("no-such-example", &dir).unwrap(), None);
    }
}
