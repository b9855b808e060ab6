//! Mains awareness: where the 50 Hz and 60 Hz harmonics sit around the beacon
//! tone and how strongly the configured detector rejects them.
//!
//! Mains fields carry harmonics `n·f_grid`; a 512 Hz receiver sits 12 Hz from
//! the 10th harmonic of 50 Hz (500 Hz) and 28 Hz from the 9th of 60 Hz
//! (540 Hz). The rejection of a harmonic at offset Δ is `−20·log10|H(Δ)|`, with
//! `H` the detector's normalised frequency response about the tone. Settings
//! that reject a neighbouring harmonic by less than [`MIN_REJECTION_DB`] are flagged.

/// Rejection below which a neighbouring harmonic is flagged, dB.
pub const MIN_REJECTION_DB: f32 = 60.0;

/// One mains harmonic next to the tone.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Harmonic {
    /// Grid fundamental, Hz (50 or 60).
    pub grid_hz: f32,
    /// Harmonic number n.
    pub order: u32,
    /// Harmonic frequency n·grid, Hz.
    pub freq_hz: f32,
    /// Harmonic minus tone, Hz.
    pub offset_hz: f32,
    /// Detector rejection at this harmonic, dB (positive = attenuated).
    pub rejection_db: f32,
}

/// The harmonics below and above the tone on both grids, with rejections.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MainsReport {
    /// [50 Hz below, 50 Hz above, 60 Hz below, 60 Hz above].
    pub harmonics: [Harmonic; 4],
}

impl MainsReport {
    /// Build from the tone frequency and a response function `|H(Δ_hz)|` (linear, 1 at Δ = 0).
    pub fn new(tone_hz: f32, response: impl Fn(f64) -> f64) -> Self {
        let mut hs = [Harmonic { grid_hz: 0.0, order: 0, freq_hz: 0.0, offset_hz: 0.0, rejection_db: 0.0 }; 4];
        for (gi, grid) in [50.0f32, 60.0].iter().enumerate() {
            let below = libm::floorf(tone_hz / grid).max(1.0) as u32;
            let mut above = libm::ceilf(tone_hz / grid).max(1.0) as u32;
            if above == below {
                above += 1;
            }
            for (k, n) in [below, above].iter().enumerate() {
                let f = *n as f32 * grid;
                let off = f - tone_hz;
                let r = response(off as f64);
                // In f32 (0.1 dB is all a table needs); below f32's range the floor of 300 dB.
                let r = r as f32;
                let db = if r >= f32::MIN_POSITIVE && r.is_finite() { -20.0 * crate::powf::log10f(r) } else { 300.0 };
                hs[gi * 2 + k] = Harmonic { grid_hz: *grid, order: *n, freq_hz: f, offset_hz: off, rejection_db: db };
            }
        }
        Self { harmonics: hs }
    }

    /// The nearest harmonic on a grid (50 or 60).
    pub fn nearest(&self, grid_hz: f32) -> Harmonic {
        let i = if grid_hz < 55.0 { 0 } else { 2 };
        let (a, b) = (self.harmonics[i], self.harmonics[i + 1]);
        if libm::fabsf(a.offset_hz) <= libm::fabsf(b.offset_hz) {
            a
        } else {
            b
        }
    }

    /// Least rejection among the four neighbours, dB.
    pub fn worst_rejection_db(&self) -> f32 {
        self.harmonics.iter().map(|h| h.rejection_db).fold(f32::INFINITY, f32::min)
    }

    /// True when some neighbouring harmonic is rejected by less than [`MIN_REJECTION_DB`].
    pub fn flagged(&self) -> bool {
        self.worst_rejection_db() < MIN_REJECTION_DB
    }
}

/// Distance from `f` to the nearest harmonic of 50 Hz or 60 Hz, Hz.
pub fn distance_to_mains_hz(f: f32) -> f32 {
    let d = |g: f32| {
        let n = libm::roundf(f / g).max(1.0);
        libm::fabsf(f - n * g)
    };
    d(50.0).min(d(60.0))
}

/// A frequency near the tone, at least `min_offset_hz` away from it, as far as
/// possible from any mains harmonic: where the noise probe listens.
pub fn quiet_neighbour_hz(tone_hz: f32, min_offset_hz: f32, max_freq_hz: f32) -> f32 {
    let mut best = tone_hz + min_offset_hz;
    let mut best_d = -1.0;
    let step = (min_offset_hz / 4.0).max(0.25);
    for k in 0..64 {
        let off = min_offset_hz + k as f32 * step;
        for cand in [tone_hz + off, tone_hz - off] {
            if cand <= 2.0 * min_offset_hz || cand >= max_freq_hz {
                continue;
            }
            // Prefer far from mains, then close to the tone.
            let d = distance_to_mains_hz(cand).min(12.0 * min_offset_hz) - 0.01 * off;
            if d > best_d {
                best_d = d;
                best = cand;
            }
        }
    }
    best
}
