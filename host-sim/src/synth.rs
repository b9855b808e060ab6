//! The synthetic multi-coil ADC stream of a scenario.
//!
//! For each coil c at time t (plus the channel's skew `c·skew_s` on a
//! multiplexed converter): `v_c = Σ_s A_{s,c}(t)·cos(2π f_s t_c + φ_s)` in
//! tesla, where `A_{s,c}` is the projection of source s's field on the coil
//! axis at the coil's position (with soil attenuation and the coil's gain
//! error), plus white noise and DC offset; then `code = round(v/B_fs·FS)`,
//! clipped to the converter's range. The geometry (A) is evaluated every
//! millisecond and interpolated linearly in between; the tones run from
//! oscillators resynchronised to the exact phase every millisecond.
//! Mains harmonics 1–5 and every harmonic within 200 Hz of a beacon tone are
//! included. Deterministic for a given seed (ChaCha8).

use crate::motion::{Motion, Pose};
use crate::physics::{axis, dipole, dot, line, skin_depth_m, V};
use crate::scenario::Scenario;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
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
    pub fn named(name: &str) -> Self {
        if name == "triads6" {
            Self::from_head(&Head::triads6())
        } else {
            Self::from_head(&Head::reference4())
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

/// The stream generator.
pub struct Synth {
    /// Sample rate, Hz.
    pub fs: f64,
    /// Largest positive code.
    pub fsc: f64,
    /// Field at full scale, T.
    pub full_scale_t: f64,
    /// Coils.
    pub coils: usize,
    head: HeadGeom,
    gain: Vec<f64>,
    dc: Vec<f64>,
    height: f64,
    skew: f64,
    srcs: Vec<Src>,
    noise_t: f64,
    noise_counts: f64,
    motion: Motion,
    ctrl: usize,
    n: u64,
    a0: Vec<f64>,
    a1: Vec<f64>,
    osc: Vec<(f64, f64)>,
    rot: Vec<(f64, f64)>,
    skew_rot: Vec<(f64, f64)>,
    rng: ChaCha8Rng,
    sonde: Src,
    /// Total samples of the scenario.
    pub total: u64,
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
        let mut dc = vec![0.0; coils];
        for (d, v) in dc.iter_mut().zip(sc.noise.dc_offset.iter()) {
            *d = *v;
        }
        let sigma_soil = sc.soil.conductivity_s_per_m;
        let mut srcs = Vec::new();
        let ph = |k: u64| {
            (((seed ^ 0x5DEE_CE66).wrapping_mul(0x2545_F491_4F6C_DD1D).wrapping_add(k.wrapping_mul(0x9E37_79B9)) >> 11) as f64)
                / (1u64 << 53) as f64
                * std::f64::consts::TAU
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
        if let Some(m) = &sc.mains {
            let n = m.direction.iter().map(|v| v * v).sum::<f64>().sqrt();
            let dir = [m.direction[0] / n, m.direction[1] / n, m.direction[2] / n];
            let tones: Vec<f64> = std::iter::once(sc.sonde.freq_hz).chain(sc.detector.freq_hz).collect();
            let max_h = (tones.iter().cloned().fold(0.0, f64::max) + 200.0) / m.grid_hz;
            for h in 1..=(max_h as u32).min(2000) {
                let f = h as f64 * m.grid_hz;
                let near = tones.iter().any(|t| (f - t).abs() <= 200.0);
                if h <= 5 || near {
                    let a = m.field_t * m.harmonic_decay.powi(h as i32 - 1);
                    srcs.push(Src {
                        freq_hz: f,
                        phase0: ph(100 + h as u64),
                        kind: Kind::Uniform { field: [dir[0] * a, dir[1] * a, dir[2] * a] },
                        delta_m: f64::INFINITY,
                    });
                }
            }
        }
        let fs = r.sample_rate_hz;
        let fsc = if r.adc_bits >= 32 { i32::MAX as f64 } else { ((1u64 << (r.adc_bits - 1)) - 1) as f64 };
        let rot = srcs.iter().map(|s| {
            let w = std::f64::consts::TAU * s.freq_hz / fs;
            (w.cos(), w.sin())
        });
        let skew_rot = srcs
            .iter()
            .flat_map(|s| {
                (0..coils).map(move |c| {
                    let a = std::f64::consts::TAU * s.freq_hz * c as f64 * r.skew_s;
                    (a.cos(), a.sin())
                })
            })
            .collect();
        let motion = Motion::new(&sc.motion, sc.seed);
        let total = (motion.duration_s() * fs) as u64;
        let ns = srcs.len();
        let mut s = Self {
            fs,
            fsc,
            full_scale_t: r.full_scale_t,
            coils,
            head,
            gain,
            dc,
            height: r.height_m,
            skew: r.skew_s,
            rot: rot.collect(),
            skew_rot,
            osc: vec![(1.0, 0.0); ns],
            a0: vec![0.0; ns * coils],
            a1: vec![0.0; ns * coils],
            srcs,
            noise_t: sc.noise.density_t_per_rthz * (fs / 2.0).sqrt(),
            noise_counts: sc.noise.density_counts_per_rthz * (fs / 2.0).sqrt(),
            motion,
            ctrl: (fs / 1000.0).round().max(1.0) as usize,
            n: 0,
            rng: ChaCha8Rng::seed_from_u64(seed),
            sonde,
            total,
        };
        s.a1 = s.amplitudes(0.0);
        s
    }

    fn sonde_pos(src: &Src, t: f64) -> V {
        match src.kind {
            Kind::Dipole { pos0, axis, speed, .. } => {
                [pos0[0] + axis[0] * speed * t, pos0[1] + axis[1] * speed * t, pos0[2] + axis[2] * speed * t]
            }
            _ => [0.0; 3],
        }
    }

    /// Field amplitude (T) of every source on every coil at time t: [src][coil] flattened.
    fn amplitudes(&self, t: f64) -> Vec<f64> {
        let pose = self.motion.pose(t);
        let (s, c) = pose.heading_rad.sin_cos();
        let rot = |v: V| [c * v[0] - s * v[1], s * v[0] + c * v[1], v[2]];
        let mut out = vec![0.0; self.srcs.len() * self.coils];
        for (k, src) in self.srcs.iter().enumerate() {
            for ci in 0..self.coils {
                let p0 = rot(self.head.pos[ci]);
                let p = [pose.x_m + p0[0], pose.y_m + p0[1], self.height + p0[2]];
                let ax = rot(self.head.axis[ci]);
                let (b, d) = match src.kind {
                    Kind::Dipole { moment, axis, .. } => {
                        let sp = Self::sonde_pos(src, t);
                        let m = [axis[0] * moment, axis[1] * moment, axis[2] * moment];
                        let r = [p[0] - sp[0], p[1] - sp[1], p[2] - sp[2]];
                        (dipole(m, sp, p), dot(r, r).sqrt())
                    }
                    Kind::Line { current, origin, dir } => (line(current, origin, dir, p), (p[2] - origin[2]).abs()),
                    Kind::Uniform { field } => (field, 0.0),
                };
                let att = if src.delta_m.is_finite() { (-d / src.delta_m).exp() } else { 1.0 };
                out[k * self.coils + ci] = dot(b, ax) * att * self.gain[ci];
            }
        }
        out
    }

    /// The truth at time t.
    pub fn truth(&self, t: f64) -> Truth {
        let pose = self.motion.pose(t);
        let sp = Self::sonde_pos(&self.sonde, t);
        let (dx, dy) = (sp[0] - pose.x_m, sp[1] - pose.y_m);
        let (s, c) = pose.heading_rad.sin_cos();
        let yaw = match self.sonde.kind {
            Kind::Dipole { axis, .. } => axis[1].atan2(axis[0]),
            _ => 0.0,
        };
        let mut b = yaw - pose.heading_rad;
        b = (b + std::f64::consts::FRAC_PI_2).rem_euclid(std::f64::consts::PI) - std::f64::consts::FRAC_PI_2;
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

    /// Duration of the stream, s.
    pub fn duration_s(&self) -> f64 {
        self.total as f64 / self.fs
    }

    /// Samples produced so far.
    pub fn position(&self) -> u64 {
        self.n
    }

    /// The next frame of codes into `out` (length = coils). False at the end.
    pub fn next_codes(&mut self, out: &mut [i32]) -> bool {
        if self.n >= self.total {
            return false;
        }
        let k = (self.n % self.ctrl as u64) as usize;
        if k == 0 {
            let t_next = (self.n + self.ctrl as u64) as f64 / self.fs;
            std::mem::swap(&mut self.a0, &mut self.a1);
            self.a1 = self.amplitudes(t_next);
            let t = self.n as f64 / self.fs;
            for (i, src) in self.srcs.iter().enumerate() {
                let ph = (src.freq_hz * t).fract() * std::f64::consts::TAU + src.phase0;
                self.osc[i] = (ph.cos(), ph.sin());
            }
        }
        let frac = k as f64 / self.ctrl as f64;
        let nc = self.coils;
        for c in 0..nc {
            let mut v = 0.0;
            for (i, o) in self.osc.iter().enumerate() {
                let a = self.a0[i * nc + c] + (self.a1[i * nc + c] - self.a0[i * nc + c]) * frac;
                let sr = self.skew_rot[i * nc + c];
                v += a * (o.0 * sr.0 - o.1 * sr.1);
            }
            if self.noise_t > 0.0 {
                let g: f64 = StandardNormal.sample(&mut self.rng);
                v += self.noise_t * g;
            }
            let mut code = (v / self.full_scale_t + self.dc[c]) * self.fsc;
            if self.noise_counts > 0.0 {
                let g: f64 = StandardNormal.sample(&mut self.rng);
                code += self.noise_counts * g;
            }
            out[c] = code.round().clamp(-self.fsc - 1.0, self.fsc) as i32;
        }
        for (o, r) in self.osc.iter_mut().zip(self.rot.iter()) {
            *o = (o.0 * r.0 - o.1 * r.1, o.0 * r.1 + o.1 * r.0);
        }
        self.n += 1;
        let _ = self.skew;
        true
    }
}
