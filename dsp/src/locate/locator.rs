//! The locator: from one detection's coil phasors to what the receiver shows,
//! each answer with its validity.
//!
//! Steps, one small function each:
//! 1. [`field`](Locator::field): phasors → signed field per coil (calibrated).
//! 2. [`signal`](classify_signal): is there a tone? `no-signal` below
//!    [`LocatorSettings::signal_snr_db`] (the lower triad's magnitude over its
//!    noise σ; with noise alone that magnitude follows a χ distribution, and
//!    15 dB puts the chance of a false tone under 1e-4 per readout even for the
//!    six noise components the common-phase projection can draw on: the χ²
//!    tail with 6 degrees of freedom at 31.6, Abramowitz & Stegun eq. 26.4.21),
//!    `weak` below [`LocatorSettings::locate_snr_db`] (no depth).
//! 3. Orientation with hysteresis (in line / crossed).
//! 4. The [`Trail`]: every station the head has passed lately, fitted together
//!    to one sonde (position relative to the head, depth, pitch, with σ and
//!    the alternatives the readings cannot rule out).
//! 5. The one-station fit (6-coil heads), with the trail's lateral offset as a prior.
//! 6. The trail's place → [`Guidance`]: a direction only where its ±2σ and
//!    every equally good alternative agree, "over" only within the over
//!    tolerance in both directions (at 2σ; kept at 1σ while the head stays
//!    still) while the head is still.
//! 7. Depths, each gated (signal, settling, clipping, over the sonde in both
//!    directions) and with σ covering noise, the coils' gain tolerance and the
//!    offsets' own uncertainty. The trail's depth is shown when it is valid
//!    (it fits pitch, offsets and the gain error with the depth), once it has
//!    stopped drifting by more than its σ; otherwise the valid estimate of the
//!    others with the smallest σ. In conducting ground every depth uses the
//!    whole-space field ([`crate::field::ground`]).

use crate::error::{ConfigError, Param};
use crate::field::ground::whole_space_factors;
use crate::field::head::Head;
use crate::field::FieldModel;
use crate::flags::Flags;
use crate::locate::calibration::Calibration;
use crate::locate::components::FieldVector;
use crate::locate::depth::{gradient_depth, known_moment_depth, solve_g, CoilPair, Depth, DepthEstimate, Offsets, RatioOf, Withheld};
use crate::locate::fit::{fit_from, Fix, LateralPrior, P};
use crate::locate::guidance::{over_tolerance_m, Across, Along, Distance, Guidance, Hint};
use crate::locate::orientation::{Hysteresis, Orientation};
use crate::locate::trail::{Motion, MoveRequest, Place, Reading, Trail, TrailSettings};
use crate::phasor::C32;

/// Is there a beacon tone to locate?
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Signal {
    /// No tone: noise only, wrong frequency, or no input.
    Absent,
    /// A tone, too weak for a depth.
    Weak,
    /// A tone strong enough to locate and give a depth.
    Good,
}

impl Signal {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Signal::Absent => "no-signal",
            Signal::Weak => "weak",
            Signal::Good => "good",
        }
    }
}

/// Everything the locator is configured with.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LocatorSettings {
    /// Source model for depth.
    pub model: FieldModel,
    /// Stored calibration.
    pub calibration: Calibration,
    /// Orientation hysteresis.
    pub hysteresis: Hysteresis,
    /// Below this SNR (lower triad magnitude over its noise σ) there is no signal, dB.
    pub signal_snr_db: f32,
    /// Below this SNR the signal is weak: no depth, dB.
    pub locate_snr_db: f32,
    /// Relative gain uncertainty between coils after calibration (0.01 = ±1 %, one sigma).
    pub gain_tolerance: f32,
    /// Height of the lower coil centre above the ground, m.
    pub coil_height_m: f32,
    /// Skin depth of the ground assumed for the depths (whole-space model, `field::ground`), m (infinite: none).
    pub skin_depth_m: f32,
    /// Quadrature residue above which the field is flagged.
    pub quadrature_limit: f32,
    /// Run the one-station fit when the head has two full triads.
    pub fit: bool,
    /// Run the fit on every n-th readout (warm-started it costs about 0.24 M
    /// instructions on a Cortex-M4F; every readout at 20/s is about 5 % of 100 MHz).
    pub fit_every: u8,
    /// χ² per degree of freedom above which the field is flagged as distorted.
    pub distortion_chi2: f32,
    /// Largest σ/depth at which a depth is shown.
    pub max_relative_sigma: f32,
}

/// Smallest and largest gain tolerance accepted.
pub const GAIN_TOLERANCE_RANGE: (f32, f32) = (0.0, 0.2);
/// Smallest and largest coil height accepted, m.
pub const COIL_HEIGHT_RANGE_M: (f32, f32) = (0.0, 2.0);
/// Range of the signal thresholds, dB.
pub const SNR_THRESHOLD_RANGE_DB: (f32, f32) = (6.0, 60.0);

impl Default for LocatorSettings {
    fn default() -> Self {
        Self {
            model: FieldModel::Dipole,
            calibration: Calibration::default(),
            hysteresis: Hysteresis::default(),
            signal_snr_db: 15.0,
            locate_snr_db: 20.0,
            gain_tolerance: 0.01,
            coil_height_m: 0.1,
            skin_depth_m: f32::INFINITY,
            quadrature_limit: 0.25,
            fit: true,
            fit_every: 1,
            distortion_chi2: 9.0,
            max_relative_sigma: 0.05,
        }
    }
}

impl LocatorSettings {
    /// Check every field; the first one out of range is returned.
    pub fn validate(&self) -> Result<(), ConfigError> {
        self.hysteresis.validate()?;
        ConfigError::check(Param::GainTolerance, self.gain_tolerance, GAIN_TOLERANCE_RANGE.0, GAIN_TOLERANCE_RANGE.1)?;
        ConfigError::check(Param::CoilHeight, self.coil_height_m, COIL_HEIGHT_RANGE_M.0, COIL_HEIGHT_RANGE_M.1)?;
        ConfigError::check(Param::SignalThreshold, self.signal_snr_db, SNR_THRESHOLD_RANGE_DB.0, SNR_THRESHOLD_RANGE_DB.1)?;
        ConfigError::check(Param::SignalThreshold, self.locate_snr_db, self.signal_snr_db, SNR_THRESHOLD_RANGE_DB.1)?;
        if !(self.skin_depth_m > 0.0) {
            return Err(ConfigError { param: Param::Distance, value: self.skin_depth_m, min: 0.0, max: f32::INFINITY });
        }
        Ok(())
    }
}

/// The depth to show: the trail's when valid, else the valid estimate with the smallest σ.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ShownDepth {
    /// Which method.
    pub method: DepthMethod,
    /// Depth below the lower coil centre, with σ.
    pub depth: Depth,
    /// The same below the ground (depth − coil height), m.
    pub below_ground_m: f32,
}

/// A depth method.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DepthMethod {
    /// Two coils at different heights.
    Gradient,
    /// The one-station dipole fit.
    Fit,
    /// Field over the sonde and a calibrated strength.
    KnownMoment,
    /// The fit over the trail of stations.
    Trail,
}

impl DepthMethod {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            DepthMethod::Gradient => "gradient",
            DepthMethod::Fit => "fit",
            DepthMethod::KnownMoment => "known-moment",
            DepthMethod::Trail => "trail",
        }
    }
}

/// What the locator found in one detection.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Located<const N: usize> {
    /// Signed field at the head.
    pub field: FieldVector<N>,
    /// Tone present?
    pub signal: Signal,
    /// SNR of the lower triad's field magnitude over its noise σ, dB.
    pub snr_db: f32,
    /// Orientation state.
    pub state: Orientation,
    /// Which way to walk.
    pub guidance: Guidance,
    /// Gradient depth.
    pub gradient: DepthEstimate,
    /// Known-moment depth.
    pub known_moment: DepthEstimate,
    /// One-station fit depth (6-coil heads).
    pub fit_depth: DepthEstimate,
    /// The depth to show, if any.
    pub depth: Option<ShownDepth>,
    /// The one-station fix, when the fit ran.
    pub fix: Option<Fix>,
    /// Where the trail puts the sonde (for reports and tests).
    pub place: Option<Place>,
    /// Flags the locator sets: NO_SIGNAL, WEAK, QUADRATURE, DISTORTED.
    pub flags: Flags,
}

/// What the locator needs of the detection besides the phasors.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Timing {
    /// Time of the readout, s.
    pub t_s: f64,
    /// Seconds over which successive readouts' noise is correlated (≈ 1/bandwidth).
    pub noise_corr_s: f32,
    /// Delay from the data's centre to the readout, s.
    pub group_delay_s: f32,
}

/// The locator.
#[derive(Clone, Debug)]
pub struct Locator<const N: usize> {
    settings: LocatorSettings,
    head: Head<N>,
    state: Orientation,
    trail: Trail<N>,
    last_hint: Hint,
    /// The move of a set distance being asked for, and its hint.
    request: Option<MoveRequest>,
    request_hint: Hint,
    /// Legs of a sweep still to ask for (distance along the sweep's axis, m; 0: none).
    sweep_legs: [f32; 2],
    sweep_hint: Hint,
    move_id: u16,
    /// The last move made, and the way back shown while the tone is lost (distance, across?, id).
    last_move: Option<MoveRequest>,
    back: Option<(Hint, f32, u16)>,
    /// Exploring moves: the way (+1 ahead, −1 back) and the field where the last one began.
    explore_dir: f32,
    explore_from: f32,
    /// Seconds the trail's fit has not explained the readings.
    lost_for_s: f32,
    /// Seconds the head has been still (by the trail's speed), 0 while moving.
    still_for_s: f32,
    last_t_s: f64,
    /// When the last move was asked for, s.
    move_asked_s: f64,
    /// The person set off on the last move asked for.
    move_set_off: bool,
    /// How long the last move asked for takes at the pace asked, s.
    move_s: f32,
    last_fix: Option<[f32; P]>,
    held_fix: Option<Fix>,
    readouts: u32,
    last_depth_m: Option<f32>,
    /// The trail has spanned a fair baseline since it began (see [`Locator::directions`]).
    established: bool,
    /// Seconds since the last move asked for ended (the readouts catch up with the head).
    quiet_s: f32,
    /// The last readout said "over" (along and across) and the head has been still since.
    over_held: bool,
    /// The trail's depth followed with a lag of [`DRIFT_TAU_S`] (NaN: none yet), m.
    depth_lag_m: f32,
    /// The total field at the lower coils followed with a lag of [`STEADY_TAU_S`] (NaN: none yet).
    total_lag_t: f32,
    /// The size of the vertical field at the lower coils followed likewise (NaN: none yet).
    vertical_lag_t: f32,
    /// Seconds the lateral side stays withheld after the fits last could not tell it.
    side_doubt_s: f32,
}

/// `x` followed with a lag of `tau_s` (first-order low pass over `dt_s`); a lagged value
/// that is not finite starts again at `x`.
fn follow(lag: f32, x: f32, dt_s: f32, tau_s: f32) -> f32 {
    if lag.is_finite() {
        lag + (x - lag) * (dt_s / tau_s).min(1.0)
    } else {
        x
    }
}

/// Time constant of the steady-field check, s, and the relative change it allows.
const STEADY_TAU_S: f32 = 0.2;
const STEADY_REL: f32 = 0.01;
/// Change of the total or vertical field at the lower coils, relative to the total, beyond
/// which a head asked to turn on the spot is taken to be walking on.
const WALK_ON_REL: f32 = 0.05;

/// σ within which "over" is kept while the head stays still (it is claimed at 2σ).
const HOLD_SIGMAS: f32 = 1.0;

/// The best lateral prior a fit can take when nothing is known (y/h within ±3).
const VAGUE_SIGMA: f32 = 3.0;

/// Classify the signal from the lower triad's SNR (amplitude ratio).
pub fn classify_signal(snr: f32, s: &LocatorSettings) -> Signal {
    let db = 20.0 * crate::powf::log10f(snr.max(1e-9));
    if !(db >= s.signal_snr_db) {
        Signal::Absent
    } else if db < s.locate_snr_db {
        Signal::Weak
    } else {
        Signal::Good
    }
}

impl<const N: usize> Locator<N> {
    /// Validate and build.
    pub fn new(settings: LocatorSettings, head: Head<N>) -> Result<Self, ConfigError> {
        settings.validate()?;
        head.validate()?;
        Ok(Self {
            settings,
            head,
            state: Orientation::Unknown,
            trail: Trail::new(&head, trail_settings(&settings)),
            last_hint: Hint::Wait,
            request: None,
            request_hint: Hint::Wait,
            sweep_legs: [0.0; 2],
            sweep_hint: Hint::Wait,
            move_id: 0,
            last_move: None,
            back: None,
            explore_dir: 1.0,
            explore_from: 0.0,
            lost_for_s: 0.0,
            still_for_s: 0.0,
            last_t_s: 0.0,
            move_asked_s: f64::NEG_INFINITY,
            move_set_off: false,
            move_s: 0.0,
            last_fix: None,
            held_fix: None,
            readouts: 0,
            last_depth_m: None,
            established: false,
            quiet_s: 0.0,
            over_held: false,
            depth_lag_m: f32::NAN,
            total_lag_t: f32::NAN,
            vertical_lag_t: f32::NAN,
            side_doubt_s: 0.0,
        })
    }

    /// The trail of stations (for reports and tests).
    pub fn trail(&self) -> &Trail<N> {
        &self.trail
    }

    /// Settings in force.
    pub fn settings(&self) -> &LocatorSettings {
        &self.settings
    }

    /// The head.
    pub fn head(&self) -> &Head<N> {
        &self.head
    }

    /// Replace the calibration.
    pub fn set_calibration(&mut self, cal: Calibration) {
        self.settings.calibration = cal;
    }

    /// Forget what was learnt from earlier readouts (after a converter restart or a settings change).
    pub fn forget(&mut self) {
        self.trail.clear();
        self.established = false;
        self.request = None;
        self.sweep_legs = [0.0; 2];
        self.last_fix = None;
        self.held_fix = None;
        self.last_depth_m = None;
        self.move_asked_s = f64::NEG_INFINITY;
        self.depth_lag_m = f32::NAN;
        self.side_doubt_s = 0.0;
    }

    /// Step 1: signed field per coil, the upper coils' calibrated gain applied.
    pub fn field(&self, phasors: &[C32; N], noise_sigma: &[f32; N]) -> FieldVector<N> {
        let mut field = FieldVector::from_phasors(&self.head, phasors, noise_sigma);
        let cu = self.settings.calibration.upper_gain;
        for k in 0..3 {
            if let Some(u) = self.head.roles.upper[k] {
                field.signed[u as usize] *= cu;
                field.sigma[u as usize] *= cu;
                field.upper[k] *= cu;
            }
        }
        field
    }

    /// Locate from one detection's phasors. `det_flags` are the detector's
    /// (CLIPPED, SETTLING, … decide what may be shown).
    pub fn locate(&mut self, phasors: &[C32; N], noise_sigma: &[f32; N], det_flags: Flags, timing: Timing) -> Located<N> {
        let s = self.settings;
        let field = self.field(phasors, noise_sigma);
        let lo = self.head.roles.lower;
        let sig_lo = lo.iter().flatten().map(|&i| field.sigma[i as usize]).fold(0.0f32, f32::max).max(1e-30);
        // The lower field whitened by each coil's noise: its norm is the detection statistic
        // (with noise alone, a χ with as many degrees of freedom as noise components).
        let white = |i: u8| field.signed[i as usize] / field.sigma[i as usize].max(1e-30);
        let snr = libm::sqrtf(lo.iter().flatten().map(|&i| white(i) * white(i)).sum::<f32>()).clamp(0.0, 1e15);
        let snr_db = 20.0 * crate::powf::log10f(snr.max(1e-6));
        // A detection with a non-finite phasor or no noise estimate on any coil is not
        // a usable measurement (the detector flags the cause); nothing is located from it.
        let usable = (0..N).all(|i| {
            let (p, n) = (phasors[i], noise_sigma[i]);
            p.is_finite() && n.is_finite() && n > 0.0
        });
        let signal = if !usable { Signal::Absent } else { classify_signal(snr, &s) };
        let present = signal != Signal::Absent;
        self.state = s.hysteresis.next(self.state, field.bearing_rad.to_degrees(), present && field.horizontal > 3.0 * sig_lo);
        let settling = det_flags.contains(Flags::SETTLING);
        let clipped = det_flags.contains(Flags::CLIPPED);
        // 4. The trail.
        let place = if present && !settling && !clipped {
            let motion_of = |h: Hint| match h {
                Hint::TurnInLine => Motion::Turn,
                Hint::Wait | Hint::HoldStill => Motion::Hold,
                Hint::StepLeft | Hint::StepRight | Hint::SweepAcross => Motion::Side,
                Hint::WalkAhead | Hint::WalkBack | Hint::WalkAlong | Hint::WalkOtherWay | Hint::SweepAlong => Motion::Along,
            };
            let mut motion = motion_of(self.last_hint);
            // A turn on the spot leaves the total and the vertical field at the lower coils
            // as they were. Where they change, the person asked to turn walks on (as a
            // scripted walker does, or someone who has not looked at the screen), and a
            // person walking on goes the way they face: the trail is told so. With the turn's
            // free heading, the camera walk's fit explained a walk past a sonde 1.1 m down as
            // a turn over one 0.15 m down, and showed the way wrong. (A head that moves while
            // asked to stand makes a station every readout, whose links are cut free when
            // broken: taken as a walk along instead, at a station per period, the board's
            // walk in to a sonde showed its first direction only as it passed the point.)
            let (lt, lv) = (self.total_lag_t, self.vertical_lag_t);
            let allow = 4.0 * sig_lo + WALK_ON_REL * lt;
            let walks_on = lt.is_finite()
                && lv.is_finite()
                && (libm::fabsf(field.total - lt) > allow || libm::fabsf(libm::fabsf(field.lower[2]) - lv) > allow);
            if motion == Motion::Turn && walks_on && !self.trail.moving() {
                motion = Motion::Along;
            }
            if motion == Motion::Hold && self.trail.moving() {
                // "Hold still" shows (over the sonde) while the move asked for is still under
                // way: a person finishes the step they are taking. Until the readouts are
                // steady the head is taken to move as that move asked, not to stand (a
                // standing head's tight prior on a moving one pulled the depth 5 % shallow at
                // 4 m).
                motion = motion_of(self.request_hint);
            }
            let mut sigma = field.sigma;
            for v in sigma.iter_mut() {
                *v = v.max(1e-30);
            }
            self.trail.update(&Reading {
                t_s: timing.t_s as f32,
                signed: field.signed,
                sigma,
                motion,
                noise_corr_s: timing.noise_corr_s,
                group_delay_s: timing.group_delay_s,
                request: self.request,
            })
        } else {
            if !present {
                self.trail.note_absent(timing.t_s as f32);
            }
            None
        };
        let dt = (timing.t_s - self.last_t_s).clamp(0.0, 1.0) as f32;
        self.last_t_s = timing.t_s;
        let h_now = place.map(|p| p.depth_m.value).unwrap_or(1.0).max(0.05);
        // A head standing still reads a steady field: the total at the lower coils, followed
        // with a lag of STEADY_TAU_S, may not move by more than the noise or STEADY_REL,
        // whatever the trail makes of it (it knows only what it asked for, and straight across
        // a level sonde the field changes only at second order).
        let lag = self.total_lag_t;
        let steady = !lag.is_finite() || libm::fabsf(field.total - lag) <= (4.0 * sig_lo).max(STEADY_REL * lag);
        self.total_lag_t = if present { follow(lag, field.total, dt, STEADY_TAU_S) } else { field.total };
        let vz = libm::fabsf(field.lower[2]);
        self.vertical_lag_t = if present { follow(self.vertical_lag_t, vz, dt, STEADY_TAU_S) } else { vz };
        // Nor is a head that set off on a move of a set distance across the axis, until the
        // move should be done at the pace asked: across the top of a level sonde the field
        // changes only at second order, and mid-sweep "over" was shown to a person still
        // sweeping, 0.24 m past the point.
        // Set off: the readouts still change two group delays after the ask (before that
        // they may carry the motion that brought the person there).
        let asked_s = self.move_asked_s;
        self.move_set_off |= self.trail.last_change_s().is_some_and(|t| t as f64 > asked_s + 2.0 * timing.group_delay_s as f64);
        // And the readouts carry the move for a while after its end (the detector's delay),
        // with nothing steady to tell: OVER_SETTLE_S more.
        let settle = if self.move_s > 0.0 { OVER_SETTLE_S } else { 0.0 };
        let moving_as_asked = self.move_set_off && timing.t_s < asked_s + (self.move_s + settle) as f64;
        match place {
            Some(p) if steady && !moving_as_asked && p.speed_m_s < MAX_OVER_SPEED_DEPTHS_PER_S * h_now => self.still_for_s += dt,
            _ => self.still_for_s = 0.0,
        }
        // 5. The fit.
        let fix = self.fix(&field, place.as_ref(), present && !settling && signal == Signal::Good);
        // A trail fit that does not explain the readings is not used (its stations are
        // dropped as the person moves on); a poor one-station fit flags the field.
        let raw_place = place;
        let place = place.filter(|p| p.consistent);
        // A side the fits could not tell a moment ago (a rival on the other side within
        // AMBIGUITY_CHI2) stays withheld for SIDE_DOUBT_S: straight across the top of a level
        // sonde the two sides trade places as the best fit from readout to readout, and the
        // demo's walk across showed 42 of 93 sides wrong, each with a σ of 0.01–0.03 m.
        // ("Centred" is still claimed: both sides are then within the tolerance.)
        self.side_doubt_s = if place.is_some_and(|p| p.ambiguous_left) { SIDE_DOUBT_S } else { (self.side_doubt_s - dt).max(0.0) };
        // A fit that has not explained the readings for a while is lost: start afresh.
        match raw_place {
            Some(p) if !p.consistent => self.lost_for_s += dt,
            _ => self.lost_for_s = 0.0,
        }
        if self.lost_for_s > LOST_S {
            self.trail.clear();
            self.established = false;
            self.request = None;
            self.sweep_legs = [0.0; 2];
            self.lost_for_s = 0.0;
        }
        let fix_distorted = fix.map(|f| f.dof > 0 && f.chi2 / f.dof as f32 > s.distortion_chi2).unwrap_or(false);
        let distorted = fix_distorted;
        // 6. Guidance.
        let h_hint = place
            .filter(|p| p.depth_m.sigma < 0.3 * p.depth_m.value)
            .map(|p| p.depth_m.value)
            .or(self.last_depth_m)
            .or_else(|| self.provisional_depth(&field));
        // Asked to turn, the person turns until the bearing is within a third of the limit.
        let limit = if self.last_hint == Hint::TurnInLine { TURN_BEARING_RAD / 3.0 } else { TURN_BEARING_RAD };
        let out_of_line = field.horizontal > 5.0 * sig_lo && libm::fabsf(field.bearing_rad) > limit;
        let mut guidance = if !present {
            Guidance::unsure(Withheld::NoSignal, Hint::Wait)
        } else if settling {
            Guidance::unsure(Withheld::Settling, Hint::Wait)
        } else {
            // A fit on a short baseline can be confidently wrong (near and weak against far
            // and strong): directions only once the trail has spanned a fair way. The window
            // of stations may later shrink to the last metre of small moves; the fit keeps
            // what the long baseline settled (its σ say what the window still supports).
            match place {
                Some(p) if p.stations < min_stations(N) => self.established = false,
                Some(p) => {
                    let h = h_hint.unwrap_or(p.depth_m.value).max(0.05);
                    self.established |= p.span_m >= (min_span(N) * h).max(0.35);
                }
                None => {}
            }
            // In conducting ground the parts of the field along and across the line to the
            // sonde drift apart in phase by about (r/δ)² rad (field::ground), which the trail's
            // in-phase model does not follow: a field out of phase there gives no direction.
            let ground = s.skin_depth_m.is_finite() && field.quadrature > s.quadrature_limit;
            self.directions(place.as_ref(), h_hint, clipped, distorted || ground, out_of_line, signal == Signal::Weak)
        };
        self.over_held = guidance.over();
        guidance.vertical_ratio = field.vertical_ratio();
        self.quiet_s = if self.trail.moving() { 0.0 } else { self.quiet_s + dt };
        let quiet = self.quiet_s >= (2.0 * timing.group_delay_s).max(MOVE_QUIET_S);
        self.moves(&mut guidance, place.as_ref(), present && !settling, field.total, quiet);
        self.last_hint = guidance.hint;
        // 7. Depths.
        if let Some(p) = place.as_ref() {
            self.depth_lag_m = follow(self.depth_lag_m, p.depth_m.value, dt, DRIFT_TAU_S);
        }
        let gate = self.depth_gate(signal, settling, clipped, distorted, place.as_ref(), &guidance);
        let (gradient, known, trail_depth) = match gate {
            Err(w) => (Err(w), Err(w), Err(w)),
            Ok(at) => (self.gradient(&field, at), self.known_moment(&field, sig_lo, at), self.trail_depth(place.as_ref())),
        };
        let fit_depth = match gate {
            Err(w) => Err(w),
            Ok(_) => self.fit_depth(fix.as_ref(), signal, settling, clipped, distorted),
        };
        // The trail's depth first: it fits pitch, offsets and the gain error with the depth,
        // so its σ carries them; the others assume a level sonde at the offsets given.
        // While the trail's depth still drifts, none: the others would show what it has not
        // settled (beside a pitched sonde the gradient's read 21 % deep with a σ of 2 %), and
        // each says so.
        let mut best: Option<(DepthMethod, Depth)> = trail_depth.ok().map(|d| (DepthMethod::Trail, d));
        let (gradient, fit_depth, known) = match trail_depth {
            Err(Withheld::Settling) => (Err(Withheld::Settling), Err(Withheld::Settling), Err(Withheld::Settling)),
            _ => (gradient, fit_depth, known),
        };
        for (m, e) in [(DepthMethod::Gradient, gradient), (DepthMethod::Fit, fit_depth), (DepthMethod::KnownMoment, known)] {
            if let Ok(d) = e {
                if best.map(|b| b.0 != DepthMethod::Trail && d.sigma_m < b.1.sigma_m).unwrap_or(true) {
                    best = Some((m, d));
                }
            }
        }
        if let Some((_, d)) = best {
            self.last_depth_m = Some(d.depth_m);
        }
        let depth = best.map(|(method, depth)| ShownDepth { method, depth, below_ground_m: depth.depth_m - s.coil_height_m });
        let mut flags = Flags::NONE;
        flags.set(Flags::NO_SIGNAL, !present);
        flags.set(Flags::WEAK, signal == Signal::Weak);
        flags.set(Flags::QUADRATURE, present && field.quadrature > s.quadrature_limit);
        flags.set(Flags::DISTORTED, distorted);
        Located {
            field,
            signal,
            snr_db,
            state: self.state,
            guidance,
            gradient,
            known_moment: known,
            fit_depth,
            depth,
            fix,
            place: raw_place,
            flags,
        }
    }

    /// Step 5: the one-station fit, when the head has two triads (every `fit_every` readouts).
    fn fix(&mut self, field: &FieldVector<N>, place: Option<&Place>, usable: bool) -> Option<Fix> {
        let s = &self.settings;
        let r = self.head.roles;
        let triads = r.lower.iter().chain(r.upper.iter()).all(|x| x.is_some());
        if !(N >= 6 && s.fit && triads && s.model == FieldModel::Dipole && usable) {
            self.held_fix = None;
            return None;
        }
        self.readouts = self.readouts.wrapping_add(1);
        let every = s.fit_every.max(1) as u32;
        if self.readouts % every != 1 % every && self.held_fix.is_some() {
            return self.held_fix;
        }
        let k = if s.calibration.strength > 0.0 { Some(s.calibration.strength) } else { None };
        let mut sig = field.sigma;
        for v in sig.iter_mut() {
            *v = v.max(1e-30);
        }
        // The trail's lateral offset over its depth, as a prior (once the trail is established).
        let prior = match place.filter(|_| self.established) {
            Some(p) if p.left_m.sigma.is_finite() && p.depth_m.value > 0.0 => LateralPrior {
                left_over_depth: p.left_m.value / p.depth_m.value,
                sigma: (p.left_m.sigma / p.depth_m.value).clamp(0.02, VAGUE_SIGMA),
            },
            _ => LateralPrior { left_over_depth: 0.0, sigma: VAGUE_SIGMA },
        };
        let f = fit_from(&self.unit_head(), &field.signed, &sig, k, self.last_fix, Some(prior), self.settings.skin_depth_m);
        self.last_fix = f.converged.then_some(f.params());
        self.held_fix = Some(f);
        Some(f)
    }

    /// The head with unit gains (the field is already gain-corrected).
    fn unit_head(&self) -> Head<N> {
        let mut h = self.head;
        for c in h.coils.iter_mut() {
            c.gain = 1.0;
        }
        h
    }

    /// Step 6b: moves of a set distance. While one is under way the hint stays; when it
    /// is done the next leg of a sweep is asked for, or a new move from the directions:
    /// near the sonde every step is a move of the distance shown (walk it and stop), so
    /// the trail knows how far the head went.
    fn moves(&mut self, g: &mut Guidance, place: Option<&Place>, present: bool, total: f32, quiet: bool) {
        if !present {
            // The tone is lost after a move: go back the way the move went, once.
            if let Some(r) = self.request.take().or(self.last_move) {
                self.last_move = None;
                self.move_id = self.move_id.wrapping_add(1);
                let across = r.ahead_m == 0.0;
                let m = if across { -r.left_m } else { -r.ahead_m };
                let hint = match (across, m > 0.0) {
                    (true, true) => Hint::StepLeft,
                    (true, false) => Hint::StepRight,
                    (false, true) => Hint::WalkAhead,
                    (false, false) => Hint::WalkBack,
                };
                self.back = Some((hint, m, self.move_id));
            }
            if let Some((hint, m, id)) = self.back {
                g.hint = hint;
                g.move_m = Some(m);
                g.move_id = id;
            }
            self.sweep_legs = [0.0; 2];
            return;
        }
        self.back = None;
        if g.over() {
            // Over the sonde: whatever move was under way is done; stand and read the depth.
            if let Some(r) = self.request.take() {
                self.last_move = Some(r);
            }
            self.sweep_legs = [0.0; 2];
            g.hint = Hint::HoldStill;
            g.move_m = None;
            return;
        }
        if let Some(r) = self.request.filter(|_| self.trail.moving()) {
            g.hint = self.request_hint;
            g.move_m = Some(if matches!(g.hint, Hint::StepLeft | Hint::StepRight | Hint::SweepAcross) { r.left_m } else { r.ahead_m });
            g.move_id = r.id;
            return;
        }
        if let Some(r) = self.request.take() {
            self.last_move = Some(r);
        }
        let leg = self.sweep_legs[0];
        if !quiet {
            // Just after a move the directions still carry the motion (the readouts lag
            // the head by the detector's group delay): stand until they have caught up.
            g.hint = Hint::HoldStill;
            g.move_m = None;
            return;
        }
        // A sweep goes on to its end unless the head is found over the sonde or must turn.
        let (hint, dist) = if leg != 0.0 && !g.over() && g.hint != Hint::TurnInLine {
            self.sweep_legs = [self.sweep_legs[1], 0.0];
            (self.sweep_hint, leg)
        } else {
            self.sweep_legs = [0.0; 2];
            let unknown = crate::locate::fit::Estimate { value: 0.0, sigma: f32::INFINITY };
            let (a, l) = place.map(|p| (p.ahead_m, p.left_m)).unwrap_or((unknown, unknown));
            // Every move is of a set distance: the distance shown where it is known to a
            // third, else a short exploring move; at most MAX_MOVE_M at a time.
            let known = |e: crate::locate::fit::Estimate| e.sigma < 0.3 * libm::fabsf(e.value) + 0.05;
            let dist = |e: crate::locate::fit::Estimate| {
                if known(e) {
                    e.value.clamp(-MAX_MOVE_M, MAX_MOVE_M)
                } else if e.value < 0.0 {
                    -EXPLORE_M
                } else {
                    EXPLORE_M
                }
            };
            match (g.hint, g.move_m) {
                (Hint::SweepAlong | Hint::SweepAcross, Some(s)) => {
                    self.sweep_legs = [-2.0 * s, s];
                    self.sweep_hint = g.hint;
                    (g.hint, s)
                }
                (Hint::StepLeft | Hint::StepRight, _) => (g.hint, dist(l)),
                (Hint::WalkAhead | Hint::WalkBack, _) => (g.hint, dist(a)),
                (Hint::WalkAlong | Hint::WalkOtherWay, _) => {
                    // Exploring: keep the way while the field grows, turn back when it fades.
                    if self.explore_from > 0.0 && total < 0.9 * self.explore_from {
                        self.explore_dir = -self.explore_dir;
                    }
                    self.explore_from = total;
                    (Hint::WalkAlong, EXPLORE_M * self.explore_dir)
                }
                _ => {
                    g.move_m = None;
                    return;
                }
            }
        };
        self.move_id = self.move_id.wrapping_add(1);
        let across = matches!(hint, Hint::StepLeft | Hint::StepRight | Hint::SweepAcross);
        // Only a move across the axis is timed: along it the vertical field changes at first
        // order over the sonde, and steady readouts do mean the head has stopped.
        self.move_s = if across { libm::fabsf(dist) / crate::locate::trail::MOVE_PACE_M_S } else { 0.0 };
        self.move_asked_s = self.last_t_s;
        self.move_set_off = false;
        let r = MoveRequest {
            id: self.move_id,
            ahead_m: if across { 0.0 } else { dist },
            left_m: if across { dist } else { 0.0 },
            from_still: self.still_for_s > 0.0,
            own_pace: hint == Hint::WalkAlong,
        };
        self.request = Some(r);
        self.request_hint = hint;
        g.hint = hint;
        g.move_m = Some(dist);
        g.move_id = r.id;
    }

    /// Step 6: the directions and the hint.
    fn directions(
        &self,
        place: Option<&Place>,
        h_hint: Option<f32>,
        clipped: bool,
        distorted: bool,
        out_of_line: bool,
        weak: bool,
    ) -> Guidance {
        let Some(p) = place else {
            // Nothing fitted yet: line up with the field, then walk so the field changes.
            let hint = if out_of_line || self.state == Orientation::Crossed { Hint::TurnInLine } else { Hint::WalkAlong };
            return Guidance::unsure(Withheld::NeedsMotion, hint);
        };
        let h = h_hint.unwrap_or(p.depth_m.value).max(0.05);
        // "Over" is claimed against the tolerance of a depth the trail is sure of, its value
        // less two σ: 12 m from a sonde 4 m down, a depth of tens of metres from the noisy
        // coil ratio set the tolerance, and "over" was shown 11 m off.
        let h_sure = (p.depth_m.value - 2.0 * p.depth_m.sigma).max(0.0);
        let tol = over_tolerance_m(h.min(h_sure));
        let mut g = Guidance {
            along: Along::Unsure,
            across: Across::Unsure,
            ahead: Some(Distance { value_m: p.ahead_m.value, sigma_m: p.ahead_m.sigma })
                .filter(|d| d.sigma_m.is_finite() && d.value_m.is_finite()),
            left: Some(Distance { value_m: p.left_m.value, sigma_m: p.left_m.sigma })
                .filter(|d| d.sigma_m.is_finite() && d.value_m.is_finite()),
            why: None,
            hint: Hint::WalkAlong,
            vertical_ratio: 0.0,
            move_m: None,
            move_id: 0,
        };
        if distorted {
            g.ahead = None;
            g.left = None;
            g.why = Some(Withheld::Distorted);
            return g;
        }
        // Until the trail has spanned a fair way, no direction and no depth.
        let established = self.established;
        if !established {
            g.ahead = None;
            g.left = None;
            g.why = Some(Withheld::NeedsMotion);
            g.hint = if out_of_line { Hint::TurnInLine } else { Hint::WalkAlong };
            return g;
        }
        // A readout describes the field a little before it is shown; "over" only while still.
        let still = p.speed_m_s < MAX_OVER_SPEED_DEPTHS_PER_S * h && self.still_for_s > 0.0;
        let (a, sa) = (p.ahead_m.value, p.ahead_m.sigma);
        let (l, sl) = (p.left_m.value, p.left_m.sigma);
        // A fit whose depth's σ is as large as the depth does not know the geometry its
        // offsets stand on (their σ are those of a linearisation far from the answer): 5 m
        // beside the camera scenario's sonde at 17 dB a fit with its depth at 0.9 ± 1.4 m put
        // the sonde 6.1 ± 0.2 m to the left; it was 5.2 m to the right. (Half the depth
        // withheld good directions 12 m from the 4 m sonde, where the depth is 2 ± 1 m.)
        if !(p.depth_m.sigma < p.depth_m.value) {
            g.ahead = None;
            g.left = None;
            g.why = Some(Withheld::Uncertain);
            return g;
        }
        // Over is claimed at two σ and, for a head still since, kept at HOLD_SIGMAS: the
        // head has not moved, only the estimate's noise has (else "over" flickers under a
        // person holding still, and they are sent off again).
        let held = self.over_held && still;
        let k = if held { HOLD_SIGMAS } else { 2.0 };
        // Claimed, the point must also lie within OVER_MARGIN of the tolerance whatever the
        // σ, which covers the noise and not what the fit does not model (see OVER_MARGIN).
        let reach = if held { tol } else { OVER_MARGIN * tol };
        let within_a = libm::fabsf(a) + k * sa <= tol && libm::fabsf(a) <= reach;
        // "Over" is claimed against a tolerance of a tenth of the depth: only from a fit that
        // knows its depth well within that. 3.5 m and 3.9 m beside the camera scenario's
        // sonde, fits at 24 ± 3.6 m and 28 ± 2.8 m (truly 1.3 m) had claimed it.
        let vague = !(p.depth_m.sigma < OVER_DEPTH_REL * p.depth_m.value);
        // Over is claimed on the distance from the point, both directions together.
        let within_l = libm::fabsf(l) + k * sl <= tol && libm::fabsf(l) <= reach && crate::powf::hypotf(a, l) + k * sa.max(sl) <= tol;
        g.along = if p.ambiguous_ahead || !sa.is_finite() {
            Along::Unsure
        } else if within_a && still && !weak && !vague {
            Along::Over
        } else if within_a {
            Along::Unsure
        } else if a - 2.0 * sa > 0.0 {
            Along::Ahead
        } else if a + 2.0 * sa < 0.0 {
            Along::Behind
        } else {
            Along::Unsure
        };
        // A side the fits could not tell a moment ago, or steps the person took unasked.
        let side_doubt = self.side_doubt_s > 0.0;
        let side_held = side_doubt || p.free_links > 0;
        g.across = if p.ambiguous_left || !sl.is_finite() {
            Across::Unsure
        } else if within_l {
            Across::Centred
        } else if side_held {
            // Withheld too while the person goes where they were not asked: their steps are
            // then free either way, and straight across the top of a level sonde either way
            // fits (the demo's walk sideways across it, asked to walk along, showed the side
            // 1.1 m wrong with a σ of 0.08 m and no rival within Δχ² 70).
            Across::Unsure
        } else if l - 2.0 * sl > 0.0 {
            Across::Left
        } else if l + 2.0 * sl < 0.0 {
            Across::Right
        } else {
            Across::Unsure
        };
        if clipped && g.along == Along::Over {
            g.along = Along::Unsure;
            g.why = Some(Withheld::Clipped);
        }
        if p.ambiguous_ahead {
            g.ahead = None;
        }
        if p.ambiguous_left || (g.across == Across::Unsure && side_held) {
            g.left = None;
        }
        // The order of moves: a known lateral offset first (it is read best away from the
        // point over the sonde, where the vertical field is not zero), then along; near but
        // not yet sure, stand still a moment, then sweep along to see the field change.
        let side_known = g.across == Across::Left || g.across == Across::Right;
        let settled = self.still_for_s >= SETTLE_S;
        let sweep = (0.3 * h).clamp(0.3, 0.8);
        // Near the sonde the field runs along its axis: a handle far out of line with it
        // turns "ahead" into "across the axis", where the field changes least. Turn first,
        // when the bearing shown agrees: a person turns until the bearing reads in line, and
        // beside a pitched sonde the field can read in line with the handle 30° off its axis
        // (asked to turn with nothing to turn by, they would stand there for good).
        let near = crate::powf::hypotf(a, l) < (0.7 * h).max(0.5);
        let crossed = libm::fabsf(crate::trigf::sinf(p.yaw_rad.value)) > crate::trigf::sinf(NEAR_TURN_RAD) && p.yaw_rad.sigma < 0.3;
        let along_known = g.along == Along::Ahead || g.along == Along::Behind;
        let walk = if a > 0.0 { Hint::WalkAhead } else { Hint::WalkBack };
        let step = if l > 0.0 { Hint::StepLeft } else { Hint::StepRight };
        let far = crate::powf::hypotf(a, l) > (1.5 * h).max(1.0);
        g.hint = if !established {
            if out_of_line {
                Hint::TurnInLine
            } else {
                Hint::WalkAlong
            }
        } else if near && crossed && out_of_line && !(g.along == Along::Over && g.across == Across::Centred) {
            Hint::TurnInLine
        } else if far {
            // Far off: go the longer way first, walking or stepping.
            match (along_known, side_known) {
                (true, true) if libm::fabsf(l) > libm::fabsf(a) => step,
                (true, _) => walk,
                (false, true) => step,
                (false, false) => Hint::WalkAlong,
            }
        } else if side_known && sl < 0.5 * libm::fabsf(l) && !(within_l && within_a) {
            step
        } else {
            match g.along {
                Along::Ahead | Along::Behind => walk,
                Along::Over if g.across == Across::Centred => Hint::HoldStill,
                // Within the tolerance along but well off the middle of it, and known to be:
                // close in along first (the lateral offset is read with less error there).
                Along::Over | Along::Unsure if within_a && libm::fabsf(a) > 0.4 * tol && sa < 0.5 * libm::fabsf(a) => walk,
                Along::Over | Along::Unsure if within_a && !settled => Hint::HoldStill,
                // Placed along, not across: the strength across the axis peaks over it.
                Along::Over | Along::Unsure if within_a => {
                    g.move_m = Some(sweep);
                    Hint::SweepAcross
                }
                Along::Over | Along::Unsure if !p.ambiguous_ahead && sa < 4.0 * tol => {
                    g.move_m = Some(sweep);
                    Hint::SweepAlong
                }
                _ => Hint::WalkAlong,
            }
        };
        if g.why.is_none() && (g.along == Along::Unsure || g.across == Across::Unsure) {
            g.why = Some(if g.along == Along::Unsure {
                if p.ambiguous_ahead {
                    Withheld::Ambiguous
                } else if within_a && weak {
                    Withheld::LowSnr
                } else if within_a && vague {
                    Withheld::Uncertain
                } else if within_a {
                    Withheld::Moving
                } else {
                    Withheld::NeedsMotion
                }
            } else if p.ambiguous_left || side_doubt {
                Withheld::Ambiguous
            } else {
                Withheld::LateralUnknown
            });
        }
        g
    }

    /// Step 7a: may a depth be shown here? The receiver's offsets from the point
    /// over the sonde (in depths, along the sonde axis and across it) if so.
    fn depth_gate(
        &self,
        signal: Signal,
        settling: bool,
        clipped: bool,
        distorted: bool,
        place: Option<&Place>,
        g: &Guidance,
    ) -> Result<Offsets, Withheld> {
        match signal {
            Signal::Absent => return Err(Withheld::NoSignal),
            Signal::Weak => return Err(Withheld::LowSnr),
            Signal::Good => {}
        }
        if settling {
            return Err(Withheld::Settling);
        }
        if clipped {
            return Err(Withheld::Clipped);
        }
        if distorted {
            return Err(Withheld::Distorted);
        }
        let Some(p) = place else { return Err(Withheld::NeedsMotion) };
        if g.along != Along::Over {
            return Err(Withheld::NotOver);
        }
        if g.across != Across::Centred {
            return Err(Withheld::LateralUnknown);
        }

        let h = p.depth_m.value.max(0.05);
        // The receiver relative to the sonde (−ahead, −left), on the sonde axis (yaw ψ from the handle).
        let (sy, cy) = crate::trigf::sin_cos(p.yaw_rad.value);
        let (a, l) = (p.ahead_m.value, p.left_m.value);
        Ok(Offsets {
            u: (-a * cy - l * sy) / h,
            sigma_u: crate::powf::hypotf(p.ahead_m.sigma * cy, p.left_m.sigma * sy) / h,
            eta: (a * sy - l * cy) / h,
            sigma_eta: crate::powf::hypotf(p.ahead_m.sigma * sy, p.left_m.sigma * cy) / h,
        })
    }

    /// Step 7b: the trail's depth, with a floor for the dipole model's own error.
    fn trail_depth(&self, place: Option<&Place>) -> DepthEstimate {
        let p = place.ok_or(Withheld::NeedsMotion)?;
        if !p.depth_m.sigma.is_finite() {
            return Err(Withheld::IllConditioned);
        }
        let h = p.depth_m.value;
        let sigma = crate::powf::hypotf(p.depth_m.sigma, MODEL_FLOOR * h);
        // Still drifting (the newest readings pull it further than its σ): not yet.
        let drift = libm::fabsf(h - self.depth_lag_m);
        if !(drift <= sigma) {
            return Err(Withheld::Settling);
        }
        let d = crate::locate::depth::depth(h, crate::powf::hypotf(sigma, drift))?;
        self.precise(d)
    }

    /// A rough depth from the coil ratio taken as if over the sonde, for scaling moves and
    /// tolerances only; `None` where the ratio is not physical or too noisy to tell.
    fn provisional_depth(&self, field: &FieldVector<N>) -> Option<f32> {
        let sp = self.head.spacing_m()?;
        let (lo, up) = (self.head.roles.lower[0]?, self.head.roles.upper[0]?);
        let r = field.lower[0] / field.upper[0];
        let h = solve_g(self.settings.model, RatioOf::Along, 0.0, 0.0, libm::fabsf(r)).map(|g| sp / g)?;
        // Only where the ratio's noise leaves the depth known to a third: over a level
        // sonde R = ((h+s)/h)³, so σ_h/h = σ_lnR·(h+s)/(3s). Far off, the ratio is near 1
        // and its noise alone made depths of tens of metres.
        let rel = |i: u8, v: f32| field.sigma[i as usize] / libm::fabsf(v).max(1e-30);
        let s_ln_r = crate::powf::hypotf(rel(lo, field.lower[0]), rel(up, field.upper[0]));
        (s_ln_r * (h + sp) / (3.0 * sp) < 0.3).then_some(h)
    }

    /// Step 7b: the gradient depth.
    fn gradient(&self, field: &FieldVector<N>, at: Offsets) -> DepthEstimate {
        let s = &self.settings;
        let head = &self.head;
        let (Some(sp), Some(up0)) = (head.spacing_m(), head.roles.upper[0]) else { return Err(Withheld::NoCoils) };
        let lo = head.roles.lower;
        let triads = lo.iter().chain(head.roles.upper.iter()).all(|r| r.is_some());
        let sig = |i: Option<u8>| i.map(|k| field.sigma[k as usize]).unwrap_or(f32::INFINITY);
        let (of, a_lo, a_up, s_lo, s_up) = if triads {
            let up = libm::sqrtf(field.upper[0] * field.upper[0] + field.upper[1] * field.upper[1] + field.upper[2] * field.upper[2]);
            (RatioOf::Total, field.total, up, sig(lo[0]), sig(Some(up0)))
        } else {
            (RatioOf::Along, field.lower[0], field.upper[0], sig(lo[0]), sig(Some(up0)))
        };
        // In conducting ground the coils over the sonde read the transverse field, scaled by
        // |A_t(d)| (field::ground): once without it for the depth, then again with the upper
        // reading brought to the lower coil's scale at that depth.
        let pair = |soil: f32| CoilPair { low: a_lo, up: a_up * soil, sigma_low: s_lo, sigma_up: s_up * soil, spacing_m: sp };
        let mut d = gradient_depth(s.model, of, pair(1.0), s.gain_tolerance, at)?;
        if s.skin_depth_m.is_finite() {
            let soil = whole_space_factors(d.depth_m, s.skin_depth_m)[1] / whole_space_factors(d.depth_m + sp, s.skin_depth_m)[1];
            d = gradient_depth(s.model, of, pair(soil), s.gain_tolerance, at)?;
        }
        self.precise(d)
    }

    /// Step 7c: the known-moment depth.
    fn known_moment(&self, field: &FieldVector<N>, sigma: f32, at: Offsets) -> DepthEstimate {
        let s = &self.settings;
        let c = &s.calibration;
        // The coils' gain tolerance enters the strength as well.
        let sb = crate::powf::hypotf(sigma, s.gain_tolerance * field.total);
        let d = known_moment_depth(s.model, field.total, sb, c.strength, c.strength_sigma, at)?;
        self.precise(d)
    }

    /// Step 7d: the fit's depth, gated like the others but valid off the peak.
    fn fit_depth(&self, fix: Option<&Fix>, signal: Signal, settling: bool, clipped: bool, distorted: bool) -> DepthEstimate {
        let Some(f) = fix else {
            let triads = self.head.roles.lower.iter().chain(self.head.roles.upper.iter()).all(|r| r.is_some());
            return Err(if !triads || N < 6 {
                Withheld::NoCoils
            } else if signal == Signal::Absent {
                Withheld::NoSignal
            } else if settling {
                Withheld::Settling
            } else {
                Withheld::LowSnr
            });
        };
        if clipped {
            return Err(Withheld::Clipped);
        }
        if distorted {
            return Err(Withheld::Distorted);
        }
        if !f.converged {
            return Err(Withheld::NoFit);
        }
        let h = f.depth_m.value;
        if !f.depth_m.sigma.is_finite() || !f.left_m.sigma.is_finite() {
            return Err(Withheld::IllConditioned);
        }
        // Beyond the nulls the fit can land on the wrong side; require the sonde within them.
        let r = crate::powf::hypotf(f.ahead_m.value, f.left_m.value);
        if r > 0.7 * h {
            return Err(Withheld::NotOver);
        }
        // The coils' gain tolerance moves the depth as it moves a gradient ratio:
        // σ_h/h = (h+s)/(3s)·√2·tol (two triads, each ±tol).
        let sp = self.head.spacing_m().unwrap_or(0.4).max(1e-3);
        let gain = h * (h + sp) / (3.0 * sp) * core::f32::consts::SQRT_2 * self.settings.gain_tolerance;
        let d = crate::locate::depth::depth(h, crate::powf::hypotf(f.depth_m.sigma, gain))?;
        self.precise(d)
    }

    fn precise(&self, d: Depth) -> DepthEstimate {
        if d.sigma_m > self.settings.max_relative_sigma * d.depth_m {
            Err(Withheld::Uncertain)
        } else {
            Ok(d)
        }
    }
}

/// Largest angle between the handle and the sonde axis at which along-axis
/// guidance is given (beyond it: turn in line), rad (40°).
pub const MAX_AXIS_ANGLE_RAD: f32 = 0.698;

/// Bearing of the field from the handle beyond which the receiver asks to turn in line, rad (15°).
pub const TURN_BEARING_RAD: f32 = 0.262;
/// Fastest motion of the head at which "over" is shown, depths per second (0.1: 0.15 m/s at 1.5 m).
pub const MAX_OVER_SPEED_DEPTHS_PER_S: f32 = 0.1;
/// "Over" is claimed only where the point over the sonde is also within this fraction of the
/// tolerance along and across, however small the σ: the σ covers the noise, not what the fit
/// does not model (the lower coils' gains within their stated tolerance, the head's build).
/// At 2σ alone, people beside the shallow scenario's sonde (0.3 m, pitched 15°, its lower
/// coils 1 % apart) were told "over" at 0.151 and 0.161 m from the point against 0.15 m, the
/// fit putting them 0.13 ± 0.01 m off.
pub const OVER_MARGIN: f32 = 0.6;
/// After a move across the axis, the head is taken to be still moving this much longer than
/// the move takes at the pace asked, s: the readouts still carry the move (the detector's
/// delay), and across the top of a level sonde the field changes too little to tell. At the
/// end of a sweep across the camera scenario's sonde "over" was claimed the instant the head
/// stopped, 0.15 m to its side, and withdrawn 0.3 s later.
pub const OVER_SETTLE_S: f32 = 0.5;
/// A trail fit that has not explained the readings this long is dropped, s.
pub const LOST_S: f32 = 2.0;
/// How long a side the fits could not tell stays withheld, s.
pub const SIDE_DOUBT_S: f32 = 1.0;
/// "Over" only from a fit whose depth's σ is below this share of the depth.
pub const OVER_DEPTH_REL: f32 = 0.05;
/// Stations a fit needs before its directions are acted on.
pub const MIN_STATIONS: u8 = 8;
/// Stations a fit of a head of two triads needs before its directions are acted on: each
/// station brings six readings against its three unknowns (a four-coil head's bring four).
pub const MIN_STATIONS_TRIADS: u8 = 5;

/// The trail's span, in depths, before its directions are acted on, for a head of `n` coils.
const fn min_span(n: usize) -> f32 {
    if n >= 6 {
        0.2
    } else {
        0.3
    }
}

/// Stations a fit needs before its directions are acted on, for a head of `n` coils.
const fn min_stations(n: usize) -> u8 {
    if n >= 6 {
        MIN_STATIONS_TRIADS
    } else {
        MIN_STATIONS
    }
}
/// Near the sonde the handle is turned in line with its axis when they are further apart than this, rad (30°).
pub const NEAR_TURN_RAD: f32 = 0.524;
/// Within this distance (or half a depth) of the point over the sonde, walks are moves of a set distance, m.
pub const NEAR_MOVE_M: f32 = 0.6;
/// An exploring move (the way is not known yet), m.
pub const EXPLORE_M: f32 = 0.5;
/// Longest move of a set distance asked for, m.
pub const MAX_MOVE_M: f32 = 1.0;
/// Seconds to stand still near the point over the sonde before the receiver asks for a sweep.
pub const SETTLE_S: f32 = 2.0;
/// Least pause after a move before the next is asked for, s (at least twice the
/// detector's group delay).
pub const MOVE_QUIET_S: f32 = 0.6;
/// Time constant with which the trail's depth is followed to see it drift, s: a depth still
/// moving by more than its σ from where it was about this long ago is not shown, and what
/// it moved is added to its σ.
const DRIFT_TAU_S: f32 = 1.0;

/// Relative error of the dipole model at the depths a receiver reads (the
/// sonde's coil is not a point; within 1 % beyond three coil lengths, see the
/// exact-loop table in the field module).
pub const MODEL_FLOOR: f32 = 0.01;

/// The trail's settings from the locator's.
fn trail_settings(s: &LocatorSettings) -> TrailSettings {
    TrailSettings { gain_tolerance: s.gain_tolerance.max(1e-4), skin_depth_m: s.skin_depth_m, ..TrailSettings::default() }
}
