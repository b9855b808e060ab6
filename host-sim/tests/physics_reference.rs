//! The simulator's synthetic stream against published physics and signal theory.
//!
//! Only the simulator's public surface is used (`Scenario::from_toml`, `Synth::new`,
//! `Synth::next_codes`, `Synth::truth`, `Synth::fs`, `Synth::coils`); every scenario is
//! written inline, small and of our own invention. Spectra are measured with
//! `rustfft`. A converter of b bits has the full-scale code 2^(b−1) − 1, and a field of
//! `full_scale_t` tesla reaches it.

use rustfft::num_complex::Complex;
use rustfft::FftPlanner;
use undertone_sim::scenario::Scenario;
use undertone_sim::synth::Synth;

/// μ0, T·m/A.
const MU0: f64 = 4e-7 * std::f64::consts::PI;

/// Every code of the scenario (seed as given), one vector per coil.
fn codes(toml: &str, seed: u64) -> (Synth, Vec<Vec<f64>>) {
    let sc = Scenario::from_toml(toml, "inline scenario").unwrap();
    let mut synth = Synth::new(&sc, Some(seed));
    let mut frame = vec![0i32; synth.coils];
    let mut out = vec![Vec::new(); synth.coils];
    while synth.next_codes(&mut frame) {
        for (o, &k) in out.iter_mut().zip(&frame) {
            o.push(k as f64);
        }
    }
    (synth, out)
}

/// Forward DFT of a whole record (rustfft).
fn spectrum(x: &[f64]) -> Vec<Complex<f64>> {
    let mut buf: Vec<Complex<f64>> = x.iter().map(|&v| Complex::new(v, 0.0)).collect();
    FftPlanner::new().plan_fft_forward(x.len()).process(&mut buf);
    buf
}

/// Codes per tesla of a converter of `bits` bits reaching full scale at `full_scale_t`.
fn codes_per_tesla(bits: u32, full_scale_t: f64) -> f64 {
    ((1u64 << (bits - 1)) - 1) as f64 / full_scale_t
}

#[test]
fn noise_spectral_density_is_the_set_density() {
    // White noise of one-sided density d (T/√Hz) sampled at fs has variance d²·fs/2 and a
    // flat one-sided PSD d², estimated from a periodogram as 2|X_k|²/(fs·L) for a
    // rectangular segment of L samples (Heinzel, Rüdiger & Schilling, *Spectrum and
    // spectral density estimation by the DFT*, 2002, PSD normalisation with S2 = L).
    // A periodogram bin of Gaussian noise is distributed as (PSD/2)·χ²₂ (relative sd 1;
    // Percival & Walden, *Spectral Analysis for Physical Applications*, 1993, from
    // memory), so the mean of K segments × B bins has relative standard error 1/√(KB):
    // allowed 4 of them, for each eighth of the band (flat) and for the whole band.
    // Tesla noise and count noise separately; the sonde's tone sits at 1000.5 Hz, between
    // bins, but is 1e-17 T, far below the noise.
    for (density_t, density_counts) in [(1e-11, 0.0), (0.0, 300.0)] {
        let toml = format!(
            r#"
name = "noise density"
[receiver]
sample_rate_hz = 8192
adc_bits = 24
full_scale_t = 1e-7
[sonde]
freq_hz = 1000.5
moment_am2 = 1e-6
depth_m = 20
[noise]
density_t_per_rthz = {density_t}
density_counts_per_rthz = {density_counts}
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 8
"#
        );
        let (synth, x) = codes(&toml, 11);
        let fs = synth.fs;
        // Expected PSD in codes²/Hz, plus the quantisation noise q²/12 spread over fs/2.
        let d = density_t * codes_per_tesla(24, 1e-7) + density_counts;
        let want = d * d + (1.0 / 12.0) / (fs / 2.0);
        let seg = 1024;
        for (c, xc) in x.iter().enumerate() {
            let segments = xc.len() / seg;
            let mut psd = vec![0.0f64; seg / 2];
            for s in 0..segments {
                let spec = spectrum(&xc[s * seg..(s + 1) * seg]);
                for k in 1..seg / 2 {
                    psd[k] += 2.0 * spec[k].norm_sqr() / (fs * seg as f64) / segments as f64;
                }
            }
            let band = &psd[1..];
            let all = band.iter().sum::<f64>() / band.len() as f64;
            let se_all = 1.0 / ((segments * band.len()) as f64).sqrt();
            assert!((all / want - 1.0).abs() < 4.0 * se_all, "coil {c}: PSD {all:e} want {want:e} (se {se_all:.4})");
            let part = band.len() / 8;
            for (i, chunk) in band.chunks_exact(part).enumerate() {
                let m = chunk.iter().sum::<f64>() / part as f64;
                let se = 1.0 / ((segments * part) as f64).sqrt();
                assert!((m / want - 1.0).abs() < 4.0 * se, "coil {c}, band {i}: PSD {m:e} want {want:e} (se {se:.3})");
            }
        }
        // The coils' noises are independent: the correlation coefficient of two coils is
        // within 4/√n of zero (its standard error for independent samples).
        let n = x[0].len() as f64;
        for c in 1..synth.coils {
            let r = x[0].iter().zip(&x[c]).map(|(a, b)| a * b).sum::<f64>()
                / (x[0].iter().map(|a| a * a).sum::<f64>() * x[c].iter().map(|b| b * b).sum::<f64>()).sqrt();
            assert!(r.abs() < 4.0 / n.sqrt(), "coils 0 and {c}: correlation {r}");
        }
    }
}

/// The quantisation scenario: a 12-bit converter, a tone at 1234.567 Hz (not
/// commensurate with fs, so the rounding error does not repeat) from a level sonde 1 m
/// straight below the along coils (height 0): B_x = −μ0m/(4πh³) = −1e-7 T on coil 0
/// (0.83 of full scale) and −1e-7/1.4³ on coil 3 (0.30); Gaussian count noise of
/// `dither` codes rms added before the rounding.
fn quantisation_toml(dither: f64) -> String {
    let density = dither / (8000.0f64 / 2.0).sqrt();
    format!(
        r#"
name = "quantisation"
[receiver]
sample_rate_hz = 8000
adc_bits = 12
full_scale_t = 1.2e-7
height_m = 0.0
[sonde]
freq_hz = 1234.567
moment_am2 = 1.0
depth_m = 1.0
[noise]
density_counts_per_rthz = {density}
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 10
"#
    )
}

/// Least-squares fit of a·cos + b·sin + d at `w` rad/sample: ((a, b, d), residual variance).
fn fit(x: &[f64], w: f64) -> ([f64; 3], f64) {
    let (mut s, mut r) = ([[0.0f64; 3]; 3], [0.0f64; 3]);
    for (i, &v) in x.iter().enumerate() {
        let (sn, cs) = (w * i as f64).sin_cos();
        let basis = [cs, sn, 1.0];
        for p in 0..3 {
            r[p] += basis[p] * v;
            for q in 0..3 {
                s[p][q] += basis[p] * basis[q];
            }
        }
    }
    let c = solve3(s, r);
    let resid = x
        .iter()
        .enumerate()
        .map(|(i, &v)| {
            let (sn, cs) = (w * i as f64).sin_cos();
            (v - c[0] * cs - c[1] * sn - c[2]).powi(2)
        })
        .sum::<f64>();
    (c, resid / (x.len() - 3) as f64)
}

#[test]
fn quantisation_noise_is_a_step_squared_over_twelve() {
    // Rounding to a step q adds an error of variance q²/12 (Bennett, Bell Syst. Tech. J.
    // 27, 1948), independent of the signal once the input's characteristic function is
    // negligible at 2π/q (Widrow & Kollár, *Quantization Noise*, 2008, the quantising
    // theorem): Gaussian noise of σ = q/2 under the tone makes it e^{−π²/2} = 7e-3, so the
    // codes less the best-fitting sinusoid have the variance σ² + q²/12 (Sheppard's
    // correction; Sheppard, Proc. London Math. Soc. 29, 1898, from memory), 0.25 + 0.0833
    // codes². A variance estimated from n samples has a relative standard error
    // √((κ − 1)/n), κ the kurtosis: 2/n for Gaussian samples, 1.93/n for this Gaussian plus
    // uniform error (E e⁴ = 3σ⁴ + σ²q²/2 + q⁴/80). Allowed 4·√(2/n), 2.0 % for n = 80 000,
    // while the q²/12 term is 25 % of the total.
    let (synth, x) = codes(&quantisation_toml(0.5), 1);
    let w = std::f64::consts::TAU * 1234.567 / synth.fs;
    let cpt = codes_per_tesla(12, 1.2e-7);
    for (c, h) in [(0usize, 1.0f64), (3, 1.4)] {
        let n = x[c].len() as f64;
        let (coef, resid) = fit(&x[c], w);
        let want = 0.25 + 1.0 / 12.0;
        assert!((resid / want - 1.0).abs() < 4.0 * (2.0 / n).sqrt(), "coil {c}: residual variance {resid} codes², want {want}");
        // The tone's amplitude is the dipole field (Griffiths, Introduction to
        // Electrodynamics, eq. 5.89, from memory) in codes; the least-squares amplitude's sd
        // is √(2σ²/n) (the Cramér–Rao bound; Rife & Boorstyn 1974): 4 sd.
        let amp = coef[0].hypot(coef[1]);
        let amp_want = 1e-7 / h.powi(3) * cpt;
        assert!((amp - amp_want).abs() < 4.0 * (2.0 * want / n).sqrt(), "coil {c}: amplitude {amp} codes, want {amp_want}");
    }
    // Without the noise, a tone near full scale: SNR = 6.02·b + 1.76 dB for a full-scale sine
    // (Kester, Analog Devices tutorial MT-001), 74.0 dB for 12 bits, less 20·log10 of the
    // tone's fraction of full scale. A pure sine does not meet the quantising theorem, and
    // the error power departs from q²/12 by a few per cent (Bessel-function terms in the
    // tone's amplitude): allowed 0.3 dB.
    let (_, x) = codes(&quantisation_toml(0.0), 1);
    let (coef, resid) = fit(&x[0], w);
    let amp = coef[0].hypot(coef[1]);
    let snr_db = 10.0 * ((amp * amp / 2.0) / resid).log10();
    let want_db = 6.02 * 12.0 + 1.76 + 20.0 * (amp / 2047.0).log10();
    assert!((snr_db - want_db).abs() < 0.3, "SNR {snr_db} dB, want {want_db} dB");
}

/// Solve a 3×3 linear system by Cramer's rule.
fn solve3(a: [[f64; 3]; 3], b: [f64; 3]) -> [f64; 3] {
    let det = |m: [[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1]) - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let d = det(a);
    std::array::from_fn(|k| {
        let mut m = a;
        for i in 0..3 {
            m[i][k] = b[i];
        }
        det(m) / d
    })
}

/// Mains scenario text: grid, harmonic decay, multiplexer skew; a 8192 Hz sonde too weak
/// to matter (its tone, an integer number of cycles a second, is orthogonal to every bin
/// read below).
fn mains_toml(grid_hz: f64, decay: f64, skew_s: f64) -> String {
    format!(
        r#"
name = "mains"
[receiver]
sample_rate_hz = 48000
adc_bits = 24
full_scale_t = 1e-6
skew_s = {skew_s}
[sonde]
freq_hz = 8192
moment_am2 = 1e-6
depth_m = 20
[mains]
grid_hz = {grid_hz}
field_t = 1e-7
harmonic_decay = {decay}
direction = [1.0, 1.0, 1.0]
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 1
"#
    )
}

#[test]
fn mains_harmonics_sit_at_multiples_of_the_grid_with_the_set_decay() {
    // A uniform mains field of direction (1,1,1)/√3 projects 1/√3 of itself on each of the
    // reference head's four coils (axes x, y, z, x). Harmonic n has amplitude
    // field·decay^(n−1) at n·f_grid exactly; the simulator includes harmonics 1–5 and every
    // one within 200 Hz of the beacon tone (its documented model). Over 1 s the DFT bins
    // are 1 Hz apart and each harmonic falls on one: its amplitude 2|X|/N against the set
    // value to 1e-5 (quantisation noise of a 24-bit converter is ~1e-7 of these), and the
    // bins either side of it empty to the same level (no tone off the harmonic).
    for grid in [50.0f64, 60.0] {
        let decay = 0.99;
        let (synth, x) = codes(&mains_toml(grid, decay, 0.0), 2);
        let n = x[0].len();
        assert_eq!(n, synth.fs as usize);
        let near: Vec<u32> =
            (1..=((8192.0 + 200.0) / grid) as u32).filter(|h| (h.to_owned() as f64 * grid - 8192.0).abs() <= 200.0).collect();
        let cpt = codes_per_tesla(24, 1e-6);
        for (c, xc) in x.iter().enumerate() {
            let spec = spectrum(xc);
            for h in (1..=5).chain(near.iter().copied()) {
                let bin = (h as f64 * grid) as usize;
                let want = 1e-7 * decay.powi(h as i32 - 1) / 3f64.sqrt() * cpt;
                let got = 2.0 * spec[bin].norm() / n as f64;
                assert!((got / want - 1.0).abs() < 1e-5, "{grid} Hz grid, coil {c}, harmonic {h}: {got} codes, want {want}");
                for side in [bin - 1, bin + 1] {
                    assert!(2.0 * spec[side].norm() / (n as f64) < 1e-5 * want, "{grid} Hz grid, coil {c}: a tone beside harmonic {h}");
                }
            }
        }
    }
}

#[test]
fn multiplexer_skew_is_a_time_shift_between_channels() {
    // A multiplexed converter samples channel c at t + c·skew. By the DFT's shift theorem
    // (a signal advanced by τ has its component at f multiplied by e^{+j2πfτ}; Oppenheim &
    // Schafer, Discrete-Time Signal Processing, from memory) channel c leads channel 0 by
    // 2π·f·c·skew at every frequency f: measured on every mains harmonic the simulator
    // includes (50 Hz to 8.4 kHz), against a scenario without skew, to 1e-6 rad (the
    // harmonics are 1e6 codes, the quantisation noise one).
    let skew = 20e-6;
    let (_, with) = codes(&mains_toml(50.0, 0.99, skew), 3);
    let (_, without) = codes(&mains_toml(50.0, 0.99, 0.0), 3);
    let near: Vec<u32> = (1..=(8392 / 50)).filter(|h| (*h as f64 * 50.0 - 8192.0).abs() <= 200.0).collect();
    let spec_with: Vec<_> = with.iter().map(|x| spectrum(x)).collect();
    let spec_without: Vec<_> = without.iter().map(|x| spectrum(x)).collect();
    for h in (1..=5u32).chain(near) {
        let f = h as f64 * 50.0;
        let bin = f as usize;
        for c in 0..with.len() {
            // Phase of channel c relative to channel 0, with skew, less the same without.
            let rel = |s: &Vec<Vec<Complex<f64>>>| (s[c][bin] * s[0][bin].conj()).arg();
            let got = rel(&spec_with) - rel(&spec_without);
            // The DFT's phase convention is e^{−j2πkn/N}: an advance by τ shows as +2πfτ in arg X.
            let want = std::f64::consts::TAU * f * c as f64 * skew;
            let diff = (got - want + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU) - std::f64::consts::PI;
            assert!(diff.abs() < 1e-6, "harmonic {h} ({f} Hz), channel {c}: phase {got} want {want}");
        }
    }
}

#[test]
fn ground_field_satisfies_the_conductor_field_equations() {
    // In a conductor of conductivity σ, with the time factor e^{−iωt}, B obeys ∇·B = 0 and
    // ∇²B = −iωμ0σ·B = −k²B (Griffiths, Introduction to Electrodynamics, §9.4.1, eq. 9.120
    // with the displacement current dropped; section from memory). The simulator's
    // whole-space dipole (Jackson eq. 9.36 with k = (1 + i)/δ) must satisfy both away from the
    // dipole: second central differences at 2e-4 m, at points 0.7–3 m from a tilted dipole,
    // skin depths of 2.78 m (32 768 Hz in 1 Ω·m) and 5.56 m (8192 Hz). (With deeper skin depths k²B
    // falls below what the differences resolve.)
    let m = [0.6, -0.3, 0.74];
    let s = [0.2, -0.1, -1.5];
    for &delta in &[2.78, 5.56] {
        for p in [[0.0, 0.0, 0.1], [1.0, 0.5, 0.5], [-2.0, 1.0, 0.1], [0.3, -0.4, -0.7]] {
            let f = |q: [f64; 3]| undertone_sim::physics::dipole_in_ground(m, s, q, delta);
            let e = 2e-4;
            let k2 = 2.0 / (delta * delta); // k² = 2i/δ²: times (re, im) gives (−2·im, 2·re)/δ²
            let b = f(p);
            let mut lap = ([0.0; 3], [0.0; 3]);
            let mut div = (0.0, 0.0);
            for ax in 0..3 {
                let (mut hi, mut lo) = (p, p);
                hi[ax] += e;
                lo[ax] -= e;
                let (bh, bl) = (f(hi), f(lo));
                for c in 0..3 {
                    lap.0[c] += (bh.0[c] - 2.0 * b.0[c] + bl.0[c]) / (e * e);
                    lap.1[c] += (bh.1[c] - 2.0 * b.1[c] + bl.1[c]) / (e * e);
                }
                div.0 += (bh.0[ax] - bl.0[ax]) / (2.0 * e);
                div.1 += (bh.1[ax] - bl.1[ax]) / (2.0 * e);
            }
            let size = (0..3).map(|c| b.0[c].hypot(b.1[c])).fold(0.0, f64::max);
            for c in 0..3 {
                // ∇²B + k²B = 0, relative to |k²B|.
                let (re, im) = (lap.0[c] - k2 * b.1[c], lap.1[c] + k2 * b.0[c]);
                assert!(re.hypot(im) < 1e-4 * k2 * size, "δ {delta} at {p:?} component {c}: {re:e} {im:e} vs {:e}", k2 * size);
            }
            let dist = ((p[0] - s[0]).powi(2) + (p[1] - s[1]).powi(2) + (p[2] - s[2]).powi(2)).sqrt();
            // Relative to one term of the divergence (~B/d); the differences' own error is ~1e-5 of it.
            assert!(div.0.hypot(div.1) < 1e-4 * size / dist, "δ {delta} at {p:?}: ∇·B {div:?}");
        }
    }
}

#[test]
fn ground_changes_the_field_over_the_sonde_as_the_whole_space_dipole() {
    // Directly over a level sonde the along coils read the transverse part of the field,
    // which the ground scales by A_t = e^{ikd}(1 − ikd − k²d²), k = (1 + i)/δ (Jackson,
    // Classical Electrodynamics, 3rd ed., eq. 9.36 with k complex). δ = √(2/(ωμ0σ))
    // (Griffiths §9.4, section from memory; δ = 503.29·√(ρ/f) m): for 8192 Hz in 1 Ω·m wet
    // clay δ = 5.561 m. The receiver stands 0.1 m above a sonde 2 m down; the distances to the
    // lower and upper along coils come from the simulator's truth and the reference head's
    // 0.40 m spacing. Measured: the tone's amplitude and phase with soil against without
    // (amplitudes ~1e6 codes, quantisation noise one code), against the receiver's own
    // magnitude (undertone_dsp::field::ground) and the closed form's phase.
    let fs = 48_000.0;
    let f = 8192.0;
    let sigma = 1.0;
    let delta = (2.0 / (std::f64::consts::TAU * f * MU0 * sigma)).sqrt();
    assert!((delta - 5.561).abs() < 1e-3, "skin depth {delta} m");
    let toml = |soil: f64| {
        format!(
            r#"
name = "soil"
[receiver]
sample_rate_hz = {fs}
adc_bits = 24
full_scale_t = 2e-8
height_m = 0.1
[sonde]
freq_hz = {f}
moment_am2 = 1.0
depth_m = 2.0
[soil]
conductivity_s_per_m = {soil}
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 1
"#
        )
    };
    let (synth, wet) = codes(&toml(sigma), 4);
    let (_, dry) = codes(&toml(0.0), 4);
    let depth = synth.truth(0.5).depth_m;
    assert!((depth - 2.1).abs() < 1e-9, "depth below the lower coil {depth}");
    let bin = f as usize;
    for (c, d) in [(0usize, depth), (3, depth + 0.40)] {
        let a_wet = spectrum(&wet[c])[bin].norm();
        let a_dry = spectrum(&dry[c])[bin].norm();
        let x = d / delta;
        let want = (-x).exp() * ((1.0 + x).powi(2) + (x + 2.0 * x * x).powi(2)).sqrt();
        assert!((a_wet / a_dry / want - 1.0).abs() < 1e-5, "coil {c}, {d} m: ratio {} want {want}", a_wet / a_dry);
        let dsp = undertone_dsp::field::ground::whole_space_factors(d as f32, delta as f32)[1] as f64;
        assert!((dsp / want - 1.0).abs() < 1e-5, "receiver's |A_t| {dsp} want {want}");
        // arg A_t = x − atan((x + 2x²)/(1 + x)) with the time factor e^{−iωt}: the field lags by
        // it, which the DFT (e^{−j2πkn/N}) shows as −arg A_t.
        let phase = (spectrum(&wet[c])[bin] / spectrum(&dry[c])[bin]).arg();
        let want_phase = -(x - ((x + 2.0 * x * x) / (1.0 + x)).atan());
        assert!((phase - want_phase).abs() < 1e-5, "coil {c}: phase {phase} want {want_phase}");
    }
}
