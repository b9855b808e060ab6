//! Run the receiver (the very `undertone-dsp` pipeline the firmware runs) on a
//! scenario's synthetic stream, and collect readouts beside the truth.

use crate::error::{Result, SimError};
use crate::scenario::Scenario;
use crate::synth::{Synth, Truth};
use serde::Serialize;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::locate::depth::DepthEstimate;
use undertone_dsp::{DetectorSettings, Head, Readout, Receiver, ReceiverSettings};

/// A depth estimate as printed: value and σ, or the reason it is withheld.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct Est {
    /// Depth, m (None when withheld).
    pub depth_m: Option<f64>,
    /// One-sigma, m.
    pub sigma_m: Option<f64>,
    /// Why withheld.
    pub reason: Option<&'static str>,
}

impl From<DepthEstimate> for Est {
    fn from(d: DepthEstimate) -> Self {
        match d {
            Ok(d) => Est { depth_m: Some(d.depth_m as f64), sigma_m: Some(d.sigma_m as f64), reason: None },
            Err(r) => Est { depth_m: None, sigma_m: None, reason: Some(r.name()) },
        }
    }
}

/// One readout row, head-size independent.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Row {
    /// Time of the data's centre, s.
    pub t_s: f64,
    /// Time of the latest sample used (when the readout is shown), s.
    pub t_latest_s: f64,
    /// Horizontal field at the lower coils in reading units (T in a simulation,
    /// full scale in a replay); in JSON as [`Row::field_nt`] or [`Row::level_fs`].
    #[serde(skip)]
    pub strength: f64,
    /// 20·log10(strength); in JSON as [`Row::field_db_nt`] or [`Row::level_dbfs`].
    #[serde(skip)]
    pub strength_db: f64,
    /// Horizontal field at the lower coils, nT (when the scale is known: a simulation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub field_nt: Option<f64>,
    /// The same in dB re 1 nT.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub field_db_nt: Option<f64>,
    /// Horizontal tone amplitude at the lower coils as a fraction of the converter's full
    /// scale (when only codes are known: a replay).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level_fs: Option<f64>,
    /// The same in dB re full scale.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level_dbfs: Option<f64>,
    /// SNR of the lower triad (the lower x, y and z coils together, each over its noise), dB.
    pub snr_db: f64,
    /// Tone present: "good", "weak" or "no-signal".
    pub signal: &'static str,
    /// Bearing of the field from the handle, degrees.
    pub bearing_deg: f64,
    /// Orientation state.
    pub state: &'static str,
    /// Bz/Bh.
    pub vertical_ratio: f64,
    /// +1 sonde ahead along the handle, −1 behind, 0 over or unsure (see `along`).
    pub direction: i8,
    /// Along the handle: "ahead", "behind", "over" or "unsure".
    pub along: &'static str,
    /// Across the handle: "left", "right", "centred" or "unsure".
    pub across: &'static str,
    /// +1 sonde to the left, −1 to the right, 0 centred or unsure.
    pub side: i8,
    /// Over the sonde in both directions.
    pub over: bool,
    /// Why a direction is unsure.
    pub unsure_reason: Option<&'static str>,
    /// What to do next.
    pub hint: &'static str,
    /// Distance ahead to the point over the sonde, m.
    pub ahead_m: Option<f64>,
    /// Its σ, m.
    pub ahead_sigma_m: Option<f64>,
    /// Distance to the left of the point over the sonde, m.
    pub left_m: Option<f64>,
    /// Its σ, m.
    pub left_sigma_m: Option<f64>,
    /// Gradient depth.
    pub gradient: Est,
    /// Known-moment depth.
    pub known_moment: Est,
    /// One-station fit depth.
    pub fit: Est,
    /// Fit offsets ahead and left, m.
    pub fit_offset_m: Option<[f64; 2]>,
    /// Depth shown, below the lower coil centre, m.
    pub depth_m: Option<f64>,
    /// Its σ, m.
    pub depth_sigma_m: Option<f64>,
    /// Depth shown, below the ground, m.
    pub depth_below_ground_m: Option<f64>,
    /// The method of the depth shown.
    pub depth_method: Option<&'static str>,
    /// Why no depth is shown.
    pub depth_withheld: Option<&'static str>,
    /// Tone offset, Hz.
    pub freq_offset_hz: f64,
    /// Its σ, Hz.
    pub freq_offset_sigma_hz: f64,
    /// Flags.
    pub flags: Vec<&'static str>,
    /// The fit over the trail of stations, when there is one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub trail: Option<TrailRow>,
    /// Truth (simulation only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub truth: Option<TruthRow>,
}

/// The trail fit, as printed.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct TrailRow {
    /// Stations in the fit.
    pub stations: u8,
    /// χ² of the readings over their degrees of freedom.
    pub chi2_per_dof: f64,
    /// Sonde pitch, degrees, and its σ.
    pub pitch_deg: f64,
    /// σ of the pitch, degrees.
    pub pitch_sigma_deg: f64,
    /// Sonde axis from the handle, degrees.
    pub yaw_deg: f64,
    /// Depth below the lower coil the fit finds (shown or not), m.
    pub depth_m: f64,
    /// Its σ, m.
    pub depth_sigma_m: f64,
    /// Another fit as good puts the sonde elsewhere ahead/behind.
    pub ambiguous_ahead: bool,
    /// … or left/right.
    pub ambiguous_left: bool,
    /// How much worse (χ²) the best explanation that puts the sonde elsewhere fits (null: none
    /// found).
    pub runner_up_chi2: Option<f64>,
    /// Head speed over the last stations, m/s.
    pub speed_m_s: f64,
}

/// Truth beside a readout.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct TruthRow {
    /// Receiver east, m.
    pub x_m: f64,
    /// Receiver north, m.
    pub y_m: f64,
    /// Handle heading, degrees.
    pub heading_deg: f64,
    /// Depth below the lower coil centre, m.
    pub depth_m: f64,
    /// Sonde ahead of the handle, m.
    pub ahead_m: f64,
    /// Sonde left of the handle, m.
    pub left_m: f64,
    /// Horizontal range, m.
    pub range_m: f64,
    /// Sonde axis bearing from the handle, degrees.
    pub axis_bearing_deg: f64,
    /// Sonde position (east, north, up), m.
    pub sonde_m: [f64; 3],
    /// Sonde ahead of the handle when the readout is shown (latest sample), m.
    pub ahead_shown_m: f64,
    /// Sonde left of the handle when the readout is shown, m.
    pub left_shown_m: f64,
    /// Receiver (east, north) when the readout is shown, m.
    pub at_shown_m: [f64; 2],
    /// Sonde (east, north, up) when the readout is shown, m.
    pub sonde_shown_m: [f64; 3],
}

impl From<Truth> for TruthRow {
    fn from(t: Truth) -> Self {
        TruthRow {
            x_m: t.pose.x_m,
            y_m: t.pose.y_m,
            heading_deg: t.pose.heading_rad.to_degrees(),
            depth_m: t.depth_m,
            ahead_m: t.ahead_m,
            left_m: t.left_m,
            range_m: t.range_m,
            axis_bearing_deg: t.axis_bearing_rad.to_degrees(),
            sonde_m: t.sonde_m,
            ahead_shown_m: t.ahead_m,
            left_shown_m: t.left_m,
            at_shown_m: [t.pose.x_m, t.pose.y_m],
            sonde_shown_m: t.sonde_m,
        }
    }
}

/// The truth at a readout's data centre and at the moment it is shown.
pub fn truth_row(at_data: Truth, at_shown: Truth) -> TruthRow {
    let mut t: TruthRow = at_data.into();
    t.ahead_shown_m = at_shown.ahead_m;
    t.left_shown_m = at_shown.left_m;
    t.at_shown_m = [at_shown.pose.x_m, at_shown.pose.y_m];
    t.sonde_shown_m = at_shown.sonde_m;
    t
}

/// What a readout's strength is measured against.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub enum Reference {
    /// Readings in tesla (a simulation): strength in nT, dB re 1 nT.
    Tesla,
    /// Readings in fractions of the converter's full scale (a replay): dB re full scale.
    FullScale,
}

impl Reference {
    /// The unit of `strength_db` after [`Reference::db`], as printed.
    pub fn db_unit(self) -> &'static str {
        match self {
            Reference::Tesla => "dB re 1 nT",
            Reference::FullScale => "dB re full scale",
        }
    }

    /// A level in reading units' dB (20·log10 of T or of full scale) in this reference's dB.
    pub fn db(self, reading_db: f64) -> f64 {
        match self {
            Reference::Tesla => reading_db + 180.0,
            Reference::FullScale => reading_db,
        }
    }

    /// Which reference a row was made with.
    pub fn of(row: &Row) -> Self {
        if row.field_nt.is_some() {
            Reference::Tesla
        } else {
            Reference::FullScale
        }
    }
}

/// Convert a readout of any head size; `reference` says what its readings are in.
pub fn row<const N: usize>(r: &Readout<N>, fs: f64, truth: Option<TruthRow>, reference: Reference) -> Row {
    let g = &r.guidance;
    let f64o = |v: Option<f32>| v.map(|v| v as f64);
    let shown = r.depth;
    // Why no depth: the reason of the first method the head has.
    let withheld =
        shown.is_none().then(|| [r.gradient, r.fit_depth, r.known_moment].iter().find_map(|e| e.err()).map(|w| w.name())).flatten();
    Row {
        t_s: r.t_s,
        t_latest_s: r.sample_index as f64 / fs,
        strength: r.strength as f64,
        strength_db: r.strength_db as f64,
        field_nt: (reference == Reference::Tesla).then_some(r.strength as f64 * 1e9),
        field_db_nt: (reference == Reference::Tesla).then_some(Reference::Tesla.db(r.strength_db as f64)),
        level_fs: (reference == Reference::FullScale).then_some(r.strength as f64),
        level_dbfs: (reference == Reference::FullScale).then_some(r.strength_db as f64),
        snr_db: r.snr_db as f64,
        signal: r.signal.name(),
        bearing_deg: r.bearing_deg as f64,
        state: r.state.name(),
        vertical_ratio: g.vertical_ratio as f64,
        direction: g.direction(),
        along: g.along.name(),
        across: g.across.name(),
        side: g.side(),
        over: g.over(),
        unsure_reason: g.why.map(|w| w.name()),
        hint: g.hint.name(),
        ahead_m: f64o(g.ahead.map(|d| d.value_m)),
        ahead_sigma_m: f64o(g.ahead.map(|d| d.sigma_m)),
        left_m: f64o(g.left.map(|d| d.value_m)),
        left_sigma_m: f64o(g.left.map(|d| d.sigma_m)),
        gradient: r.gradient.into(),
        known_moment: r.known_moment.into(),
        fit: r.fit_depth.into(),
        fit_offset_m: r.fix.filter(|f| f.converged && r.fit_depth.is_ok()).map(|f| [f.ahead_m.value as f64, f.left_m.value as f64]),
        depth_m: shown.map(|d| d.depth.depth_m as f64),
        depth_sigma_m: shown.map(|d| d.depth.sigma_m as f64),
        depth_below_ground_m: shown.map(|d| d.below_ground_m as f64),
        depth_method: shown.map(|d| d.method.name()),
        depth_withheld: withheld,
        freq_offset_hz: r.freq_offset_hz as f64,
        freq_offset_sigma_hz: r.freq_offset_sigma_hz as f64,
        flags: r.flags.names().collect(),
        trail: r.place.map(|p| TrailRow {
            stations: p.stations,
            chi2_per_dof: p.chi2 as f64 / p.dof.max(1) as f64,
            pitch_deg: (p.pitch_rad.value as f64).to_degrees(),
            pitch_sigma_deg: (p.pitch_rad.sigma as f64).to_degrees(),
            yaw_deg: (p.yaw_rad.value as f64).to_degrees(),
            depth_m: p.depth_m.value as f64,
            depth_sigma_m: p.depth_m.sigma as f64,
            ambiguous_ahead: p.ambiguous_ahead,
            ambiguous_left: p.ambiguous_left,
            runner_up_chi2: Some(p.runner_up_chi2 as f64).filter(|v| v.is_finite()),
            speed_m_s: p.speed_m_s as f64,
        }),
        truth,
    }
}

/// Detector settings from a scenario.
pub fn detector_settings(sc: &Scenario) -> DetectorSettings {
    sc.detector_settings()
}

/// Results of a simulated run.
pub struct SimRun {
    /// Readouts with truth.
    pub rows: Vec<Row>,
    /// Detector figures.
    pub info: undertone_dsp::DetectorInfo,
    /// Mains report.
    pub mains: undertone_dsp::detect::mains::MainsReport,
    /// Samples processed.
    pub samples: u64,
    /// What the board's screen shows of each readout (same order as `rows`).
    pub views: Vec<undertone_firmware::view::View>,
}

/// Run a scenario (optionally with another noise seed and bandwidth).
pub fn simulate(sc: &Scenario, seed: Option<u64>, bandwidth_hz: Option<f32>) -> Result<SimRun> {
    simulate_shown(sc, seed, bandwidth_hz, false)
}

/// As [`simulate`], with a progress bar on a terminal's stderr when `progress` and the run is long.
pub fn simulate_shown(sc: &Scenario, seed: Option<u64>, bandwidth_hz: Option<f32>, progress: bool) -> Result<SimRun> {
    let mut rows = Vec::new();
    let mut views = Vec::new();
    let mut bar = progress.then(|| crate::progress::Progress::new((sc.duration_s() * sc.receiver.sample_rate_hz) as u64, "samples"));
    let mut run = match sc.coils() {
        6 => simulate_n::<6>(sc, Head::triads6(), seed, bandwidth_hz, &mut |r| rows.push(r), Some(&mut views), bar.as_mut())?,
        _ => simulate_n::<4>(sc, Head::reference4(), seed, bandwidth_hz, &mut |r| rows.push(r), Some(&mut views), bar.as_mut())?,
    };
    run.rows = rows;
    run.views = views;
    Ok(run)
}

/// Run a scenario, handing each readout row to `on` as it is made and keeping
/// none (the returned run's `rows` is empty): memory stays flat however long the run.
pub fn simulate_each(sc: &Scenario, seed: Option<u64>, bandwidth_hz: Option<f32>, on: &mut dyn FnMut(Row)) -> Result<SimRun> {
    match sc.coils() {
        6 => simulate_n::<6>(sc, Head::triads6(), seed, bandwidth_hz, on, None, None),
        _ => simulate_n::<4>(sc, Head::reference4(), seed, bandwidth_hz, on, None, None),
    }
}

/// Receiver settings for a scenario with head `head` (validated when the receiver is built).
pub fn receiver_settings<const N: usize>(sc: &Scenario, head: Head<N>, bandwidth_hz: Option<f32>) -> ReceiverSettings<N> {
    let mut det = detector_settings(sc);
    if let Some(b) = bandwidth_hz {
        det.bandwidth_hz = b;
    }
    let mut input = InputScale::<N>::unity(sc.receiver.adc_bits);
    let fsc = input.full_scale_code as f64;
    input.scale = [(sc.receiver.full_scale_t / fsc) as f32; N];
    let mut s = ReceiverSettings::new(det, input, head);
    s.locator.skin_depth_m = crate::physics::skin_depth_m(det.beacon.freq_hz() as f64, sc.receiver.assume_conductivity_s_per_m) as f32;
    if let Some(g) = sc.receiver.gain_tolerance {
        s.locator.gain_tolerance = g as f32;
    }
    s.locator.coil_height_m = sc.receiver.height_m as f32;
    s
}

/// Frames synthesised and fed to the receiver at a time. Any length gives the
/// same readouts: the synthesis and the receiver are both independent of how
/// the stream is cut, so a walk equals the replay of its recording.
const CHUNK_FRAMES: usize = 1024;

fn simulate_n<const N: usize>(
    sc: &Scenario,
    head: Head<N>,
    seed: Option<u64>,
    bw: Option<f32>,
    on: &mut dyn FnMut(Row),
    mut views: Option<&mut Vec<undertone_firmware::view::View>>,
    mut progress: Option<&mut crate::progress::Progress>,
) -> Result<SimRun> {
    let mut s = receiver_settings(sc, head, bw);
    crate::calibrate::apply(sc, &mut s)?;
    let mut rx = Receiver::new(s).map_err(|err| SimError::Config { context: format!("scenario '{}'", sc.name), err })?;
    let mut synth = Synth::new(sc, seed);
    let ctx = crate::screens::context(sc, &s);
    let mut block = vec![[0i32; N]; CHUNK_FRAMES];
    loop {
        let got = synth.fill_codes(&mut block);
        if got == 0 {
            break;
        }
        if let Some(p) = progress.as_mut() {
            p.set(synth.position());
        }
        rx.push_codes_block(&block[..got], |r| {
            let shown = r.sample_index as f64 / synth.fs;
            if let Some(v) = views.as_mut() {
                v.push(undertone_firmware::view::View::from_readout(&r, &ctx));
            }
            on(row(&r, synth.fs, Some(truth_row(synth.truth(r.t_s.max(0.0)), synth.truth(shown))), Reference::Tesla))
        });
    }
    Ok(SimRun { rows: Vec::new(), info: *rx.detector_info(), mains: rx.detector().mains(), samples: synth.position(), views: Vec::new() })
}

/// Run the receiver on recorded frames (codes), no truth.
pub fn replay_codes<const N: usize>(settings: ReceiverSettings<N>, frames: impl Iterator<Item = [i32; N]>) -> Result<SimRun> {
    replay_with(settings, frames, |rx, f| rx.push_codes(f))
}

/// Run the receiver on recorded f32 frames, no truth.
pub fn replay_floats<const N: usize>(settings: ReceiverSettings<N>, frames: impl Iterator<Item = [f32; N]>) -> Result<SimRun> {
    replay_with(settings, frames, |rx, f| rx.push(f))
}

fn replay_with<const N: usize, F>(
    settings: ReceiverSettings<N>,
    frames: impl Iterator<Item = F>,
    mut push: impl FnMut(&mut Receiver<N>, &F) -> Option<Readout<N>>,
) -> Result<SimRun> {
    let fs = settings.detector.sample_rate_hz as f64;
    let mut rx = Receiver::new(settings).map_err(|err| SimError::Config { context: "replay".into(), err })?;
    let mut rows = Vec::new();
    let mut samples = 0u64;
    for f in frames {
        samples += 1;
        if let Some(r) = push(&mut rx, &f) {
            rows.push(row(&r, fs, None, Reference::FullScale));
        }
    }
    Ok(SimRun { rows, info: *rx.detector_info(), mains: rx.detector().mains(), samples, views: Vec::new() })
}
