//! Property tests of the scenario reader: arbitrary text, arbitrary byte mutations of a shipped
//! scenario and arbitrary `--set KEY=VALUE` overrides never panic; each either loads or is
//! refused with problems that all have a message (and, for overrides that are not
//! `key=value`, name the override).

use proptest::prelude::*;
use std::path::Path;
use tinct::scenario::{self, parse, ScenarioError};

/// The outcome is a scenario or problems that each say something.
fn sound(r: Result<scenario::Scenario, ScenarioError>) -> Result<(), TestCaseError> {
    if let Err(e) = r {
        prop_assert!(!e.problems.is_empty());
        prop_assert!(e.problems.iter().all(|p| !p.message.trim().is_empty()), "{}", e);
    }
    Ok(())
}

/// The shipped scenarios that read no data files (so any path anchors them).
fn base(k: usize) -> &'static str {
    let names = ["gaussian-puff", "rotating-cone", "slotted-disk", "swirl"];
    scenario::example(names[k % names.len()]).expect("a shipped example")
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// Any text at all: refused or loaded, never a panic.
    #[test]
    fn any_text_never_panics(text in any::<String>()) {
        sound(parse(&text, Path::new("any.toml"), &[]))?;
    }

    /// Text that looks like TOML (keys, tables, numbers, brackets, quotes, newlines).
    #[test]
    fn toml_like_text_never_panics(text in "([a-z_.]{1,8} ?= ?[-0-9.e+\\[\\]{}\",a-z]{0,12}\n|\\[{1,2}[a-z_.]{1,8}\\]{1,2}\n){0,12}") {
        sound(parse(&text, Path::new("like.toml"), &[]))?;
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// A shipped scenario with up to four bytes replaced, inserted or removed.
    #[test]
    fn byte_mutations_of_a_shipped_scenario_never_panic(
        k in 0usize..4,
        edits in prop::collection::vec((any::<prop::sample::Index>(), 0u8..3, any::<u8>()), 1..5),
    ) {
        let mut bytes = base(k).as_bytes().to_vec();
        for (at, op, b) in edits {
            let i = at.index(bytes.len());
            match op {
                0 => bytes[i] = b,
                1 => bytes.insert(i, b),
                _ => { bytes.remove(i); }
            }
        }
        let text = String::from_utf8_lossy(&bytes);
        sound(parse(&text, Path::new("mutated.toml"), &[]))?;
    }

    /// Any `--set` text: never a panic; text without `=` is refused naming the override.
    #[test]
    fn any_override_never_panics(k in 0usize..4, set in any::<String>()) {
        let r = parse(base(k), Path::new("set.toml"), std::slice::from_ref(&set));
        if !set.contains('=') {
            let want = format!("--set {set}");
            let named = r.as_ref().err().is_some_and(|e| e.problems.iter().any(|p| p.key == want));
            prop_assert!(named, "{} not refused naming it", want);
        }
        sound(r)?;
    }

    /// Overrides shaped like key paths and values, over the keys the shipped scenarios use.
    #[test]
    fn key_path_overrides_never_panic(
        k in 0usize..4,
        path in "(grid|tracer|flow|boundary|initial|source\\[[0-2]\\]|receptor\\[[0-2]\\]|scheme|run|output|[a-z]{1,5})(\\.[a-z_]{1,10}(\\[[0-9]\\])?){0,2}",
        value in "(-?[0-9]{1,4}(\\.[0-9]{1,3})?(e[-+]?[0-9]{1,3})?|nan|inf|-inf|true|\"[a-z_]{0,8}\"|\\[[-0-9., ]{0,10}\\]|\\{ ?[a-z]{1,6} ?= ?[0-9]{1,3} ?\\}|[a-z_]{1,10}|)",
    ) {
        let set = format!("{path}={value}");
        sound(parse(base(k), Path::new("set.toml"), &[set]))?;
    }
}
