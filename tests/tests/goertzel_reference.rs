//! Goertzel against the DFT: rustfft at integer bins, the direct sum
//! Σ x[n]·e^(−jωn) at non-integer positions (Sysel & Rajmic 2012).

use rustfft::{num_complex::Complex, FftPlanner};
use undertone_dsp::detect::goertzel::Goertzel;
use undertone_dsp::detect::window::direct_dtft;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Window, C32};
use undertone_tests::{tone, Noise};

fn rel_err(a: C32, b: Complex<f64>) -> f64 {
    let d = Complex::new(a.re as f64, a.im as f64) - b;
    d.norm() / b.norm().max(1e-30)
}

#[test]
fn fixed_vector_matches_published_dft() {
    // x = [1,2,3,4] → X = [10, −2+2j, −2, −2−2j] (REFERENCES §3, agrees with numpy's FFT).
    let x = [1.0f32, 2.0, 3.0, 4.0];
    let want = [(10.0, 0.0), (-2.0, 2.0), (-2.0, 0.0), (-2.0, -2.0)];
    for (k, (re, im)) in want.iter().enumerate().skip(1).take(2) {
        let g = Goertzel::from_cycles_per_sample(k as f64 / 4.0);
        let x_k = g.dtft_of(&x);
        assert!((x_k.re - re).abs() < 1e-5 && (x_k.im - im).abs() < 1e-5, "k={k}: {x_k:?}");
    }
    // k = 1 via the low-ω branch, k = 2 via the other (cos ω = −1); k = 3 mirrors k = 1.
    let g3 = Goertzel::from_cycles_per_sample(0.75);
    let x3 = g3.dtft_of(&x);
    assert!((x3.re + 2.0).abs() < 1e-5 && (x3.im + 2.0).abs() < 1e-5, "{x3:?}");
}

#[test]
fn bin_centred_and_non_integer_spot_values() {
    // fs = 4096 Hz, N = 256 (REFERENCES §3): cos(2π·512t) → X(32) = 128 + 0j.
    let fs = 4096.0;
    let x = tone(256, fs, 512.0, 1.0, 0.0);
    let g = Goertzel::from_cycles_per_sample(32.0 / 256.0);
    let v = g.dtft_of(&x);
    assert!((v.re - 128.0).abs() < 1e-3 && v.im.abs() < 1e-3, "{v:?}");
    // cos(2π·640t + 0.3) → |X(40)| = 128, arg 0.300000.
    let x = tone(256, fs, 640.0, 1.0, 0.3);
    let v = Goertzel::from_cycles_per_sample(40.0 / 256.0).dtft_of(&x);
    assert!((v.magnitude() - 128.0).abs() < 1e-3 && (v.angle_rad() - 0.3).abs() < 1e-5, "{v:?}");
    // 520 Hz at k = 32.5: |X| = 128.000000 (REFERENCES §3). The phase follows from the
    // definition X = Σ cos(ωn)·e^(−jωn) = N/2 + ½·Σ e^(−j2ωn), and the second sum vanishes
    // because 2ωN = 2π·65: X = 128 + 0j exactly. (REFERENCES lists 122.283070608 + 37.826586453j,
    // the same magnitude under another phase convention, 0.2997 rad apart; we test ours.)
    let x = tone(256, fs, 520.0, 1.0, 0.0);
    let v = Goertzel::from_cycles_per_sample(32.5 / 256.0).dtft_of(&x);
    assert!((v.magnitude() - 128.0).abs() < 1e-3, "{v:?}");
    assert!(rel_err(v, Complex::new(128.0, 0.0)) < 1e-5, "{v:?}");
    // The same tone into integer bin 32: 2|X|/N = 0.632801 (scalloping).
    let v = Goertzel::from_cycles_per_sample(32.0 / 256.0).dtft_of(&x);
    assert!((2.0 * v.magnitude() / 256.0 - 0.632801).abs() < 1e-5, "{}", 2.0 * v.magnitude() / 256.0);
}

#[test]
fn integer_bins_match_rustfft() {
    // Reference: rustfft's forward FFT of the same block, every bin 1 … N/2−1.
    let mut noise = Noise::new(7, 1.0);
    // Noise blocks up to 1024 samples, every bin: error relative to the RMS bin magnitude √N.
    // (f32 rounding grows with N: about 1e-4 of RMS at N = 4096, measured; tone bins below
    // are checked relative to their own magnitude up to N = 16384.)
    for &n in &[64usize, 256, 1000, 1024] {
        let x: Vec<f32> = (0..n).map(|_| noise.sample() as f32).collect();
        let mut buf: Vec<Complex<f64>> = x.iter().map(|&v| Complex::new(v as f64, 0.0)).collect();
        FftPlanner::new().plan_fft_forward(n).process(&mut buf);
        let mut worst = 0.0f64;
        for k in 1..n / 2 {
            let g = Goertzel::from_cycles_per_sample(k as f64 / n as f64);
            let e = rel_err(g.dtft_of(&x), buf[k]);
            // Relative to the bin magnitude; noise bins can be small, so bound against the block RMS too.
            let scale = buf[k].norm().max((n as f64).sqrt());
            let abs = (Complex::new(g.dtft_of(&x).re as f64, g.dtft_of(&x).im as f64) - buf[k]).norm();
            worst = worst.max(abs / scale);
            let _ = e;
        }
        assert!(worst < 1e-4, "N={n}: worst relative error {worst:e}");
    }
}

#[test]
fn tone_bins_match_rustfft_to_1e4() {
    // Strong bin-centred tones: relative error of the tone bin itself against rustfft.
    for &(n, k) in &[(256usize, 32usize), (4096, 44), (16384, 175), (16384, 7000)] {
        let x = tone(n, n as f64, k as f64, 1.0, 0.7);
        let mut buf: Vec<Complex<f64>> = x.iter().map(|&v| Complex::new(v as f64, 0.0)).collect();
        FftPlanner::new().plan_fft_forward(n).process(&mut buf);
        let g = Goertzel::from_cycles_per_sample(k as f64 / n as f64);
        let e = rel_err(g.dtft_of(&x), buf[k]);
        assert!(e < 1e-4, "N={n} k={k}: {e:e}");
    }
}

#[test]
fn non_integer_positions_match_direct_sum() {
    // Direct sum Σ x[n]·e^(−jωn) in f64 as the reference (the DTFT's definition).
    let mut noise = Noise::new(11, 0.1);
    for &(n, cyc) in &[(1000usize, 0.0107), (4800, 512.0 / 48000.0), (16384, 640.3 / 48000.0), (3000, 0.4123)] {
        let x: Vec<f32> = tone(n, 1.0, cyc, 1.0, 0.2).iter().map(|v| v + noise.sample() as f32).collect();
        let g = Goertzel::from_cycles_per_sample(cyc);
        let want = direct_dtft(&x, Window::Rectangular, cyc);
        let e = rel_err(g.dtft_of(&x), Complex::new(want.re as f64, want.im as f64));
        assert!(e < 1e-4, "N={n} cycles={cyc}: {e:e}");
    }
}
