//! The normative explicit-step problem shared with the hand-written peers
//! (`../shared/peers/explicit-step/README.md` §1): tinct's engine must reproduce the published
//! reference values (`tests/data/peer_reference_values.json`, copied from the peers' results)
//! to 1e-12 after 10 steps.

use tinct::bench::{compare_with_reference, peer_diagnostics, peer_simulation};
use tinct::ops::limiter::Limiter;

const REFERENCE: &str = include_str!("data/peer_reference_values.json");

#[test]
fn van_leer_step_matches_the_reference_values_at_512() {
    let (mut sim, setup) = peer_simulation(512, Limiter::VanLeer).unwrap();
    // Set-up scalars from the reference file (README §1.1).
    let v: serde_json::Value = serde_json::from_str(REFERENCE).unwrap();
    let r = &v[0];
    assert_eq!(r["N"], 512);
    assert!((setup.umax - r["umax"].as_f64().unwrap()).abs() < 1e-12, "{setup:?}");
    assert!((setup.dt - r["dt"].as_f64().unwrap()).abs() < 1e-12 * setup.dt);
    let d0 = peer_diagnostics(&sim);
    assert!(compare_with_reference(REFERENCE, 512, "step0", &d0).unwrap() < 1e-12);
    sim.step(setup.dt).unwrap();
    let d1 = peer_diagnostics(&sim);
    let e1 = compare_with_reference(REFERENCE, 512, "step1", &d1).unwrap();
    assert!(e1 < 1e-12, "step 1 differs by {e1}");
    for _ in 1..10 {
        sim.step(setup.dt).unwrap();
    }
    let d10 = peer_diagnostics(&sim);
    let e10 = compare_with_reference(REFERENCE, 512, "step10", &d10).unwrap();
    assert!(e10 < 1e-12, "step 10 differs by {e10}: {d10:?}");
    // Mass conserved to round-off (README §1 agreement criteria: 1e-13).
    assert!((d10.mass - d0.mass).abs() / d0.mass < 1e-13);
}
