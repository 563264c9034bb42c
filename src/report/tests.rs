//! Unit tests of the report helpers: escaping, units, sentences and the file list.

use super::run::receptor_sentence;
use super::*;
use crate::run::receptors::ReceptorStats;

#[test]
fn text_is_escaped() {
    // HTML5 escaping of the five markup characters (common practice).
    assert_eq!(esc("<b a=\"1\">&'"), "&lt;b a=&quot;1&quot;&gt;&amp;&#x27;");
}

#[test]
fn numbers_keep_three_significant_figures() {
    // Three significant figures for every magnitude (common practice).
    assert_eq!(num(90368.0), "90400");
    assert_eq!(num(1234.5), "1230");
    assert_eq!(num(3.0712), "3.07");
    assert_eq!(num(0.12102), "0.121");
    assert_eq!(num(2.0e6), "2.00e6");
    assert_eq!(num(f64::NAN), "-");
}

#[test]
fn mass_units_follow_the_concentration_units() {
    // 1 L = 1e-3 m3 (SI), so mg/L x m3 = g.
    assert_eq!(mass_unit("kg/m3"), "kg");
    assert_eq!(mass_unit("mg/L"), "g");
    assert_eq!(mass_unit("ug/L"), "mg");
    assert_eq!(mass_unit("degC"), "degC × m³");
    // 5e6 mg = 5 kg; 2.5e6 g = 2.5 t (SI prefixes).
    assert_eq!(mass_words(5.0e6, "ug/L"), "5 kg");
    assert_eq!(mass_words(2.5e6, "g/m3"), "2.5 t");
    assert_eq!(mass_words(0.004, "kg/m3"), "4 g");
    assert_eq!(mass_words(3.0, "degC"), "3 degC × m³");
}

fn beach(arrival: Option<f64>) -> ReceptorStats {
    ReceptorStats {
        name: "swimming-beach".into(),
        at: (10.0, 20.0),
        threshold: Some(1.0),
        peak: 3.0712,
        peak_time: 12.0 * 3600.0 + 25.0 * 60.0,
        arrival_time: arrival,
        time_above_threshold: Some(3.0 * 3600.0 + 49.0 * 60.0),
    }
}

#[test]
fn receptor_sentences_answer_when_how_high_how_long() {
    // The sentence the issue asks for, with three significant figures (common practice).
    assert_eq!(
        receptor_sentence(&beach(Some(8.0 * 3600.0 + 36.0 * 60.0)), "ug/L"),
        "swimming-beach: reached 1 ug/L at 8 h 36 min; peak 3.07 ug/L at 12 h 25 min; 3 h 49 min above 1 ug/L."
    );
    let s = receptor_sentence(&beach(None), "ug/L");
    assert!(s.contains("never reached its threshold of 1 ug/L"), "{s}");
    let mut dry = beach(None);
    dry.peak = 0.0;
    assert!(receptor_sentence(&dry, "ug/L").contains("the tracer never reached it"));
}

#[test]
fn file_list_links_only_relative_names_and_folds_frames() {
    let files: Vec<String> = [
        "summary.json",
        "frames/00000.png",
        "frames/00001.png",
        "frames/00002.png",
        "http://x",
    ]
    .map(String::from)
    .to_vec();
    let html = file_list(&files);
    assert!(html.contains("<a href=\"summary.json\">"), "{html}");
    assert!(html.contains("(3 frames)"), "{html}");
    assert!(!html.contains("href=\"http"), "{html}");
}

#[test]
fn a_missing_or_foreign_picture_is_left_out() {
    let dir = tempfile::tempdir().unwrap();
    assert_eq!(figure(&dir.path().join("absent.png"), "a", "b"), "");
    let fake = dir.path().join("fake.png");
    std::fs::write(&fake, b"not a png").unwrap();
    assert_eq!(figure(&fake, "a", "b"), "");
}

fn triple(f1: f64, gci: f64) -> crate::diagnostics::gci::Gci {
    crate::diagnostics::gci::Gci {
        f: [f1, 0.95, 0.9],
        h: [1.0, 2.0, 4.0],
        r21: 2.0,
        r32: 2.0,
        convergence: crate::diagnostics::gci::Convergence::Monotonic,
        p: Some(1.8),
        extrapolated: Some(1.0),
        e_a21: Some(0.05),
        e_ext21: Some(0.02),
        gci_fine21: Some(gci),
    }
}

#[test]
fn convergence_advice_does_not_quote_a_value_the_grids_cannot_support() {
    // Celik et al. (2008): the GCI is the uncertainty band of the finest value; a band above
    // 10% is too wide to quote the value (common practice).
    let fine = studies::gci_advice("max", &triple(0.98, 0.02));
    assert!(fine.contains("within about 2%"), "{fine}");
    let coarse = studies::gci_advice("max", &triple(0.98, 0.5));
    assert!(coarse.contains("too coarse") && !coarse.contains("within"), "{coarse}");
    // The L1 error against an exact solution is reported by its order, not by a GCI.
    let l1 = studies::gci_advice("l1", &triple(0.005, 1.5));
    assert!(l1.contains("observed order 1.8") && !l1.contains("GCI"), "{l1}");
}
