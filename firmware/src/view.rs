//! What the screen shows of a readout: a small, hardware-free view model.
//!
//! [`View::from_readout`] is the one place that reads a `Readout`'s fields for
//! the screen; the drawing code ([`crate::screen`]) reads only the view. No
//! locating decision is made here: the direction, "over", "unsure" and the
//! depth with its σ or the reason it is withheld are the locator's, passed on.
//!
//! Strength is shown in dB relative to the converter's full scale (dBFS, the
//! input referred to gain ×1), so that the number means the same on the board
//! and in the simulator; the bar places it between the noise floor (empty,
//! `strength − SNR`) and full scale (full).

use crate::battery::BatteryView;
use undertone_dsp::format::LengthUnit;
use undertone_dsp::locate::depth::Withheld;
use undertone_dsp::locate::guidance::{Across, Along, Hint};
use undertone_dsp::locate::locator::Signal;
use undertone_dsp::locate::orientation::Orientation;
use undertone_dsp::{Flags, Readout};

/// What the view needs besides the readout.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ViewContext {
    /// Units for lengths.
    pub units: LengthUnit,
    /// Beacon frequency set, Hz.
    pub beacon_hz: f32,
    /// 20·log10 of the converter's full scale in the readout's reading units (0 on the board,
    /// where readings are fractions of full scale).
    pub full_scale_db: f32,
    /// The battery, when there is a reading.
    pub battery: Option<BatteryView>,
    /// The converter is being restarted after a fault.
    pub fault: bool,
    /// The tone is muted.
    pub muted: bool,
}

/// The depth line.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum DepthLine {
    /// A depth below the ground with its one-sigma, m.
    Shown {
        /// Below the ground, m.
        below_ground_m: f32,
        /// One-sigma, m.
        sigma_m: f32,
    },
    /// Withheld, with the reason.
    Withheld(Withheld),
}

/// Warnings, most urgent first.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Warning {
    /// The converter is being restarted.
    Fault,
    /// A channel clipped.
    Clipped,
    /// The battery is flat (settings are no longer saved).
    BatteryFlat,
    /// The battery is low.
    BatteryLow,
    /// No beacon tone.
    NoSignal,
    /// Mains rejection below 60 dB at these settings.
    Mains,
    /// Samples were dropped.
    Overrun,
}

impl Warning {
    /// The word shown.
    pub fn text(self) -> &'static str {
        match self {
            Warning::Fault => "ADC FAULT",
            Warning::Clipped => "CLIPPED",
            Warning::BatteryFlat => "BATT FLAT",
            Warning::BatteryLow => "BATT LOW",
            Warning::NoSignal => "NO SIGNAL",
            Warning::Mains => "MAINS",
            Warning::Overrun => "OVERRUN",
        }
    }
}

/// Everything the locating screen shows.
#[derive(Clone, Debug, PartialEq)]
pub struct View {
    /// Time of the readout, s.
    pub t_s: f64,
    /// Strength, dBFS (None without a tone).
    pub strength_dbfs: Option<f32>,
    /// Bar fill, 0–1: the strength between the noise floor and full scale.
    pub bar: f32,
    /// Orientation.
    pub orientation: Orientation,
    /// Along the handle.
    pub along: Along,
    /// Across the handle.
    pub across: Across,
    /// What to do next.
    pub hint: Hint,
    /// Depth or why not.
    pub depth: DepthLine,
    /// Beacon, Hz.
    pub beacon_hz: f32,
    /// Units.
    pub units: LengthUnit,
    /// Battery.
    pub battery: Option<BatteryView>,
    /// Warnings in force, most urgent first.
    pub warnings: heapless::Vec<Warning, 7>,
    /// The tone is muted.
    pub muted: bool,
}

impl View {
    /// The view of readout `r`.
    pub fn from_readout<const N: usize>(r: &Readout<N>, ctx: &ViewContext) -> Self {
        let g = &r.guidance;
        let tone = r.signal != Signal::Absent;
        let strength_dbfs = tone.then_some(r.strength_db - ctx.full_scale_db);
        let bar = match strength_dbfs {
            Some(s) if r.snr_db > 0.0 && s < 0.0 => (r.snr_db / (r.snr_db - s)).clamp(0.0, 1.0),
            Some(s) if s >= 0.0 => 1.0,
            _ => 0.0,
        };
        let depth = match r.depth {
            Some(d) => DepthLine::Shown { below_ground_m: d.below_ground_m, sigma_m: d.depth.sigma_m },
            // The reason of the first method the head has (the gradient on a 4-coil head).
            None => DepthLine::Withheld(
                [r.gradient, r.fit_depth, r.known_moment]
                    .iter()
                    .find_map(|e| e.err().filter(|w| *w != Withheld::NoCoils))
                    .unwrap_or(Withheld::NoCoils),
            ),
        };
        let mut warnings = heapless::Vec::new();
        let battery_level = ctx.battery.map(|b| b.level);
        for (on, w) in [
            (ctx.fault, Warning::Fault),
            (r.flags.contains(Flags::CLIPPED), Warning::Clipped),
            (battery_level == Some(crate::battery::Level::Flat), Warning::BatteryFlat),
            (battery_level == Some(crate::battery::Level::Low), Warning::BatteryLow),
            (r.signal == Signal::Absent, Warning::NoSignal),
            (r.flags.contains(Flags::MAINS), Warning::Mains),
            (r.flags.contains(Flags::OVERRUN), Warning::Overrun),
        ] {
            if on {
                let _ = warnings.push(w);
            }
        }
        View {
            t_s: r.t_s,
            strength_dbfs,
            bar,
            orientation: r.state,
            along: g.along,
            across: g.across,
            hint: g.hint,
            depth,
            beacon_hz: ctx.beacon_hz,
            units: ctx.units,
            battery: ctx.battery,
            warnings,
            muted: ctx.muted,
        }
    }

    /// Over the sonde in both directions.
    pub fn over(&self) -> bool {
        self.along == Along::Over && self.across == Across::Centred
    }
}

/// Plain words for the screen (at most 13 characters).
pub fn withheld_text(w: Withheld) -> &'static str {
    match w {
        Withheld::NoSignal => "no signal",
        Withheld::LowSnr => "weak signal",
        Withheld::Settling => "settling",
        Withheld::Clipped => "clipped",
        Withheld::NoCoils => "no coils",
        Withheld::NotInLine => "turn in line",
        Withheld::NotOver => "not over",
        Withheld::LateralUnknown => "side unknown",
        Withheld::SecondaryPeak => "side peak",
        Withheld::BadRatio => "bad ratio",
        Withheld::NotCalibrated => "no calibr.",
        Withheld::BadInput => "bad input",
        Withheld::NoFit => "no fit",
        Withheld::IllConditioned => "ill-posed",
        Withheld::Distorted => "distorted",
        Withheld::Uncertain => "too unsure",
        Withheld::NeedsMotion => "walk along",
        Withheld::Ambiguous => "two answers",
        Withheld::Moving => "stand still",
    }
}

/// Plain words for what to do next (at most 25 characters).
pub fn hint_text(h: Hint) -> &'static str {
    match h {
        Hint::Wait => "wait",
        Hint::TurnInLine => "turn to peak",
        Hint::WalkAhead => "walk ahead",
        Hint::WalkBack => "walk back",
        Hint::WalkAlong => "walk slowly along",
        Hint::WalkOtherWay => "go the other way",
        Hint::StepLeft => "step left",
        Hint::StepRight => "step right",
        Hint::SweepAlong => "sweep a little along",
        Hint::SweepAcross => "sweep side to side",
        Hint::HoldStill => "over it: hold still",
    }
}

/// Plain words for an orientation (at most 7 characters).
pub fn orientation_text(o: Orientation) -> &'static str {
    match o {
        Orientation::InLine => "in line",
        Orientation::Crossed => "crossed",
        Orientation::Between => "between",
        Orientation::Unknown => "--",
    }
}
