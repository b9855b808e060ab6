//! Windows and the lock-in low-pass against their published figures.
//!
//! Windows: Harris, *On the use of windows for harmonic analysis with the discrete
//! Fourier transform*, Proc. IEEE 66(1), 1978, Table 1; the precise values from
//! Heinzel, Rüdiger & Schilling, *Spectrum and spectral density estimation by the
//! DFT*, Max-Planck-Institut für Gravitationsphysik, 2002, Table 2.
//! Low-pass: n identical first-order sections `H(f) = (1 + j2πfτ)^−n` (the RC
//! low-pass of any circuits text, cascaded); the figures below are derived from it
//! (see tests/REFERENCES.md): ENBW·τ = Γ(n−½)/(4√π·Γ(n)) from the integral
//! ∫₀^∞ (1 + x²)^−n dx = √π·Γ(n−½)/(2Γ(n)); f(−3 dB)·2πτ = √(2^{1/n} − 1); the step
//! response is the Erlang distribution function 1 − e^{−t/τ}·Σ_{k<n}(t/τ)^k/k!.

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
    // Harris 1978 Table 1; Heinzel 2002 Table 2: rectangular 1.0000, Hann 1.5000, 4-term
    // Blackman–Harris 2.0044 bins, printed to 1e-4: tolerance 1e-3.
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
    // The closed-form (Dirichlet) response against the windowed DTFT summed directly in
    // f64 (the DTFT's definition): 1e-4 relative plus 1e-6 (f32 window values).
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

#[test]
fn window_scallop_loss_and_3db_width_match_harris_table_1() {
    // Scallop loss (the loss half a bin off centre) 3.9224, 1.4236, 0.8256 dB and 3 dB
    // bandwidth 0.8859, 1.4406, 1.8994 bins (Harris 1978 Table 1; Heinzel 2002 Table 2).
    // The printed widths differ between the two by ~0.2 %: allowed 0.5 %; losses 0.005 dB.
    for (w, scallop_db, width_bins) in
        [(Window::Rectangular, 3.9224, 0.8859), (Window::Hann, 1.4236, 1.4406), (Window::BlackmanHarris4, 0.8256, 1.8994)]
    {
        let len = 4096;
        let got = -20.0 * w.response(0.5, len).log10();
        assert!((got - scallop_db).abs() < 5e-3, "{w:?}: scallop loss {got} dB");
        // Half-power point by bisection on the closed-form response.
        let (mut lo, mut hi) = (0.0f64, 2.0f64);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if w.response(mid, len) > std::f64::consts::FRAC_1_SQRT_2 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let width = 2.0 * lo;
        assert!((width / width_bins - 1.0).abs() < 5e-3, "{w:?}: 3 dB width {width} bins");
    }
}

/// Per pole count: ENBW·τ, f(−3 dB)·2πτ, and the step's times to 90 %, 99 % and 99.9 %
/// in units of τ (derived from `H(f) = (1 + j2πfτ)^−n`, see the module documentation).
const POLES: [(u8, f64, f64, [f64; 3]); 4] = [
    (1, 0.25, 1.0000, [2.303, 4.605, 6.908]),
    (2, 0.125, 0.6436, [3.890, 6.638, 9.233]),
    (3, 3.0 / 32.0, 0.5098, [5.322, 8.406, 11.229]),
    (4, 5.0 / 64.0, 0.4350, [6.681, 10.045, 13.062]),
];

#[test]
fn lockin_lowpass_noise_bandwidth_is_gamma_formula() {
    // ENBW = Γ(n−½)/(4√π·Γ(n)·τ), one-sided; for one pole π/2·f(−3 dB) = 1/(4τ). A digital
    // cascade y ← y + α(u − y) at f_i approaches it as 1/(f_i·τ) → 0: within 0.1 % when
    // f_i·τ ≥ 100 (the impulse response a(1−a)^k sampled from e^{−t/τ}/τ, error O(1/(f_iτ))²).
    for (poles, enbw_tau, _, _) in POLES {
        let li = LockIn::new(48_000.0, 512.0, 0.2, poles, 20.0);
        assert!(li.intermediate_rate_hz * li.tau_s >= 100.0);
        let got = li.lowpass_enbw_hz() as f64 * li.tau_s as f64;
        assert!((got / enbw_tau - 1.0).abs() < 1e-3, "{poles} poles: ENBW·τ {got}");
    }
}

#[test]
fn lockin_lowpass_half_power_frequency() {
    // |H(f)|² = (1 + (2πfτ)²)^−n is one half at f·2πτ = √(2^{1/n} − 1): the model's
    // `lowpass_response` there within 0.1 % of 1/√2 (digital at f_i·τ ≥ 100, as above).
    for (poles, _, f3_2pi_tau, _) in POLES {
        let li = LockIn::new(48_000.0, 512.0, 0.2, poles, 20.0);
        let f = f3_2pi_tau / (2.0 * std::f64::consts::PI * li.tau_s as f64);
        let got = li.lowpass_response(f);
        assert!((got / std::f64::consts::FRAC_1_SQRT_2 - 1.0).abs() < 1e-3, "{poles} poles: |H| = {got} at {f} Hz");
    }
}

#[test]
fn lockin_settling_times_match_table() {
    // Times for the step response (Erlang distribution function) to reach 90 %, 99 % and
    // 99.9 %, within one intermediate sample (the digital cascade steps in 1/f_i).
    for (poles, _, _, times) in POLES {
        let li = LockIn::new(48_000.0, 512.0, 0.2, poles, 20.0);
        let one = 1.0 / li.intermediate_rate_hz as f64;
        for (fraction, t) in [0.9f32, 0.99, 0.999].into_iter().zip(times) {
            let got = li.settling_s(fraction) as f64;
            let want = t * li.tau_s as f64;
            assert!((got - want).abs() <= one + 1e-3 * want, "{poles} poles, {fraction}: {got} s vs {want} s");
        }
    }
}
