//! The run report's section on influence maps, built from the files `tinct influence` left in
//! `<dir>/<name>/influence/<receptor>/` (`influence.json`, `influence.png`, `candidates.csv`):
//! per receptor the map, the ranked candidates, the adjoint used with its duality statement,
//! and the caution. Empty when no maps exist.

use super::{esc, facts, figure, num, table};
use std::path::Path;

/// The HTML section for the influence maps under the run folder `dir` (empty string when
/// there are none).
pub fn section(dir: &Path) -> String {
    let root = dir.join("influence");
    let Ok(entries) = std::fs::read_dir(&root) else {
        return String::new();
    };
    let mut folders: Vec<_> = entries
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.is_dir())
        .collect();
    folders.sort();
    let mut o = String::new();
    for f in folders {
        let Some(json) = std::fs::read_to_string(f.join("influence.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        else {
            continue;
        };
        let s = |k: &str| json[k].as_str().unwrap_or("").to_string();
        let receptor = s("receptor");
        let releases: Vec<String> = json["release_times"]
            .as_array()
            .map(|a| a.iter().filter_map(|v| v.as_f64()).map(super::time).collect())
            .unwrap_or_default();
        o.push_str(&format!("<h3>Influence on {}</h3>\n", esc(&receptor)));
        o.push_str(&format!(
            "<p>The map gives, for every water cell, the dose at the receptor per unit mass released there ({}). One backward run answers for every cell at once.</p>\n",
            esc(&s("dose"))
        ));
        o.push_str(&facts(&[
            ("adjoint", esc(&s("adjoint"))),
            ("duality", esc(&s("duality"))),
            ("units", esc(&s("units"))),
            ("release times", esc(&releases.join(", "))),
            ("mass to threshold", esc(&s("mass_to_threshold"))),
        ]));
        o.push_str(&figure(
            &f.join("influence.png"),
            &format!("influence map of {receptor}"),
            &format!(
                "influence/{}/influence.png",
                f.file_name()
                    .map(|n| n.to_string_lossy().to_string())
                    .unwrap_or_default()
            ),
        ));
        if let Ok(csv) = std::fs::read_to_string(f.join("candidates.csv")) {
            let rows: Vec<Vec<String>> = csv
                .lines()
                .skip(1)
                .filter_map(|l| {
                    let c: Vec<&str> = l.split(',').collect();
                    (c.len() >= 9).then(|| {
                        let n = |k: usize| c[k].parse::<f64>().map(num).unwrap_or_else(|_| esc(c[k]));
                        vec![n(0), esc(c[1]), esc(c[2]), n(7), n(8)]
                    })
                })
                .collect();
            if !rows.is_empty() {
                o.push_str(&table(
                    Some("Candidate release points, largest dose first"),
                    &[
                        ("release time (s)", true),
                        ("rank", true),
                        ("candidate", false),
                        ("dose per unit mass", true),
                        ("mass to reach the threshold", true),
                    ],
                    &rows,
                ));
            }
        }
        o.push_str(&format!("<p class=\"caution\">{}</p>\n", esc(&s("caution"))));
    }
    if o.is_empty() {
        return o;
    }
    format!("<h2>Influence maps</h2>\n{o}")
}
