//! Tests of the gather on a sweep whose answer is known by hand.
//!
//! The sweep: a slug of dye carried east along a channel at 1 m/s with no diffusion, first
//! order upwind at Courant number 1 (one 10 m cell per 10 s step), which moves the field by
//! exactly one cell per step (the upwind update `c_i - C (c_i - c_{i-1})` is `c_{i-1}` at
//! C = 1; common practice, e.g. LeVeque 2002, section 4.8). Ten members release it at t = 0,
//! 100, ..., 900 s in cell 5 of row 1 of a 50 x 3 channel, and the run ends at 1000 s. The slug
//! reaches cell i at `start + 10 (i - 5)` s, so the releases that reach cell i by the end are
//! those with `start <= 1000 - 10 (i - 5)`: 7 of 10 at the receptor cell 40, 9 at cell 20, 6
//! at cell 49, none upstream of the release. Member 10 failed (exit code 1, a stderr.log) and
//! member 11 was never run (no folder).

use super::*;
use std::fs;

const SLUG: &str = r#"
name = "slug"
[grid]
nx = 50
ny = 3
dx = 10.0
depth = 2.0
[tracer]
name = "dye"
units = "kg/m3"
diffusivity = 0.0
[flow]
kind = "uniform"
velocity = [1.0, 0.0]
[boundary]
west = "open"
east = "open"
south = "wall"
north = "wall"
[[source]]
name = "spill"
at = [55.0, 15.0]
mass = 200.0
start = 0.0
[[receptor]]
name = "beach"
at = [405.0, 15.0]
threshold = 0.5
[scheme]
convection = "upwind"
stages = 1
dt = 10.0
[run]
end = 1000.0
frames = 1
"#;

/// Builds the sweep folder described in the module documentation; returns (tempdir, root).
fn slug_sweep() -> (tempfile::TempDir, PathBuf) {
    let d = tempfile::tempdir().unwrap();
    let scn_path = d.path().join("slug.toml");
    fs::write(&scn_path, SLUG).unwrap();
    let root = d.path().join("slug-sweep");
    fs::create_dir_all(root.join(MEMBERS_DIR)).unwrap();
    let n = 12;
    let mut csv = String::from("index,source[0].start\n");
    for i in 0..n {
        csv.push_str(&format!("{i},{}\n", 100 * i));
    }
    fs::write(root.join(MEMBERS_CSV), csv).unwrap();
    let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
    for i in 0..10 {
        let set = [format!("source[0].start={}", 100 * i), format!("name={i:04}")];
        let scn = crate::scenario::load(&scn_path, &set).unwrap();
        pool.install(|| crate::run::execute(&scn, &root.join(MEMBERS_DIR), &mut |_| {}, &mut |_| {}))
            .unwrap();
        fs::write(member_dir(&root, i, n).join("exit_code"), "0\n").unwrap();
    }
    let failed = member_dir(&root, 10, n);
    fs::create_dir_all(&failed).unwrap();
    fs::write(failed.join("exit_code"), "1\n").unwrap();
    let log: String = (1..=12).map(|k| format!("stderr line {k}\n")).collect();
    fs::write(failed.join("stderr.log"), log).unwrap();
    (d, root)
}

fn read_nc(path: &Path, var: &str) -> Vec<f64> {
    netcdf3::FileReader::open(path).unwrap().read_var_f64(var).unwrap()
}

#[test]
fn known_sweep_probabilities_counts_and_failures() {
    let (_d, root) = slug_sweep();
    let s = gather(&root).unwrap();
    assert_eq!((s.members.len(), s.finished, s.failed, s.not_run), (12, 10, 1, 1));
    assert_eq!(s.finished_line(), "10 of 12 members finished (1 failed, 1 not run)");
    assert_eq!(s.map_members, 10);

    // Per cell, by hand (module documentation): row 1 is j = 1, cell (i, j) at j * 50 + i.
    let nc = root.join(GATHER_DIR).join("ensemble.nc");
    let p = read_nc(&nc, "probability_above_0.5");
    let at = |i: usize, j: usize| p[j * 50 + i];
    assert_eq!(at(40, 1), 0.7);
    assert_eq!(at(20, 1), 0.9);
    assert_eq!(at(49, 1), 0.6);
    assert_eq!(at(5, 1), 1.0);
    for i in 0..5 {
        assert_eq!(at(i, 1), 0.0, "upstream cell {i}");
    }
    assert_eq!(at(40, 0), 0.0);
    assert_eq!(at(40, 2), 0.0);
    // The slug's concentration is mass / (h dx dy) = 200 / (2 * 10 * 10) = 1, carried exactly.
    let m = read_nc(&nc, "c_max_ensemble");
    assert_eq!(m[50 + 40], 1.0);
    assert_eq!(m[40], 0.0);
    let mut r = netcdf3::FileReader::open(&nc).unwrap();
    let ds = r.data_set();
    assert_eq!(ds.get_global_attr_as_string("Conventions").unwrap(), "CF-1.8");
    assert_eq!(
        ds.get_var_attr_f64("probability_above_0.5", "valid_range").unwrap(),
        [0.0, 1.0]
    );
    assert_eq!(ds.get_var_attr_as_string("c_max_ensemble", "units").unwrap(), "kg/m3");
    assert_eq!(r.read_var_f64("x").unwrap()[40], 405.0);

    // The receptor at cell 40: reached by 7 of 10; arrivals 350, 450, ..., 950 s. Type 7
    // quantiles of those 7 by hand: median x[3] = 650; p5 h = 0.3 -> 380; p95 h = 5.7 -> 920.
    let b = &s.receptors[0];
    assert_eq!((b.name.as_str(), b.members, b.reached), ("beach", 10, 7));
    let arr = b.get(Quantity::Arrival);
    assert_eq!(arr.missing, 3, "three members never arrive");
    let d = arr.dist.unwrap();
    assert_eq!(d.n, 7);
    assert!((d.p50 - 650.0).abs() < 1e-9 && (d.p5 - 380.0).abs() < 1e-9 && (d.p95 - 920.0).abs() < 1e-9);
    let w = arr.worst.as_ref().unwrap();
    assert_eq!(
        (w.member, w.values.as_slice(), w.value),
        (0, &["0".to_string()][..], 350.0)
    );
    let peak = b.get(Quantity::Peak).worst.as_ref().unwrap();
    assert_eq!((peak.member, peak.value), (0, 1.0));
    assert_eq!(s.maps.len(), 1);
    assert_eq!(s.maps[0].variable, "probability_above_0.5");

    // Failed and not-run members are listed, with the last ten lines of stderr.log.
    let failed = fs::read_to_string(root.join(GATHER_DIR).join("failed.csv")).unwrap();
    let mut rdr = csv::Reader::from_reader(failed.as_bytes());
    let rows: Vec<csv::StringRecord> = rdr.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 2);
    assert_eq!((&rows[0][0], &rows[0][2], &rows[0][3]), ("10", "failed", "1"));
    assert!(rows[0][5].starts_with("stderr line 3\n") && rows[0][5].ends_with("stderr line 12"));
    assert_eq!((&rows[1][0], &rows[1][2]), ("11", "not run"));
    let per = fs::read_to_string(root.join(GATHER_DIR).join("members_receptors.csv")).unwrap();
    assert_eq!(per.lines().count(), 13);
    assert!(per
        .lines()
        .next()
        .unwrap()
        .starts_with("index,status,source[0].start,beach peak"));
    for f in [
        "receptors.csv",
        "probability_above_0.5.png",
        "c_max_ensemble.png",
        "receptor_peak.png",
        "receptor_arrival.png",
    ] {
        assert!(root.join(GATHER_DIR).join(f).is_file(), "{f}");
    }
    check_html(&s.report, &s);
}

/// The report parses as HTML5 without errors (html5ever), links nothing outside and embeds
/// its pictures (common practice, as `tests/report.rs`).
fn check_html(path: &Path, s: &GatherSummary) {
    use html5ever::tendril::TendrilSink;
    let raw = fs::read_to_string(path).unwrap();
    let dom = html5ever::parse_document(markup5ever_rcdom::RcDom::default(), Default::default())
        .from_utf8()
        .read_from(&mut raw.as_bytes())
        .unwrap();
    let errors: Vec<String> = dom.errors.borrow().iter().map(|e| e.to_string()).collect();
    assert!(errors.is_empty(), "{errors:?}");
    assert!(raw.starts_with("<!DOCTYPE html>"));
    assert!(!raw.contains("http://") && !raw.contains("https://") && !raw.contains("<script"));
    assert!(raw.contains(&esc_text(crate::run::CAUTION)));
    assert!(raw.contains(&s.finished_line()));
    assert!(raw.contains("the peak reaches or exceeds 0.5 kg/m3 in 7 of 10 members (70%)"));
    assert!(raw.contains("member 0 (source[0].start = 0)"));
    assert!(raw.contains("stderr line 12") && !raw.contains("stderr line 2\n"));
    assert!(raw.matches("<img src=\"data:image/png;base64,").count() >= 6);
}

fn esc_text(s: &str) -> String {
    crate::report::esc(s)
}

#[test]
fn threshold_tokens_follow_the_documented_rule() {
    assert_eq!(threshold_token(1e-6), "1e-6");
    assert_eq!(threshold_token(5e6), "5e6");
    assert_eq!(threshold_token(0.5), "0.5");
    assert_eq!(threshold_token(250.0), "250");
    assert_eq!(threshold_token(1.25e-7), "1.25e-7");
    for t in [1e-6, 5e6, 0.5, 1.25e-7, 123456.7] {
        let name = format!("probability_above_{}", threshold_token(t));
        assert!(netcdf3::is_valid_name(&name), "{name}");
        assert_eq!(threshold_token(t).parse::<f64>().unwrap(), t, "round trip");
    }
}

#[test]
fn a_bad_members_table_is_bad_input_naming_the_file() {
    let d = tempfile::tempdir().unwrap();
    let e = gather(d.path()).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("members.csv"), "{e}");
    for bad in ["idx,a\n0,1\n", "index,a\n1,1\n", "index,a\n0\n", "index,a\n"] {
        fs::write(d.path().join(MEMBERS_CSV), bad).unwrap();
        let e = gather(d.path()).unwrap_err();
        assert_eq!(e.exit_code(), 2, "{bad}: {e}");
    }
}

#[test]
fn member_folders_are_zero_padded_to_four_digits_or_more() {
    let r = Path::new("/s");
    assert_eq!(member_dir(r, 7, 48), Path::new("/s/members/0007"));
    assert_eq!(member_dir(r, 7, 10000), Path::new("/s/members/0007"));
    assert_eq!(member_dir(r, 7, 10001), Path::new("/s/members/00007"));
}

#[test]
fn a_member_with_exit_code_0_but_a_diverged_summary_is_failed() {
    let d = tempfile::tempdir().unwrap();
    fs::write(d.path().join("exit_code"), "0\n").unwrap();
    fs::write(
        d.path().join("summary.json"),
        r#"{"status": "diverged", "error": "blew up at step 3", "receptors": []}"#,
    )
    .unwrap();
    let m = read_member(d.path(), 3, vec![]);
    match m.state {
        MemberState::Failed { exit_code, reason, .. } => {
            assert_eq!(exit_code, Some(0));
            assert!(reason.contains("diverged") && reason.contains("step 3"), "{reason}");
        }
        s => panic!("{s:?}"),
    }
    fs::write(
        d.path().join("summary.json"),
        r#"{"status": "completed", "receptors": []}"#,
    )
    .unwrap();
    assert_eq!(read_member(d.path(), 3, vec![]).state, MemberState::Finished);
    fs::remove_file(d.path().join("exit_code")).unwrap();
    assert!(matches!(
        read_member(d.path(), 3, vec![]).state,
        MemberState::Failed { .. }
    ));
}
