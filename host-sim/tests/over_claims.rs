//! "Over" is never claimed farther from the point over the sonde than the tolerance
//! max(0.15 m, 0.1·depth): the starts of `undertone locate … --seed S` on which it once was,
//! each for its own reason (the locator's docs: `OVER_MARGIN`, `OVER_SETTLE_S`,
//! `OVER_DEPTH_REL`, the weak-signal and vague-depth rules). The closed loop is chaotic, so
//! these fix the cases seen rather than every case; `undertone locate` over 200 starts per scenario counts the rest (BENCHMARKS.md §6).

use std::path::Path;
use undertone_sim::locate::trace;
use undertone_sim::scenario::Scenario;

/// Each start of `file` (with `seed`) shows "over" at least once and never beyond the tolerance.
fn assert_over_never_too_far(file: &str, seed: u64, starts: &[usize]) {
    let sc = Scenario::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join(file)).unwrap();
    for &start in starts {
        let r = trace(&sc, start, seed, &mut std::io::sink()).unwrap();
        assert_eq!(r.shown.over_too_far, 0, "start {start}: over shown {} times beyond the tolerance", r.shown.over_too_far);
        assert!(r.shown.over_shown > 0, "start {start}: over never shown");
    }
}

#[test]
fn beside_the_shallow_sonde_over_keeps_a_margin_for_what_the_fit_does_not_model() {
    // Stopped 0.161 m and 0.151 m from the point (0.15 m allowed), the fit putting the head
    // 0.13 ± 0.01 m and 0.10 ± 0.01 m off: 22 readouts of "over" each.
    assert_over_never_too_far("scenarios/shallow-four-coil-60hz.toml", 7, &[10, 126]);
}

#[test]
fn over_a_moving_sonde_over_waits_for_the_sweep_to_end_and_a_good_signal() {
    // Start 50: "over" the instant a sweep across ended, 0.15 m to the side (6 readouts).
    // Start 122: "over" at 18 dB, 5.2 m from the point, from a fit whose depth was 27 ± 6 m.
    assert_over_never_too_far("examples/camera-head-clay.toml", 7, &[50, 122]);
}

#[test]
fn far_from_the_sonde_over_needs_a_depth_known_to_five_percent() {
    // Seed 8, start 162: 3.5 m beside the sonde in wet clay a fit put it 24 ± 3.6 m deep
    // (truly 1.3 m) and 0.5 m ahead, and claimed "over" against a 1.2 m tolerance
    // (7 readouts). Its depth's σ was 15 % of the depth (OVER_DEPTH_REL allows 5 %).
    assert_over_never_too_far("examples/camera-head-clay.toml", 8, &[162]);
}
