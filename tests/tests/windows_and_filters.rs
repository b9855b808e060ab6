//! Windows and the lock-in low-pass against their published figures.

use undertone_dsp::detect::lockin::LockIn;
use undertone_dsp::Window;

fn enbw_from_samples(w: Window, len: u32) -> f64 {
    let (mut s1, mut s2) = (0.0f64, 0.0f64);
    for n in 0..len {
        let v = w.value(n, len) as f64;
        s1 += v;
        s2 += v * v;
    }
    len as f64 * s2 / (s1 * s1)
}

fn highest_sidelobe_db(w: Window, first_null_bins: f64) -> f64 {
    let len = 4096;
    let mut worst = f64::NEG_INFINITY;
    let mut d = first_null_bins + 0.01;
    while d < 60.0 {
        let r = w.response(d, len);
        worst = worst.max(20.0 * r.log10());
        d += 0.005;
    }
    worst
}

#[test]
fn window_noise_bandwidths_match_harris_table_1() {
    // Harris 1978, Proc. IEEE 66(1), Table 1; precise values Heinzel, Rüdiger & Schilling 2002, Table 2:
    // rectangular 1.0000, Hann 1.5000, 4-term Blackman–Harris 2.0044 bins (tolerance 1e-3).
    for (w, want) in [(Window::Rectangular, 1.0000), (Window::Hann, 1.5000), (Window::BlackmanHarris4, 2.0044)] {
        let got = enbw_from_samples(w, 8192);
        assert!((got - want).abs() < 1e-3, "{w:?}: ENBW {got}");
        assert!((w.enbw_bins() as f64 - want).abs() < 1e-3, "{w:?}: closed form {}", w.enbw_bins());
    }
}

#[test]
fn window_highest_sidelobes_match_harris_table_1() {
    // Harris 1978 Table 1 / Heinzel 2002 Table 2: −13.26, −31.47, −92.01 dB (±0.1 dB).
    for (w, null, want) in [(Window::Rectangular, 1.0, -13.26), (Window::Hann, 2.0, -31.47), (Window::BlackmanHarris4, 4.0, -92.01)] {
        let got = highest_sidelobe_db(w, null);
        assert!((got - want).abs() < 0.1, "{w:?}: sidelobe {got} dB");
    }
}

#[test]
fn window_response_matches_direct_sum() {
    // The closed-form (Dirichlet) response against the windowed DTFT summed directly.
    let len = 1000u32;
    for w in [Window::Rectangular, Window::Hann, Window::BlackmanHarris4] {
        for &d in &[0.0, 0.3, 1.7, 3.2, 7.5] {
            let (mut re, mut im, mut s0) = (0.0f64, 0.0f64, 0.0f64);
            for n in 0..len {
                let v = w.value(n, len) as f64;
                let ph = -2.0 * std::f64::consts::PI * d * n as f64 / len as f64;
                re += v * ph.cos();
                im += v * ph.sin();
                s0 += v;
            }
            let want = (re * re + im * im).sqrt() / s0;
            let got = w.response(d, len);
            assert!((got - want).abs() < 1e-6 + 1e-4 * want, "{w:?} δ={d}: {got} vs {want}");
        }
    }
}

/// Table of REFERENCES §5 (derived from h(t) ∝ t^(n−1)e^(−t/τ)): ENBW·τ and t(99 %)/τ.
const POLES: [(u8, f64, f64); 4] = [(1, 0.25, 4.605), (2, 0.125, 6.638), (3, 3.0 / 32.0, 8.406), (4, 5.0 / 64.0, 10.045)];

#[test]
fn lockin_lowpass_noise_bandwidth_is_gamma_formula() {
    // One pole: ENBW = π/2·f(−3 dB) = 1/(4τ); n poles: Γ(n−½)/(4√π·Γ(n)·τ), derived in
    // REFERENCES §5 from h(t) ∝ t^(n−1)e^(−t/τ); textbook treatment in Meade, Lock-in
    // Amplifiers: Principles and Applications, 1983 (from memory). Digital cascade within
    // 0.1 % when f_i·τ ≥ 100.
    for (poles, enbw_tau, _) in POLES {
        let li = LockIn::new(48_000.0, 512.0, 0.2, poles, 20.0);
        assert!(li.intermediate_rate_hz * li.tau_s >= 100.0);
        let got = li.lowpass_enbw_hz() as f64 * li.tau_s as f64;
        assert!((got / enbw_tau - 1.0).abs() < 1e-3, "{poles} poles: ENBW·τ {got}");
    }
}

#[test]
fn lockin_settling_times_match_table() {
    // 99 % step settling of n cascaded poles (REFERENCES §5, from the Erlang step response),
    // within one intermediate sample.
    for (poles, _, t99) in POLES {
        let li = LockIn::new(48_000.0, 512.0, 0.2, poles, 20.0);
        let got = li.settling_s(0.99) as f64;
        let want = t99 * li.tau_s as f64;
        let one = 1.0 / li.intermediate_rate_hz as f64;
        assert!((got - want).abs() <= one + 1e-3 * want, "{poles} poles: {got} s vs {want} s");
    }
}
