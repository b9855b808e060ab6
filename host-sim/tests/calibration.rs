//! The calibration a scenario asks for before the job: what it finds, what it leaves, and a
//! refused set-up named by its field.

use undertone_sim::calibrate::found;
use undertone_sim::scenario::{CalibrationSpec, Scenario};

fn demo_with(mismatch: f64, cal: CalibrationSpec) -> Scenario {
    let mut sc = Scenario::demo();
    sc.receiver.gain_mismatch = vec![0.0, 0.0, 0.0, mismatch];
    sc.calibration = Some(cal);
    sc.validate("calibration test").unwrap();
    sc
}

#[test]
fn calibration_finds_the_upper_coils_gain_within_what_it_leaves() {
    // The receiver's calibration model (locate::calibration): the upper reading times the
    // correction c reads as the field law says at the known distance, so c = 1/(1 + mismatch).
    // With the distance known exactly, what is left is the readings' noise (the demo's head at
    // 1.5 m reads about 50 dB per readout; 3 s averaged): well under the 0.42 % a tape leaves.
    for mismatch in [-0.02, 0.0, 0.03] {
        let exact = found(&demo_with(mismatch, CalibrationSpec { distance_m: 1.5, distance_sigma_m: 0.0, seconds: 3.0 })).unwrap().unwrap();
        let want = 1.0 / (1.0 + mismatch);
        assert!(exact.gain_tolerance > 0.0 && exact.gain_tolerance < 3e-3, "{exact:?}");
        assert!(((exact.upper_gain as f64) - want).abs() < 4.0 * exact.gain_tolerance as f64 * want, "{mismatch}: {exact:?} want {want}");
    }
    // A tape good to a centimetre at 1.5 m: 3·0.4/(1.5·1.9) = 0.42 per metre, 0.42 % left, and
    // the correction found is one draw of it.
    let taped = found(&demo_with(0.02, CalibrationSpec { distance_m: 1.5, distance_sigma_m: 0.01, seconds: 3.0 })).unwrap().unwrap();
    let noise = 0.0017; // the noise-only figure above, added in quadrature
    assert!((taped.gain_tolerance as f64 - (0.0042f64.powi(2) + noise * noise).sqrt()).abs() < 2e-4, "{taped:?}");
    assert!(((taped.upper_gain as f64) - 1.0 / 1.02).abs() < 4.0 * 0.0042, "{taped:?}");
}

#[test]
fn calibration_out_of_range_is_refused_by_name() {
    let mut sc = Scenario::demo();
    sc.calibration = Some(CalibrationSpec { distance_m: 9.0, distance_sigma_m: 0.01, seconds: 3.0 });
    let e = sc.validate("job.toml").unwrap_err().to_string();
    assert!(e.contains("job.toml") && e.contains("calibration.distance_m = 9") && e.contains("allowed: 0.2 to 5"), "{e}");
    assert!(found(&Scenario::demo()).unwrap().is_none());
}
