//! Implicit steps with a tide (the flow factor and level change every step, so the matrix and
//! the multigrid hierarchy are re-formed every step): a stepper created afresh at step k takes
//! the same step, bit for bit, as the one that marched there (what a resumed run relies on), and
//! the solves meet their tolerance against the current matrix.

use tinct::ops::limiter::Limiter;
use tinct::step::tide_bench::harbour_simulation;
use tinct::step::Simulation;

/// The benchmark harbour at 80 x 40 cells with the tide.
fn harbour(limiter: Limiter) -> Simulation {
    harbour_simulation(80, limiter, true).expect("the harbour builds")
}

/// Marches `k` steps of the run's automatic step.
fn march(sim: &mut Simulation, k: usize) {
    let dt = sim.dt_max();
    for _ in 0..k {
        sim.step(dt).expect("step");
    }
}

/// Common practice (the checkpoint contract of DEVELOPERS.md): everything a step builds is a
/// function of that step's inputs, so a stepper restored at step k (empty caches) repeats the
/// uninterrupted run's next step exactly.
#[test]
fn fresh_stepper_repeats_the_marched_step() {
    for limiter in [Limiter::Upwind, Limiter::VanLeer] {
        let mut marched = harbour(limiter);
        march(&mut marched, 7);
        let mut fresh = harbour(limiter);
        fresh.restore(marched.snapshot()).expect("restore");
        march(&mut marched, 1);
        march(&mut fresh, 1);
        let (a, b) = (marched.field(), fresh.field());
        assert_eq!(a.len(), b.len());
        let differ = a.iter().zip(&b).filter(|(x, y)| x.to_bits() != y.to_bits()).count();
        assert_eq!(
            differ,
            0,
            "{}: {differ} cells differ after the restored step",
            limiter.name()
        );
        assert_eq!(marched.last_iterations(), fresh.last_iterations());
    }
}

/// Common practice: solves stopped at a relative residual of 1e-8 and of 1e-12 agree to a few
/// times 1e-8 of the largest value (backward Euler does not amplify the difference), which holds
/// only if each solve meets its tolerance against the matrix of its own step.
#[test]
fn tidal_solves_meet_their_tolerance() {
    for limiter in [Limiter::Upwind, Limiter::VanLeer] {
        let run = |tol: f64| {
            let mut sim = harbour(limiter);
            sim.scheme.tolerance = tol;
            march(&mut sim, 12);
            sim.field()
        };
        let (loose, tight) = (run(1e-8), run(1e-12));
        let scale = tight.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(scale > 0.0);
        let diff = loose.iter().zip(&tight).fold(0.0f64, |m, (a, b)| m.max((a - b).abs()));
        assert!(
            diff <= 1e-7 * scale,
            "{}: tolerance 1e-8 vs 1e-12 differ by {diff:e} of {scale:e}",
            limiter.name()
        );
    }
}
