//! The synthetic multi-coil ADC stream of a scenario.
//!
//! # Model
//! For coil c at sample n (time `t = n/fs`, the coil sampled `c·skew_s` later
//! on a multiplexed converter), in tesla:
//!
//! `v_c(n) = Σ_s A_{s,c}(t)·cos(2π f_s (t + c·skew_s) + φ_s) + u_c(t)·W(t + c·skew_s) + σ_T·g`
//!
//! * `A_{s,c}`: the projection of source s's field (a dipole sonde or
//!   interferer, a line current) on the coil axis at the coil's position, in
//!   conducting ground the whole-space dipole field (a complex phasor; a line
//!   keeps the first-order loss `e^{−ρ/δ}`), times the coil's gain
//!   `1 + mismatch` (see [`crate::physics`]).
//! * Mains: every harmonic h of the grid frequency f_g shares one field
//!   direction `d̂`, so its part factors into the coil's projection
//!   `u_c = (d̂·â_c)(1 + mismatch_c)` times one waveform
//!   `W(t) = Σ_h B₁ k^{h−1} cos(2π h f_g t + φ_h)` (B₁ the fundamental's
//!   field in T, k the harmonic decay). Harmonics 1–5 and every harmonic
//!   within 200 Hz of a beacon tone are included.
//! * `g`: independent N(0, 1) draws ([`crate::noise::Gaussian`]); the field
//!   noise `σ_T = e_T·√(fs/2)` (e_T the density in T/√Hz) and the converter's
//!   own noise `σ_k = e_k·√(fs/2)` (codes/√Hz) are independent Gaussians, so
//!   their sum is drawn once with `σ = √((σ_T·FS/B_fs)² + σ_k²)` codes.
//!
//! Then `code = round(v/B_fs·FS + dc·FS + noise)`, halves to even,
//! clipped to `[−FS−1, FS]` (FS the largest positive code, B_fs the field at
//! full scale). Deterministic for a given seed.
//!
//! # How it is computed (and why it is fast)
//! The geometry (every `A_{s,c}` and `u_c`) is evaluated at *knots*: every
//! control interval of `round(fs/1000)` samples (1 ms) and, in the posed
//! mode below, at the ends of each block; in between it is interpolated
//! linearly. Per span between two knots:
//! * each tone's phasor at the span's first knot, `e^{i(2πf t_0 + φ)}`, is
//!   exact; at sample k after it the tone is `Re(Z_c(k)·e^{i2πf k/fs})`, where
//!   `Z_c(k)` (the knot amplitudes, the skew phase and the knot phasor folded
//!   into one complex number) is linear in k and `e^{i2πf k/fs}` comes from
//!   a table made once: two multiply-adds per tone and channel-sample, no
//!   recurrence to carry, and no phase error that grows along the span;
//! * the mains waveform is periodic: when `q·fs/f_g` is a whole number L of
//!   samples for some q ≤ 32 (fs a whole multiple of f_g/q: 16, 32, 44.1, 48
//!   or 96 kHz on a 50 or 60 Hz grid, but not, say, 48 001 Hz), `W` is
//!   tabulated exactly once per coil (skew included) over L samples and read
//!   back, two flops per channel-sample whatever the number of harmonics;
//!   otherwise each harmonic runs as its own tone as above;
//! * the noise of the whole span is drawn when the span starts (coil by
//!   coil, each coil's samples in order);
//! * the per-coil sums are straight loops over the span that the compiler
//!   vectorises; adding the noise and the rounding finish each channel-sample.
//!
//! The stream does not depend on how it is cut into blocks: knots sit on the
//! control grid and everything a sample needs is fixed when its span starts,
//! so [`Synth::next_codes`] (one frame) and [`Synth::fill_codes`] (many) give
//! the same samples for the same seed.
//! Measured throughput is in BENCHMARKS.md (`cargo bench -p undertone-sim
//! --bench simulate`).
//!
//! # Posed mode: an externally driven receiver
//! [`Synth::fill_codes_posed`] synthesises the next block with the receiver
//! moving in a straight line (heading along the shorter turn) from one given
//! [`Pose`] to another over the block, instead of following the scenario's
//! motion. The field is evaluated at the block's two ends and at every 1 ms
//! control point inside, linearly in between. A block that starts where and
//! when the previous one ended reuses that knot, so a closed loop that
//! decides the next pose every readout (blocks of 1 ms to 50 ms or more) pays
//! at most one extra field evaluation per block. Time runs on across calls
//! (a sonde with `push_speed_m_s` keeps moving along its axis) and is not
//! limited by the scenario's duration. [`Synth::truth_at`] gives the truth
//! for any pose and time. The scenario's motion and the posed mode may be
//! mixed on one stream: each call starts a fresh knot when the mode changes.

use crate::motion::{Motion, Pose};
use crate::noise::Gaussian;
use crate::physics::{axis, dipole_in_ground, dot, line, skin_depth_m, V};
use crate::scenario::{HeadKind, Scenario};
use std::f64::consts::{FRAC_PI_2, PI, TAU};
use undertone_dsp::Head;

#[derive(Clone, Debug)]
enum Kind {
    Dipole { moment: f64, pos0: V, axis: V, speed: f64 },
    Line { current: f64, origin: V, dir: V },
    Uniform { field: V },
}

#[derive(Clone, Debug)]
struct Src {
    freq_hz: f64,
    phase0: f64,
    kind: Kind,
    delta_m: f64,
}

impl Src {
    /// Position of a dipole source at time t (pushed along its axis), m.
    fn pos_at(&self, t: f64) -> V {
        match self.kind {
            Kind::Dipole { pos0, axis, speed, .. } => {
                [pos0[0] + axis[0] * speed * t, pos0[1] + axis[1] * speed * t, pos0[2] + axis[2] * speed * t]
            }
            _ => [0.0; 3],
        }
    }
}

/// Geometry of the head in the receiver frame.
#[derive(Clone, Debug)]
pub struct HeadGeom {
    /// Coil positions relative to the lower coil centre, m.
    pub pos: Vec<V>,
    /// Coil axes.
    pub axis: Vec<V>,
}

impl HeadGeom {
    /// From a DSP head.
    pub fn from_head<const N: usize>(h: &Head<N>) -> Self {
        let f = |v: [f32; 3]| [v[0] as f64, v[1] as f64, v[2] as f64];
        Self { pos: h.coils.iter().map(|c| f(c.pos_m)).collect(), axis: h.coils.iter().map(|c| f(c.axis)).collect() }
    }

    /// The head named in a scenario.
    pub fn named(head: &HeadKind) -> Self {
        match head {
            HeadKind::Triads6 => Self::from_head(&Head::triads6()),
            HeadKind::Reference4 => Self::from_head(&Head::reference4()),
        }
    }
}

/// What is true at an instant.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Truth {
    /// Receiver pose.
    pub pose: Pose,
    /// Sonde position (east, north, up), m.
    pub sonde_m: V,
    /// Depth of the sonde below the lower coil centre, m.
    pub depth_m: f64,
    /// Sonde ahead of the receiver along the handle, m.
    pub ahead_m: f64,
    /// Sonde to the left of the handle, m.
    pub left_m: f64,
    /// Horizontal distance receiver–sonde, m.
    pub range_m: f64,
    /// Sonde axis bearing relative to the handle, rad (−π/2, π/2].
    pub axis_bearing_rad: f64,
}

/// The tabulated mains waveform of each coil (see the module docs).
#[derive(Clone, Debug)]
struct MainsTable {
    /// Unit field direction (ground frame).
    dir: V,
    /// Period of the table, samples.
    period: usize,
    /// Per coil: `W(j/fs + c·skew)` in T for j in 0..period + ctrl (the first
    /// `ctrl` samples repeated at the end so a span never wraps).
    wave: Vec<Vec<f64>>,
}

/// Smallest whole number of samples L = q·fs/f_g (q ≤ 32, L ≤ 2²⁰) over which
/// the mains waveform repeats exactly, if any.
fn mains_period(fs: f64, grid_hz: f64) -> Option<usize> {
    (1..=32u32).find_map(|q| {
        let l = q as f64 * fs / grid_hz;
        let r = l.round();
        ((l - r).abs() <= 1e-9 * l && r >= 1.0 && r <= (1u32 << 20) as f64).then_some(r as usize)
    })
}

/// Which path the held knots were made for.
#[derive(Clone, Copy, Debug, PartialEq)]
enum KnotPath {
    None,
    Scenario,
    Posed,
}

/// Amplitudes at one knot, in codes: for source s and coil c,
/// `p = A·cos ψ`, `q = A·sin ψ` (ψ the skew phase), index `s·coils + c`;
/// `u` the mains projection per coil; `osc` each source's exact phasor
/// `e^{i(2πf t + φ)}` at the knot.
#[derive(Clone, Debug)]
struct Knot {
    n: u64,
    pose: Pose,
    p: Vec<f64>,
    q: Vec<f64>,
    u: Vec<f64>,
    osc: Vec<(f64, f64)>,
}

impl Knot {
    fn new(sources: usize, coils: usize) -> Self {
        Self {
            n: 0,
            pose: Pose { x_m: 0.0, y_m: 0.0, heading_rad: 0.0 },
            p: vec![0.0; sources * coils],
            q: vec![0.0; sources * coils],
            u: vec![0.0; coils],
            osc: vec![(1.0, 0.0); sources],
        }
    }
}

/// Work buffers of one span (at most one control interval long).
#[derive(Clone, Debug)]
struct Scratch {
    /// Per coil, the span's values in codes before noise (`[c][k]`, stride = span length).
    v: Vec<f64>,
    /// Interpolation fraction of each sample.
    frac: Vec<f64>,
    /// The noise of the span being made, codes, coil by coil (`[c][k]`).
    noise: Vec<f64>,
}

/// The stream generator.
#[derive(Clone)]
pub struct Synth {
    /// Sample rate, Hz.
    pub fs: f64,
    /// Largest positive code.
    pub fsc: f64,
    /// Field at full scale, T.
    pub full_scale_t: f64,
    /// Coils.
    pub coils: usize,
    /// Total samples of the scenario.
    pub total: u64,
    head: HeadGeom,
    gain: Vec<f64>,
    /// DC offset per coil, codes.
    dc_codes: Vec<f64>,
    height: f64,
    /// Codes per tesla.
    codes_per_t: f64,
    srcs: Vec<Src>,
    /// Per source s and sample k of a span: `e^{i2πf_s k/fs}`, index `s·ctrl + k`.
    step_re: Vec<f64>,
    step_im: Vec<f64>,
    /// Per source and coil: skew rotation `e^{i2πf·c·skew}`.
    skew_rot: Vec<(f64, f64)>,
    mains: Option<MainsTable>,
    /// Standard deviation of the total noise, codes.
    sigma_codes: f64,
    motion: Motion,
    ctrl: u64,
    n: u64,
    lo: Knot,
    hi: Knot,
    path: KnotPath,
    scratch: Scratch,
    noise: Gaussian,
    sonde: Src,
}

impl Synth {
    /// Build from a scenario; `seed` overrides the scenario's noise seed.
    pub fn new(sc: &Scenario, seed: Option<u64>) -> Self {
        let seed = seed.unwrap_or(sc.seed);
        let r = &sc.receiver;
        let head = HeadGeom::named(&r.head);
        let coils = head.pos.len();
        let mut gain = vec![1.0; coils];
        for (g, m) in gain.iter_mut().zip(r.gain_mismatch.iter()) {
            *g += m;
        }
        let fs = r.sample_rate_hz;
        let fsc = if r.adc_bits >= 32 { i32::MAX as f64 } else { ((1u64 << (r.adc_bits - 1)) - 1) as f64 };
        let mut dc_codes = vec![0.0; coils];
        for (d, v) in dc_codes.iter_mut().zip(sc.noise.dc_offset.iter()) {
            *d = *v * fsc;
        }
        let ctrl = (fs / 1000.0).round().max(1.0) as u64;
        let sigma_soil = sc.soil.conductivity_s_per_m;
        let mut srcs = Vec::new();
        let ph = |k: u64| {
            (((seed ^ 0x5DEE_CE66).wrapping_mul(0x2545_F491_4F6C_DD1D).wrapping_add(k.wrapping_mul(0x9E37_79B9)) >> 11) as f64)
                / (1u64 << 53) as f64
                * TAU
        };
        let dip = |s: &crate::scenario::SondeSpec, k: u64| {
            let f = s.freq_hz * (1.0 + s.ppm * 1e-6);
            Src {
                freq_hz: f,
                phase0: ph(k),
                kind: Kind::Dipole {
                    moment: s.moment_am2,
                    pos0: [s.x_m, s.y_m, -s.depth_m],
                    axis: axis(s.yaw_deg.to_radians(), s.pitch_deg.to_radians()),
                    speed: s.push_speed_m_s,
                },
                delta_m: skin_depth_m(f, sigma_soil),
            }
        };
        let sonde = dip(&sc.sonde, 0);
        srcs.push(sonde.clone());
        for (i, s) in sc.interferer.iter().enumerate() {
            srcs.push(dip(s, 10 + i as u64));
        }
        if let Some(l) = &sc.line {
            srcs.push(Src {
                freq_hz: l.freq_hz,
                phase0: ph(5),
                kind: Kind::Line { current: l.current_a, origin: [l.x_m, l.y_m, -l.depth_m], dir: axis(l.yaw_deg.to_radians(), 0.0) },
                delta_m: skin_depth_m(l.freq_hz, sigma_soil),
            });
        }
        let mut mains = None;
        if let Some(m) = &sc.mains {
            let n = m.direction.iter().map(|v| v * v).sum::<f64>().sqrt();
            let dir = [m.direction[0] / n, m.direction[1] / n, m.direction[2] / n];
            let tones: Vec<f64> = std::iter::once(sc.sonde.freq_hz).chain(sc.detector.freq_hz).collect();
            let max_h = (tones.iter().cloned().fold(0.0, f64::max) + 200.0) / m.grid_hz;
            // (harmonic frequency, amplitude T, phase rad)
            let harmonics: Vec<(f64, f64, f64)> = (1..=(max_h as u32).min(2000))
                .filter(|&h| {
                    let f = h as f64 * m.grid_hz;
                    h <= 5 || tones.iter().any(|t| (f - t).abs() <= 200.0)
                })
                .map(|h| (h as f64 * m.grid_hz, m.field_t * m.harmonic_decay.powi(h as i32 - 1), ph(100 + h as u64)))
                .collect();
            match mains_period(fs, m.grid_hz) {
                Some(period) => {
                    let wave = (0..coils)
                        .map(|c| {
                            (0..period + ctrl as usize)
                                .map(|j| {
                                    harmonics
                                        .iter()
                                        .map(|&(f, a, p0)| {
                                            let ph = (f * j as f64 / fs).fract() * TAU + p0 + TAU * f * c as f64 * r.skew_s;
                                            a * ph.cos()
                                        })
                                        .sum()
                                })
                                .collect()
                        })
                        .collect();
                    mains = Some(MainsTable { dir, period, wave });
                }
                None => {
                    for &(f, a, p0) in &harmonics {
                        srcs.push(Src {
                            freq_hz: f,
                            phase0: p0,
                            kind: Kind::Uniform { field: [dir[0] * a, dir[1] * a, dir[2] * a] },
                            delta_m: f64::INFINITY,
                        });
                    }
                }
            }
        }
        let steps = |f: fn(f64) -> f64| -> Vec<f64> {
            srcs.iter().flat_map(|s| (0..ctrl).map(move |k| f(TAU * ((s.freq_hz * k as f64 / fs).fract())))).collect()
        };
        let (step_re, step_im) = (steps(f64::cos), steps(f64::sin));
        let skew_rot = srcs
            .iter()
            .flat_map(|s| {
                (0..coils).map(move |c| {
                    let a = TAU * s.freq_hz * c as f64 * r.skew_s;
                    (a.cos(), a.sin())
                })
            })
            .collect();
        let motion = Motion::new(&sc.motion, sc.seed);
        let total = (motion.duration_s() * fs) as u64;
        let ns = srcs.len();
        let codes_per_t = fsc / r.full_scale_t;
        let sigma_t = sc.noise.density_t_per_rthz * (fs / 2.0).sqrt();
        let sigma_k = sc.noise.density_counts_per_rthz * (fs / 2.0).sqrt();
        let span = ctrl as usize;
        Self {
            fs,
            fsc,
            full_scale_t: r.full_scale_t,
            coils,
            total,
            head,
            gain,
            dc_codes,
            height: r.height_m,
            codes_per_t,
            step_re,
            step_im,
            skew_rot,
            srcs,
            mains,
            sigma_codes: ((sigma_t * codes_per_t).powi(2) + sigma_k * sigma_k).sqrt(),
            motion,
            ctrl,
            n: 0,
            lo: Knot::new(ns, coils),
            hi: Knot::new(ns, coils),
            path: KnotPath::None,
            scratch: Scratch { v: vec![0.0; span * coils], frac: vec![0.0; span], noise: vec![0.0; span * coils] },
            noise: Gaussian::from_seed(seed),
            sonde,
        }
    }

    /// The field amplitudes (codes) of every source on every coil, and the
    /// mains projections, for the receiver at `pose` at sample `n`, into `k`.
    fn eval_knot(&self, pose: Pose, n: u64, k: &mut Knot) {
        let t = n as f64 / self.fs;
        k.n = n;
        k.pose = pose;
        let (s, c) = pose.heading_rad.sin_cos();
        let rot = |v: V| [c * v[0] - s * v[1], s * v[0] + c * v[1], v[2]];
        let nc = self.coils;
        // Coils of a triad share one position: the field there (and its
        // attenuation) is computed once per source and position.
        let mut at: Option<V> = None;
        let mut fields = [([0.0; 3], [0.0; 3]); 16];
        for ci in 0..nc {
            let p0 = rot(self.head.pos[ci]);
            let p = [pose.x_m + p0[0], pose.y_m + p0[1], self.height + p0[2]];
            let ax = rot(self.head.axis[ci]);
            let g = self.gain[ci] * self.codes_per_t;
            let fresh = at != Some(p);
            at = Some(p);
            for (i, src) in self.srcs.iter().enumerate() {
                // The field's phasor (real, imaginary) at the coil, ground included.
                let (re, im) = match (fresh, fields.get(i)) {
                    (false, Some(f)) => *f,
                    _ => {
                        let f = match src.kind {
                            Kind::Dipole { moment, axis, .. } => {
                                let sp = src.pos_at(t);
                                let m = [axis[0] * moment, axis[1] * moment, axis[2] * moment];
                                dipole_in_ground(m, sp, p, src.delta_m)
                            }
                            Kind::Line { current, origin, dir } => {
                                let b = line(current, origin, dir, p);
                                let att = if src.delta_m.is_finite() { (-(p[2] - origin[2]).abs() / src.delta_m).exp() } else { 1.0 };
                                ([b[0] * att, b[1] * att, b[2] * att], [0.0; 3])
                            }
                            Kind::Uniform { field } => (field, [0.0; 3]),
                        };
                        if let Some(slot) = fields.get_mut(i) {
                            *slot = f;
                        }
                        f
                    }
                };
                // The waveform is Re((p + iq)·e^{+iωt}): the phasor of physics.rs (time factor
                // e^{−iωt}) enters conjugated, so a field delayed by the ground stays delayed.
                let (a, b) = (dot(re, ax) * g, -dot(im, ax) * g);
                let sr = self.skew_rot[i * nc + ci];
                k.p[i * nc + ci] = a * sr.0 - b * sr.1;
                k.q[i * nc + ci] = a * sr.1 + b * sr.0;
            }
            k.u[ci] = self.mains.as_ref().map(|m| dot(m.dir, ax) * g).unwrap_or(0.0);
        }
        for (o, src) in k.osc.iter_mut().zip(self.srcs.iter()) {
            let ph = (src.freq_hz * t).fract() * TAU + src.phase0;
            *o = (ph.cos(), ph.sin());
        }
    }

    /// Render `len` frames (interleaved into `out`) from the current sample,
    /// all between the knots `lo` and `hi`, and advance.
    ///
    /// Budget: per channel-sample two multiply-adds per tone, one for the
    /// mains, one normal draw and a rounding; about 5 ns all told (1000× real
    /// time for 4 coils at 48 kSPS, BENCHMARKS.md).
    fn render_span(&mut self, out: &mut [i32], len: usize) {
        let nc = self.coils;
        let (lo, hi) = (&self.lo, &self.hi);
        let off = (self.n - lo.n) as usize;
        let Scratch { v, frac, noise } = &mut self.scratch;
        if off == 0 {
            // A new span: its noise, drawn coil by coil.
            let all = (hi.n - lo.n) as usize * nc;
            if self.sigma_codes > 0.0 {
                self.noise.fill_scaled(&mut noise[..all], self.sigma_codes);
            } else {
                noise[..all].fill(0.0);
            }
        }
        let (v, frac) = (&mut v[..nc * len], &mut frac[..len]);
        let inv = 1.0 / (hi.n - lo.n) as f64;
        for (k, f) in frac.iter_mut().enumerate() {
            *f = (off + k) as f64 * inv;
        }
        for c in 0..nc {
            v[c * len..(c + 1) * len].fill(self.dc_codes[c]);
        }
        let ctrl = self.ctrl as usize;
        for (i, o) in lo.osc.iter().enumerate() {
            let er = &self.step_re[i * ctrl + off..i * ctrl + off + len];
            let ei = &self.step_im[i * ctrl + off..i * ctrl + off + len];
            for c in 0..nc {
                // Z(k) = (p + iq)(k)·o, linear in k.
                let j = i * nc + c;
                let (p0, q0) = (lo.p[j], lo.q[j]);
                let (dp, dq) = (hi.p[j] - p0, hi.q[j] - q0);
                let (zr, zi) = (p0 * o.0 - q0 * o.1, p0 * o.1 + q0 * o.0);
                let (dzr, dzi) = (dp * o.0 - dq * o.1, dp * o.1 + dq * o.0);
                let vc = &mut v[c * len..(c + 1) * len];
                for k in 0..len {
                    vc[k] += (zr + dzr * frac[k]) * er[k] - (zi + dzi * frac[k]) * ei[k];
                }
            }
        }
        if let Some(m) = &self.mains {
            let j0 = (self.n % m.period as u64) as usize;
            for c in 0..nc {
                let (u0, du) = (lo.u[c], hi.u[c] - lo.u[c]);
                let w = &m.wave[c][j0..j0 + len];
                let vc = &mut v[c * len..(c + 1) * len];
                for k in 0..len {
                    vc[k] += (u0 + du * frac[k]) * w[k];
                }
            }
        }
        let (lo_code, hi_code) = (-self.fsc - 1.0, self.fsc);
        let span = (hi.n - lo.n) as usize;
        // Noise, rounding and interleaving in one pass per coil.
        for c in 0..nc {
            let g = &noise[c * span + off..c * span + off + len];
            let vc = &v[c * len..(c + 1) * len];
            for ((frame, &x), &n) in out[..nc * len].chunks_exact_mut(nc).zip(vc).zip(g) {
                frame[c] = round_clip(x + n, lo_code, hi_code) as i32;
            }
        }
        self.n += len as u64;
    }

    /// Frames from the scenario's motion into `out` (interleaved, a whole
    /// number of frames); returns the frames written (fewer at the end).
    fn fill_scenario(&mut self, out: &mut [i32]) -> usize {
        let nc = self.coils;
        let frames = ((out.len() / nc) as u64).min(self.total.saturating_sub(self.n)) as usize;
        let end = self.n + frames as u64;
        let mut w = 0;
        while self.n < end {
            if self.path != KnotPath::Scenario {
                self.set_knot(false, self.motion.pose(self.n as f64 / self.fs), self.n);
                self.advance_grid_knot();
                self.path = KnotPath::Scenario;
            } else if self.n == self.hi.n {
                std::mem::swap(&mut self.lo, &mut self.hi);
                self.advance_grid_knot();
            }
            let len = (self.hi.n.min(end) - self.n) as usize;
            self.render_span(&mut out[w * nc..], len);
            w += len;
        }
        frames
    }

    /// Put the knot of the next control point after `lo` into `hi` (scenario motion).
    fn advance_grid_knot(&mut self) {
        let g = (self.lo.n / self.ctrl + 1) * self.ctrl;
        self.set_knot(true, self.motion.pose(g as f64 / self.fs), g);
    }

    /// Evaluate the knot at sample `n` with the receiver at `pose` into `hi` (or `lo`).
    fn set_knot(&mut self, hi: bool, pose: Pose, n: u64) {
        fn slot(s: &mut Synth, hi: bool) -> &mut Knot {
            if hi {
                &mut s.hi
            } else {
                &mut s.lo
            }
        }
        let mut k = std::mem::replace(slot(self, hi), Knot::new(0, 0));
        self.eval_knot(pose, n, &mut k);
        *slot(self, hi) = k;
    }

    /// The next frame of codes into `out` (its first `coils` entries). False at the end.
    ///
    /// The same samples as [`Synth::fill_codes`] gives for the same seed: a thin
    /// wrapper over the block path.
    pub fn next_codes(&mut self, out: &mut [i32]) -> bool {
        let nc = self.coils;
        self.fill_scenario(&mut out[..nc]) == 1
    }

    /// Frames of the scenario (its motion) into `out`; returns how many were
    /// written: `out.len()` until the end of the scenario, then fewer, then 0.
    ///
    /// Panics if `N` differs from [`Synth::coils`] (a programming error).
    pub fn fill_codes<const N: usize>(&mut self, out: &mut [[i32; N]]) -> usize {
        assert_eq!(N, self.coils, "fill_codes::<{N}> on a {}-coil stream", self.coils);
        self.fill_scenario(out.as_flattened_mut())
    }

    /// As [`Synth::fill_codes`], into an interleaved buffer (`c0 c1 … c0 …`,
    /// any head size); trailing entries that do not make a frame are left alone.
    pub fn fill_interleaved(&mut self, out: &mut [i32]) -> usize {
        self.fill_scenario(out)
    }

    /// The next `out.len()` frames with the receiver moving linearly from
    /// `pose_start` (at the block's first sample) to `pose_end` (one sample
    /// after its last), instead of the scenario's motion; see the module docs.
    /// Not limited by the scenario's duration. The heading turns the shorter way.
    ///
    /// Panics if `N` differs from [`Synth::coils`] (a programming error).
    pub fn fill_codes_posed<const N: usize>(&mut self, pose_start: Pose, pose_end: Pose, out: &mut [[i32; N]]) {
        assert_eq!(N, self.coils, "fill_codes_posed::<{N}> on a {}-coil stream", self.coils);
        let frames = out.len() as u64;
        if frames == 0 {
            return;
        }
        let out = out.as_flattened_mut();
        let nc = self.coils;
        let (n0, n1) = (self.n, self.n + frames);
        let turn = (pose_end.heading_rad - pose_start.heading_rad + PI).rem_euclid(TAU) - PI;
        let pose_at = |n: u64| {
            let f = (n - n0) as f64 / frames as f64;
            Pose {
                x_m: pose_start.x_m + (pose_end.x_m - pose_start.x_m) * f,
                y_m: pose_start.y_m + (pose_end.y_m - pose_start.y_m) * f,
                heading_rad: pose_start.heading_rad + turn * f,
            }
        };
        if self.path == KnotPath::Posed && self.hi.n == n0 && self.hi.pose == pose_start {
            std::mem::swap(&mut self.lo, &mut self.hi);
        } else {
            self.set_knot(false, pose_start, n0);
        }
        self.path = KnotPath::Posed;
        let mut w = 0;
        while self.n < n1 {
            let kn = ((self.n / self.ctrl + 1) * self.ctrl).min(n1);
            self.set_knot(true, if kn == n1 { pose_end } else { pose_at(kn) }, kn);
            let len = (kn - self.n) as usize;
            self.render_span(&mut out[w * nc..], len);
            w += len;
            if self.n < n1 {
                std::mem::swap(&mut self.lo, &mut self.hi);
            }
        }
    }

    /// The receiver's pose in the scenario's motion at time t.
    pub fn scenario_pose(&self, t_s: f64) -> Pose {
        self.motion.pose(t_s)
    }

    /// The truth at time t, the receiver following the scenario's motion.
    pub fn truth(&self, t_s: f64) -> Truth {
        self.truth_at(self.motion.pose(t_s), t_s)
    }

    /// The truth at time t with the receiver at `pose` (the posed mode).
    pub fn truth_at(&self, pose: Pose, t_s: f64) -> Truth {
        let sp = self.sonde.pos_at(t_s);
        let (dx, dy) = (sp[0] - pose.x_m, sp[1] - pose.y_m);
        let (s, c) = pose.heading_rad.sin_cos();
        let yaw = match self.sonde.kind {
            Kind::Dipole { axis, .. } => axis[1].atan2(axis[0]),
            _ => 0.0,
        };
        let b = (yaw - pose.heading_rad + FRAC_PI_2).rem_euclid(PI) - FRAC_PI_2;
        Truth {
            pose,
            sonde_m: sp,
            depth_m: self.height - sp[2],
            ahead_m: c * dx + s * dy,
            left_m: -s * dx + c * dy,
            range_m: (dx * dx + dy * dy).sqrt(),
            axis_bearing_rad: b,
        }
    }

    /// Duration of the scenario's stream, s.
    pub fn duration_s(&self) -> f64 {
        self.total as f64 / self.fs
    }

    /// Samples produced so far.
    pub fn position(&self) -> u64 {
        self.n
    }
}

/// Round to the nearest whole number (halves to even) and clip to `[lo, hi]`
/// (whole numbers within ±2⁵¹); NaN stays NaN.
///
/// Adding and subtracting 1.5·2⁵² rounds in the FPU's default mode (IEEE 754
/// round-to-nearest-even): `f64::round` would be a library call on the
/// baseline x86-64 target (no SSE4.1), this is two vector additions.
///
/// ```
/// # use undertone_sim::synth::round_clip;
/// let r = |x| round_clip(x, -8.0, 7.0);
/// assert_eq!([r(2.4), r(2.6), r(-2.6), r(2.5), r(3.5), r(9.0), r(-9.0)], [2.0, 3.0, -3.0, 2.0, 4.0, 7.0, -8.0]);
/// ```
#[inline]
pub fn round_clip(x: f64, lo: f64, hi: f64) -> f64 {
    const MAGIC: f64 = 6_755_399_441_055_744.0; // 1.5·2⁵²
    (x.clamp(lo, hi) + MAGIC) - MAGIC
}
