//! Following the sonde from the change of the field as the receiver moves.
//!
//! One reading of a 4-coil head cannot place the sonde: the field of a level
//! dipole at a point fixes only its direction up to sign, and the same
//! direction occurs once inside the nulls and once beyond them, on either side
//! laterally. What settles it is how the field *changes* as the receiver
//! moves. The model (Griffiths eq. 5.89, a level dipole `K·x̂` at depth h, the
//! receiver at `(x, y, h)` in the sonde's frame, `u = x/h`, `η = y/h`):
//!
//! `B = K/r⁵·(2x² − y² − h², 3xy, 3xh)`.
//!
//! * **Along the axis** the dip angle `Φ = atan2(Bz, Bx)` sweeps a full turn,
//!   `Φ(u) = atan2(3u, 2u² − 1)`, from 0 far behind (u → −∞) through −π/2 at the
//!   near null, −π over the sonde, −3π/2 at the far null to −2π far ahead;
//!   `dΦ/du = −3(2u² + 1)/((4u² + 1)(u² + 1)) < 0` everywhere. The coils see
//!   Φ only modulo π (the sonde's phase, hence the sign of the field, is
//!   unknown), so Φ is unwrapped from readout to readout and one bit (is the
//!   tracked angle Φ or Φ + π?) is missing. The magnitude
//!   `|B| = K·√(4u² + 1)/(h³(u² + 1)²)` falls monotonically away from the sonde
//!   in both directions. Moving along the axis either way, `d|B|` and `dΦ` then
//!   have opposite signs exactly when the sonde lies ahead (u < 0): the sign of
//!   the receiver's own motion cancels out. Regressions of `ln|B|` and `Φ` on
//!   time over the last second give that evidence with its significance; it is
//!   accumulated into the missing bit, which then stays known while the angle
//!   is tracked continuously (through nulls and over the sonde).
//!   Knowing Φ on the full turn: the sonde is ahead when `sin Φ < 0`, the
//!   receiver is inside the nulls when `cos Φ < 0`, and u is the root of
//!   `2u²·sin Φ − 3u·cos Φ − sin Φ = 0` on that branch.
//! * **Across the axis**: in the sonde's frame `By/Bz = y/h = η` at any point
//!   off the plane x = 0. In the head's frame, turned by β from the sonde axis,
//!   the across reading is `b = tan β·a + (η/cos β)·c` (a, b, c: along, across,
//!   vertical). With the heading held while walking along the axis (β and η
//!   constant, a/c varying), a recursive least-squares fit of b on (a, c) gives
//!   both. Over the sonde (c → 0) nothing new is learnt about η; the estimate
//!   is kept while the receiver stands still and forgotten while it moves.
//!
//! The receiver's readouts describe the field `group_delay_s` ago; the along
//! offset is carried forward by the rate of change of Φ so that "over" means
//! over *now*.
//!
//! Assumptions: a level sonde (a pitched one moves the peak by about
//! `h·tan α/3` along the axis; the 6-coil fit measures the pitch), one source,
//! the heading held while walking. Turning the receiver is recognised (the
//! bearing turns while the field strength and its vertical part stay put) and
//! carried into β; a sudden reversal of the handle is recognised by the
//! sign of the vertical part flipping without passing through zero.

use crate::field::vec3::V3;
use heapless::Deque;

/// Readouts kept for the motion regressions.
pub const WINDOW: usize = 48;

/// What the tracker is fed each readout.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TrackInput {
    /// Time of the readout, s.
    pub t_s: f32,
    /// Lower triad (along, across, vertical), sign-normalised so along ≥ 0.
    pub lower: V3,
    /// Noise σ of each lower component (along, across, vertical).
    pub sigma: V3,
    /// Seconds over which the noise of successive readouts is correlated (≈ 1/bandwidth).
    pub noise_corr_s: f32,
    /// Delay from the data's centre to the readout, s.
    pub group_delay_s: f32,
}

/// The tracker's estimate after a readout.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrackState {
    /// The side bit is known (Φ placed on its full turn).
    pub placed: bool,
    /// Φ on its full turn (−2π, 0], when placed.
    pub phi_rad: f32,
    /// One-sigma of Φ from the noise, rad.
    pub sigma_phi_rad: f32,
    /// Receiver's along offset past the sonde over depth, now (lag-compensated), when placed.
    pub u: f32,
    /// One-sigma of u.
    pub sigma_u: f32,
    /// Inside the nulls (when placed).
    pub inside: bool,
    /// Rate of change of u, 1/s (positive: moving forward along the handle, if the axis is along it).
    pub u_rate_per_s: f32,
    /// The sonde axis's angle from the handle, rad (β), from the across regression.
    pub axis_rad: f32,
    /// Lateral offset over depth η of the receiver (positive: receiver left of the axis).
    pub eta: f32,
    /// One-sigma of η (infinite when nothing is known).
    pub sigma_eta: f32,
    /// The receiver was judged to move during this readout.
    pub moving: bool,
    /// The field has been getting weaker as the receiver moves: over the last
    /// [`FALL_WINDOW_S`] its strength fell significantly and by more than
    /// [`FALL_FRACTION`] from the strongest reading of the last two windows.
    pub falling: bool,
}

impl TrackState {
    const EMPTY: TrackState = TrackState {
        placed: false,
        phi_rad: 0.0,
        sigma_phi_rad: f32::INFINITY,
        u: 0.0,
        sigma_u: f32::INFINITY,
        inside: false,
        u_rate_per_s: 0.0,
        axis_rad: 0.0,
        eta: 0.0,
        sigma_eta: f32::INFINITY,
        moving: false,
        falling: false,
    };
}

/// A passage of the field through the vertical (the along-axis part small).
#[derive(Clone, Copy, Debug)]
struct Passage {
    /// Highest log-strength in the second before it.
    l_before: f32,
    /// Lowest log-strength during it.
    l_min: f32,
    /// Highest log-strength since it ended.
    l_after: f32,
    /// The tracked angle Φ when it began.
    phi_start: f32,
    /// When it ended (None: still in it), s.
    ended_s: Option<f32>,
}

/// Window over which a falling strength is judged, s.
pub const FALL_WINDOW_S: f32 = 1.5;
/// Fall of the strength (log) from its recent best that counts as falling.
pub const FALL_FRACTION: f32 = 0.1;

/// Largest change of the field between two readouts taken as a measurement (a fraction of it).
pub const SPIKE_FRACTION: f32 = 0.5;

/// Half-width of the zone near the point over the sonde where the strength check runs, in depths.
pub const ZONE_U: f32 = 0.3;

/// Consecutive outliers of the across regression after which it starts afresh.
pub const MAX_OUTLIERS: u8 = 5;

/// How long after a passage the strength is watched for its recovery, s.
pub const PASSAGE_WATCH_S: f32 = 0.6;

#[derive(Clone, Copy, Debug, Default)]
struct Sample {
    t: f32,
    phi: f32,
    l: f32,
    /// Bearing of the horizontal field from the handle, unwrapped, rad.
    bearing: f32,
    /// The horizontal field is well above the noise (its bearing means something).
    reliable: bool,
}

/// The tracker.
#[derive(Clone, Debug)]
pub struct Track {
    have: bool,
    last_t: f32,
    last: V3,
    last_noise: f32,
    last_psi: f32,
    // The next readout's ψ starts the unwrap afresh (after a reversal) rather than stepping.
    have_last_psi: bool,
    phi: f32,
    evidence: f32,
    hist: Deque<Sample, WINDOW>,
    // The axis's angle from the handle is `beta_ref + atan(p)`; across regression
    // b' = p·a' + q·c in the frame turned by beta_ref (direction cosines).
    beta_ref: f32,
    p: f32,
    q: f32,
    cov: [[f32; 2]; 2],
    have_axis: bool,
    outliers: u8,
    gap_s: f32,
    // When the receiver entered the zone near the point over the sonde (|u| < ZONE_U).
    zone_start_s: Option<f32>,
    // A passage of the field through the vertical, to tell a null from a reversal of the handle.
    passage: Option<Passage>,
    state: TrackState,
}

/// Evidence (in units of a decisive readout) needed before the side bit is taken as known.
pub const DECIDE: f32 = 4.0;
/// Largest evidence kept (so a later, consistent change can still overturn it).
pub const MAX_EVIDENCE: f32 = 6.0;
/// Largest spread of the field's bearing over the evidence window, rad (20°).
pub const MAX_BEARING_SPREAD_RAD: f32 = 0.35;
/// Largest bearing of the field from the handle while evidence is taken, rad (40°).
pub const MAX_EVIDENCE_BEARING_RAD: f32 = 0.7;
/// How much a held heading wanders while walking, rad per √s (one sigma).
pub const HEADING_WANDER_PER_S: f32 = 0.05;
/// How far a person walking "along the handle" drifts sideways, per unit walked (one sigma).
/// A stated assumption of the along/across procedure, not a published figure.
pub const LATERAL_DRIFT: f32 = 0.05;
/// Largest noise σ of the dip angle the tracker follows, rad.
pub const MAX_SIGMA_PSI: f32 = 0.3;
/// A gap in tracking longer than this loses the side bit, s.
pub const MAX_GAP_S: f32 = 1.5;
/// Prior one-sigma of `tan β` (the axis's angle from the handle) before the regression has data.
pub const PRIOR_SIGMA_P: f32 = 0.4;
/// Prior one-sigma of `η/cos β` before the regression has data.
pub const PRIOR_SIGMA_Q: f32 = 3.0;

impl Default for Track {
    fn default() -> Self {
        Self::new()
    }
}

fn wrap_half(x: f32) -> f32 {
    // Into (−π/2, π/2].
    let pi = core::f32::consts::PI;
    let mut y = x - pi * libm::roundf(x / pi);
    if y <= -0.5 * pi {
        y += pi;
    }
    y
}

fn wrap_turn(x: f32) -> f32 {
    // Into (−2π, 0].
    let tau = 2.0 * core::f32::consts::PI;
    let y = x - tau * libm::floorf(x / tau);
    if y > 0.0 {
        y - tau
    } else {
        y
    }
}

/// The along offset u (receiver past the sonde, in depths) where the dip angle on its
/// full turn is Φ, and whether that is inside the nulls: the root of
/// `2u²·sin Φ − 3u·cos Φ − sin Φ = 0` on the branch `cos Φ < 0` (inside) or `> 0`.
pub fn u_of_phi(phi: f32) -> (f32, bool) {
    let (sn, cs) = (libm::sinf(phi), libm::cosf(phi));
    let inside = cs < 0.0;
    let root = libm::sqrtf(9.0 * cs * cs + 8.0 * sn * sn);
    let u = if inside {
        2.0 * sn / (root + 3.0 * libm::fabsf(cs))
    } else if libm::fabsf(sn) > 1e-6 {
        (3.0 * cs + root) / (4.0 * sn)
    } else {
        1e6 * if sn >= 0.0 { 1.0 } else { -1.0 }
    };
    (u, inside)
}

/// Slope of `y` on `t` and its standard error (least squares).
fn slope<I: Iterator<Item = (f32, f32)>>(t: impl Fn() -> I) -> Option<(f32, f32, f32)> {
    let mut n = 0.0f32;
    let (mut st, mut sy) = (0.0f32, 0.0f32);
    for (x, y) in t() {
        n += 1.0;
        st += x;
        sy += y;
    }
    if n < 4.0 {
        return None;
    }
    let (mt, my) = (st / n, sy / n);
    let (mut stt, mut sty, mut syy) = (0.0f32, 0.0f32, 0.0f32);
    for (x, y) in t() {
        let (dx, dy) = (x - mt, y - my);
        stt += dx * dx;
        sty += dx * dy;
        syy += dy * dy;
    }
    if !(stt > 0.0) {
        return None;
    }
    let b = sty / stt;
    let res = (syy - b * sty).max(0.0) / (n - 2.0);
    Some((b, libm::sqrtf(res / stt), stt))
}

impl Track {
    /// Nothing known.
    pub fn new() -> Self {
        Self {
            have: false,
            last_t: 0.0,
            last: [0.0; 3],
            last_noise: f32::INFINITY,
            last_psi: 0.0,
            have_last_psi: false,
            phi: 0.0,
            evidence: 0.0,
            hist: Deque::new(),
            beta_ref: 0.0,
            p: 0.0,
            q: 0.0,
            cov: [[0.0; 2]; 2],
            have_axis: false,
            outliers: 0,
            gap_s: 0.0,
            passage: None,
            zone_start_s: None,
            state: TrackState::EMPTY,
        }
    }

    /// Forget everything (no signal for a while, a restart).
    pub fn reset(&mut self) {
        *self = Self::new();
    }

    /// The last estimate.
    pub fn state(&self) -> &TrackState {
        &self.state
    }

    /// Feed one readout with a usable field; returns the new estimate.
    pub fn update(&mut self, x: &TrackInput) -> TrackState {
        let [a, b, c] = x.lower;
        let mag = libm::sqrtf(a * a + b * b + c * c);
        let dt = if self.have { (x.t_s - self.last_t).max(0.0) } else { 0.0 };
        let [sa, sb, sc] = x.sigma;
        // The noise of the whole vector (its magnitude, or any one direction at most).
        let sn = libm::sqrtf(sa * sa + sb * sb + sc * sc);
        if !(mag > 0.0) || !mag.is_finite() || !(sn >= 0.0) || !sn.is_finite() {
            return self.gap(dt, x.t_s);
        }
        // Motion: the field changed by more than its noise since the last readout.
        let change = if self.have {
            let d = [a - self.last[0], b - self.last[1], c - self.last[2]];
            let d2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2];
            // Either sign of the stored reading (the normalisation may flip it).
            let e = [a + self.last[0], b + self.last[1], c + self.last[2]];
            let e2 = e[0] * e[0] + e[1] * e[1] + e[2] * e[2];
            libm::sqrtf(d2.min(e2))
        } else {
            0.0
        };
        // A jump the detector's own smoothing cannot produce between two readouts (half the
        // field at once) is not a measurement of the field: left out, like a gap.
        let last_mag = libm::sqrtf(self.last[0] * self.last[0] + self.last[1] * self.last[1] + self.last[2] * self.last[2]);
        if self.have && change > SPIKE_FRACTION * mag.max(last_mag) + 5.0 * sn.min(self.last_noise) {
            return self.gap(dt, x.t_s);
        }
        let moving = self.have && change > 3.0 * sn + 0.004 * mag;
        // Dip angle along the axis direction β (rotate the horizontal part by −β).
        let beta = self.axis();
        let a_ax = a * libm::cosf(beta) + b * libm::sinf(beta);
        self.rotation_or_reversal(x, moving, libm::logf(mag), a_ax);
        self.across(x, moving, dt);
        let beta = self.axis();
        let a_ax = a * libm::cosf(beta) + b * libm::sinf(beta);
        let psi = libm::atan2f(c, a_ax);
        // σ of ψ = atan2(c, a_ax): √(σ_c²·a_ax² + σ_a²·c²)/(a_ax² + c²), σ_a of the along-axis part.
        let s_ax = libm::hypotf(sa * libm::cosf(beta), sb * libm::sinf(beta));
        let r2 = (a_ax * a_ax + c * c).max(1e-30);
        let sigma_psi = libm::sqrtf(sc * sc * a_ax * a_ax + s_ax * s_ax * c * c) / r2;
        if sigma_psi > MAX_SIGMA_PSI {
            return self.gap(dt, x.t_s);
        }
        if self.have && !self.have_last_psi {
            // After a reversal: Φ was restored; continue from the nearest branch of ψ.
            self.phi += wrap_half(psi - self.phi);
        } else if self.have {
            let step = wrap_half(psi - self.last_psi);
            self.phi += step;
            // Walking along the handle, at β from the axis: Δx̃ = d·cos β, Δỹ = −d·sin β, so
            // the lateral offset moves by Δη = −tan β·Δu, where the track knows u (then
            // Δu = ΔΦ/(dΦ/du)); on top a person drifts by a little of the distance walked.
            // Unplaced, only |Δu| ≥ |ΔΦ|/3 is known (|dΦ/du| ≤ 3).
            let du = if self.state.placed {
                let parity = if self.evidence >= 0.0 { 0.0 } else { core::f32::consts::PI };
                let (u, _) = u_of_phi(self.phi - step + parity);
                -step * (4.0 * u * u + 1.0) * (u * u + 1.0) / (3.0 * (2.0 * u * u + 1.0))
            } else {
                0.0
            };
            let adu = if self.state.placed { libm::fabsf(du) } else { libm::fabsf(step) / 3.0 };
            if self.have_axis {
                let d = libm::atanf(self.p);
                self.q += -libm::tanf(self.axis()) * du / libm::cosf(d);
                let sb2 = self.cov[0][0].max(0.0);
                self.cov[1][1] += du * du * sb2;
            }
            self.cov[1][1] = (self.cov[1][1] + (LATERAL_DRIFT * adu) * (LATERAL_DRIFT * adu)).min(PRIOR_SIGMA_Q * PRIOR_SIGMA_Q);
        } else {
            self.phi = psi;
        }
        self.have = true;
        self.have_last_psi = true;
        self.gap_s = 0.0;
        self.last_psi = psi;
        self.last = x.lower;
        self.last_noise = sn;
        self.last_t = x.t_s;
        if self.hist.is_full() {
            let _ = self.hist.pop_front();
        }
        let bearing = match self.hist.back() {
            Some(prev) => prev.bearing + wrap_half(libm::atan2f(b, a) - prev.bearing),
            None => libm::atan2f(b, a),
        };
        let reliable = libm::hypotf(a, b) > 5.0 * libm::hypotf(sa, sb);
        let _ = self.hist.push_back(Sample { t: x.t_s, phi: self.phi, l: libm::logf(mag), bearing, reliable });
        self.evidence_from_motion(x);
        self.estimate(x, sigma_psi, moving)
    }

    /// No usable tone at time `t_s`: count towards forgetting.
    pub fn note_absent(&mut self, t_s: f32) {
        let dt = if self.have { (t_s - self.last_t).max(0.0) } else { 0.0 };
        self.gap(dt, t_s);
    }

    fn gap(&mut self, dt: f32, t: f32) -> TrackState {
        self.gap_s += dt;
        if self.have {
            self.last_t = t;
        }
        if self.gap_s > MAX_GAP_S {
            self.reset();
        }
        self.state.moving = false;
        self.state
    }

    /// The sonde axis's angle from the handle, β (continuous through turns).
    fn axis(&self) -> f32 {
        self.beta_ref + libm::atanf(self.p)
    }

    /// Re-centre the regression frame on the current β (p → 0).
    fn recentre(&mut self) {
        let d = libm::atanf(self.p);
        if libm::fabsf(d) > 0.1 {
            let eta = self.eta();
            self.beta_ref += d;
            self.p = 0.0;
            self.q = eta;
        }
    }

    fn rotation_or_reversal(&mut self, x: &TrackInput, moving: bool, l: f32, a_ax: f32) {
        let [a, b, c] = x.lower;
        let [sa, sb, sc] = x.sigma;
        let s = 3.0 * libm::sqrtf(sa * sa + sb * sb + sc * sc);
        // A reversal of the handle: the horizontal field shrinks through zero and
        // grows back the other way while the vertical part holds, so the field
        // passes through the vertical with a dip of its strength, which recovers
        // within the detector's smoothing. Walking through a null also passes the
        // vertical, but there the strength keeps falling (or rising) through the
        // passage (|B| is monotone along the axis): no dip. A reversal keeps the
        // receiver where it was, so the tracked angle goes back to its value
        // before the passage and the axis turns by π relative to the handle.
        let vertical = libm::fabsf(a_ax) < 0.3 * libm::fabsf(c) && libm::fabsf(c) > 2.0 * s;
        let t = x.t_s;
        match self.passage.as_mut() {
            None if vertical => {
                let l_before = self.hist.iter().filter(|h| h.t >= t - 1.0).map(|h| h.l).fold(l, f32::max);
                self.passage = Some(Passage { l_before, l_min: l, l_after: f32::NEG_INFINITY, phi_start: self.phi, ended_s: None });
            }
            None => {}
            Some(p) => {
                if vertical && p.ended_s.is_none() {
                    p.l_min = p.l_min.min(l);
                } else {
                    p.ended_s.get_or_insert(t);
                    p.l_after = p.l_after.max(l);
                }
                let dip = 0.1 + s / libm::expf(p.l_min);
                let p = *p;
                if p.l_before - p.l_min > dip && p.l_after - p.l_min > dip {
                    self.passage = None;
                    self.beta_ref += core::f32::consts::PI;
                    self.phi = p.phi_start;
                    self.have_last_psi = false;
                    self.hist.clear();
                } else if p.ended_s.map(|e| t - e > PASSAGE_WATCH_S).unwrap_or(false) {
                    self.passage = None;
                }
            }
        }
        if !self.have || !moving {
            return;
        }
        let [a0, b0, c0] = self.last;
        let h = libm::hypotf(a, b);
        let h0 = libm::hypotf(a0, b0);
        // A turn in place: the bearing turns, strength and vertical part stay.
        let dbear = wrap_half(libm::atan2f(b, a) - libm::atan2f(b0, a0));
        let steady = libm::fabsf(h - h0) < s + 0.01 * h && libm::fabsf(libm::fabsf(c) - libm::fabsf(c0)) < s + 0.01 * h;
        if h > 10.0 * s && libm::fabsf(dbear) > 0.03 && steady {
            self.beta_ref += dbear;
            self.cov[0][0] = self.cov[0][0].max(0.05 * 0.05);
        }
    }

    fn eta(&self) -> f32 {
        self.q * libm::cosf(libm::atanf(self.p))
    }

    fn across(&mut self, x: &TrackInput, moving: bool, dt: f32) {
        let [a, b, c] = x.lower;
        let mag = libm::sqrtf(a * a + b * b + c * c);
        if !self.have_axis {
            // Prior: the axis along the horizontal field, nothing known across.
            self.beta_ref = libm::atan2f(b, a);
            self.p = 0.0;
            self.q = 0.0;
            self.cov = [[PRIOR_SIGMA_P * PRIOR_SIGMA_P, 0.0], [0.0, PRIOR_SIGMA_Q * PRIOR_SIGMA_Q]];
            self.have_axis = true;
        }
        if moving && dt > 0.0 {
            // A held heading still wanders a little while walking.
            self.cov[0][0] = (self.cov[0][0] + HEADING_WANDER_PER_S * HEADING_WANDER_PER_S * dt).min(PRIOR_SIGMA_P * PRIOR_SIGMA_P);
        }
        // Into the frame turned by beta_ref, on direction cosines (so strength does not weight).
        let (sb, cb) = (libm::sinf(self.beta_ref), libm::cosf(self.beta_ref));
        let (a, b, c) = ((a * cb + b * sb) / mag, (-a * sb + b * cb) / mag, c / mag);
        let [sa, sb, sc] = x.sigma;
        // Noise of the residual b − p·a − q·c, on direction cosines.
        let s = libm::sqrtf(sb * sb + self.p * self.p * sa * sa + self.q * self.q * sc * sc) / mag;
        // Measurement b = p·a + q·c with noise s²(1 + p² + q²) (noise on all three readings).
        // Readouts within the noise correlation time are not independent: weight them down.
        let corr = (x.noise_corr_s / dt.max(1e-3)).max(1.0);
        // A floor on the noise (1e-4 of the field: beyond any coil's precision) keeps one
        // over-confident readout from freezing the estimate.
        let s = s.max(1e-4);
        let r = s * s * corr;
        // The lateral part is learnt only from a vertical reading well above its noise (over
        // the plane across the sonde, where it vanishes, a noisy c would random-walk η).
        let c = if libm::fabsf(c) > 3.0 * sc / mag { c } else { 0.0 };
        let hvec = [a, c];
        let ph = [self.cov[0][0] * hvec[0] + self.cov[0][1] * hvec[1], self.cov[1][0] * hvec[0] + self.cov[1][1] * hvec[1]];
        let sden = hvec[0] * ph[0] + hvec[1] * ph[1] + r;
        if !(sden > 0.0) || !sden.is_finite() {
            return;
        }
        let k = [ph[0] / sden, ph[1] / sden];
        let innov = b - (self.p * a + self.q * c);
        // An outlier (more than 5σ from the prediction) is not a measurement of this geometry;
        // a run of them means the geometry has changed (a turn, a walk that is not along the
        // axis, another place): start the regression afresh from the field's bearing.
        if innov * innov > 25.0 * sden {
            self.outliers = self.outliers.saturating_add(1);
            if self.outliers >= MAX_OUTLIERS {
                // The axis angle restarts from the field's bearing, which cannot tell β from
                // β + π: what the side bit meant goes with it.
                self.have_axis = false;
                self.outliers = 0;
                self.zone_start_s = None;
                self.evidence = 0.0;
                self.hist.clear();
            }
            return;
        }
        self.outliers = 0;
        self.p += k[0] * innov;
        self.q += k[1] * innov;
        self.p = self.p.clamp(-5.0, 5.0);
        self.q = self.q.clamp(-20.0, 20.0);
        let cov = self.cov;
        for i in 0..2 {
            for j in 0..2 {
                self.cov[i][j] = cov[i][j] - k[i] * ph[j];
            }
        }
        self.recentre();
    }

    fn evidence_from_motion(&mut self, x: &TrackInput) {
        let n = self.hist.len();
        if n < 6 {
            return;
        }
        let t_end = self.hist.back().map(|s| s.t).unwrap_or(0.0);
        // The last second (at least two noise correlation times).
        let span = (2.0 * x.noise_corr_s).max(1.0);
        let recent = || self.hist.iter().filter(move |s| s.t >= t_end - span);
        let Some((sphi, se_phi, _)) = slope(|| recent().map(|s| (s.t - t_end, s.phi))) else { return };
        let Some((sl, se_l, _)) = slope(|| recent().map(|s| (s.t - t_end, s.l))) else { return };
        let count = recent().count() as f32;
        let t0 = recent().map(|s| s.t).fold(t_end, f32::min);
        // Correlated readouts: the standard errors grow by √(readouts per correlation time).
        let per = (count * x.noise_corr_s / (t_end - t0).max(1e-3)).max(1.0);
        let infl = libm::sqrtf(per);
        let (z_phi, z_l) = (sphi / (se_phi * infl).max(1e-9), sl / (se_l * infl).max(1e-9));
        // The change must be real: a few degrees and a few percent over the span.
        let dphi = libm::fabsf(sphi) * (t_end - t0);
        let dl = libm::fabsf(sl) * (t_end - t0);
        if !(libm::fabsf(z_phi) > 3.0 && libm::fabsf(z_l) > 3.0 && dphi > 0.05 && dl > 0.02) {
            return;
        }
        // The procedure: walking along the axis with the heading held, so the horizontal field
        // keeps its bearing (within the wobble of a hand and the swing near a null).
        // and the handle roughly along the field where its bearing can be read (walking along
        // the handle is then walking along the axis).
        let (bmin, bmax) =
            recent().filter(|s| s.reliable).fold((f32::INFINITY, f32::NEG_INFINITY), |(lo, hi), s| (lo.min(s.bearing), hi.max(s.bearing)));
        if bmax - bmin > MAX_BEARING_SPREAD_RAD
            || recent().any(|s| s.reliable && libm::fabsf(wrap_half(s.bearing)) > MAX_EVIDENCE_BEARING_RAD)
        {
            return;
        }
        // Along the axis both change with u: dL/dΦ = (dL/du)/(dΦ/du) = 4u³/(2u² + 1), from
        // |B| ∝ √(4u²+1)/(u²+1)² and dΦ/du above. Each side bit places the window's mean Φ at
        // its own u, predicting its own ratio (opposite signs for the two); the observed ratio
        // must match one and not the other. Motion that is not along the axis (a circle round
        // the sonde, a turn) matches neither and gives no evidence.
        let phi_mean = recent().map(|s| s.phi).sum::<f32>() / count;
        let r_obs = sl / sphi;
        let sigma_r = libm::fabsf(r_obs) * libm::hypotf(se_l / sl, se_phi / sphi) * infl;
        let ratio = |u: f32| 4.0 * u * u * u / (2.0 * u * u + 1.0);
        let fits = |phi: f32| {
            let (u, _) = u_of_phi(phi);
            let g = ratio(u);
            libm::fabsf(r_obs - g) < (0.5 * libm::fabsf(g)).max(0.15) + 2.0 * sigma_r
        };
        let (f0, f1) = (fits(phi_mean), fits(phi_mean + core::f32::consts::PI));
        if f0 == f1 {
            return;
        }
        let w = (libm::fabsf(z_phi).min(libm::fabsf(z_l)) / 6.0).min(0.5);
        self.evidence += if f0 { w } else { -w };
        self.evidence = self.evidence.clamp(-MAX_EVIDENCE, MAX_EVIDENCE);
    }

    /// The strength check on the lateral offset. Over the sonde a sideways step
    /// changes neither the field's direction nor its along part, only its
    /// magnitude: `|B| ∝ (1 + η²)^{−3/2}` across, `∝ 1 − 3u⁴` along (flat along
    /// the axis to fourth order), so near the point over the sonde the strength
    /// follows the dip angle Φ closely while the receiver moves along the axis
    /// (nearly linearly over the zone |u| < 0.3, also for a pitched sonde, whose
    /// peak is lopsided), and drops at a constant Φ when it moves across.
    /// Within the zone ln|B| is fitted as a straight line in Φ over the readouts
    /// so far; a readout well below the line means the receiver has moved
    /// across: the lateral estimate becomes 0 ± the offset that explains the drop
    /// (`1.5·η²`).
    fn monitor(&mut self, x: &TrackInput, u: f32) {
        let t = x.t_s;
        if libm::fabsf(u) > ZONE_U {
            self.zone_start_s = None;
            return;
        }
        let Some(t0) = self.zone_start_s else {
            self.zone_start_s = Some(t);
            return;
        };
        let Some(now) = self.hist.back().copied() else { return };
        let zone = || self.hist.iter().filter(move |h| h.t >= t0 && h.t < t);
        let n = zone().count();
        if n < 5 {
            return;
        }
        let nf = n as f32;
        // ln|B| less the level dipole's along shape ln f(u, 0) = ½ln(4u² + 1) − 2ln(u² + 1)
        // (flat to fourth order at u = 0); what is left of a pitched sonde's lopsided peak is
        // nearly linear in Φ across the zone.
        let parity = if self.evidence >= 0.0 { 0.0 } else { core::f32::consts::PI };
        let flat = |h: &Sample| {
            let (u, _) = u_of_phi(h.phi + parity);
            h.l - (0.5 * libm::logf(4.0 * u * u + 1.0) - 2.0 * libm::logf(u * u + 1.0))
        };
        let (mp, ml) = (zone().map(|h| h.phi).sum::<f32>() / nf, zone().map(flat).sum::<f32>() / nf);
        let (spp, spl) = zone().fold((0.0f32, 0.0f32), |(a, b), h| (a + (h.phi - mp) * (h.phi - mp), b + (h.phi - mp) * (flat(h) - ml)));
        let slope = if spp > 0.0025 * nf { spl / spp } else { 0.0 };
        let resid =
            libm::sqrtf(zone().map(|h| (flat(h) - ml - slope * (h.phi - mp)) * (flat(h) - ml - slope * (h.phi - mp))).sum::<f32>() / nf);
        let [a, b, c] = x.lower;
        let mag2 = (a * a + b * b + c * c).max(1e-30);
        let sigma_l =
            libm::sqrtf((a * x.sigma[0]) * (a * x.sigma[0]) + (b * x.sigma[1]) * (b * x.sigma[1]) + (c * x.sigma[2]) * (c * x.sigma[2]))
                / mag2;
        let deficit = ml + slope * (now.phi - mp) - flat(&now);
        if deficit > 3.0 * (resid + sigma_l) + 0.003 {
            let eta_obs = libm::sqrtf(deficit / 1.5);
            self.q = 0.0;
            self.cov[1][1] = self.cov[1][1].max(eta_obs * eta_obs);
            self.cov[0][1] = 0.0;
            self.cov[1][0] = 0.0;
            // Start the zone afresh from here: the lateral offset is open again.
            self.zone_start_s = Some(t);
        }
    }

    fn estimate(&mut self, x: &TrackInput, sigma_psi: f32, moving: bool) -> TrackState {
        let beta = self.axis();
        let eta = self.eta();
        let var_q = self.cov[1][1].max(0.0);
        let sigma_eta = libm::sqrtf(var_q) * libm::cosf(libm::atanf(self.p));
        // Rate of Φ over the last half second for the lag compensation.
        let t_end = self.hist.back().map(|s| s.t).unwrap_or(0.0);
        let rate = slope(|| self.hist.iter().filter(|s| s.t >= t_end - 0.5).map(|s| (s.t - t_end, s.phi))).map(|v| v.0).unwrap_or(0.0);
        let placed = libm::fabsf(self.evidence) >= DECIDE;
        // Falling: the log-strength's slope over the window is significantly negative (the
        // readouts' correlation taken into account), and it is well below the recent best.
        let falling = {
            let win = || self.hist.iter().filter(move |s| s.t >= t_end - FALL_WINDOW_S);
            let best = self.hist.iter().filter(|s| s.t >= t_end - 2.0 * FALL_WINDOW_S).map(|s| s.l).fold(f32::NEG_INFINITY, f32::max);
            let now = self.hist.back().map(|s| s.l).unwrap_or(best);
            match slope(|| win().map(|s| (s.t - t_end, s.l))) {
                Some((b, se, _)) => {
                    let n = win().count() as f32;
                    let infl = libm::sqrtf((n * x.noise_corr_s / FALL_WINDOW_S).max(1.0));
                    b < -3.0 * se * infl && best - now > FALL_FRACTION
                }
                None => false,
            }
        };
        let mut st = TrackState { placed, sigma_phi_rad: sigma_psi, axis_rad: beta, eta, sigma_eta, moving, falling, ..TrackState::EMPTY };
        if placed {
            let phi = wrap_turn(self.phi + if self.evidence >= 0.0 { 0.0 } else { core::f32::consts::PI });
            let (u, inside) = u_of_phi(phi);
            // dΦ/du = −3(2u²+1)/((4u²+1)(u²+1)).
            let dphi_du = -3.0 * (2.0 * u * u + 1.0) / ((4.0 * u * u + 1.0) * (u * u + 1.0));
            let u_rate = rate / dphi_du;
            let lag = x.group_delay_s.max(0.0);
            st.phi_rad = phi;
            st.inside = inside;
            st.u = u + u_rate * lag;
            st.u_rate_per_s = u_rate;
            st.sigma_u = sigma_psi / libm::fabsf(dphi_du) + libm::fabsf(u_rate) * 0.25 * lag;
            if inside {
                self.monitor(x, u);
                st.eta = self.eta();
                st.sigma_eta = libm::sqrtf(self.cov[1][1].max(0.0)) * libm::cosf(libm::atanf(self.p));
            }
        }
        self.state = st;
        st
    }
}
