//! Which way to walk: the answers shown to the person, each either a direction
//! or "unsure" with the reason, and what to do next.
//!
//! Directions are in the head's frame: *ahead* is along the handle (the along
//! coil's axis, x), *left* is the across coil's axis (y). The point over the
//! sonde is where a spade should go in; "over" is claimed only when the receiver
//! is within the over tolerance of it in both directions (the tolerance is
//! `max(0.15 m, 0.1·depth)`, the precision a person digging can use; common
//! practice, no published source), with the uncertainty of the estimate taken
//! into account (the estimate ± 2σ lies inside the tolerance, and the estimate
//! itself within 0.6 of it for what the σ does not cover), with the head still
//! and the signal good (the locator's `OVER_MARGIN` and `OVER_SETTLE_S`).

use crate::locate::depth::Withheld;

/// Where the point over the sonde lies along the handle.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Along {
    /// Ahead of the receiver (walk forward).
    Ahead,
    /// Behind the receiver (walk back).
    Behind,
    /// Within the over tolerance along the axis.
    Over,
    /// Not known; [`Guidance::why`] says why.
    Unsure,
}

/// Where the point over the sonde lies across the handle.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Across {
    /// To the left of the handle.
    Left,
    /// To the right of the handle.
    Right,
    /// Within the over tolerance across the axis.
    Centred,
    /// Not known; [`Guidance::why`] says why.
    Unsure,
}

impl Along {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Along::Ahead => "ahead",
            Along::Behind => "behind",
            Along::Over => "over",
            Along::Unsure => "unsure",
        }
    }
}

impl Across {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Across::Left => "left",
            Across::Right => "right",
            Across::Centred => "centred",
            Across::Unsure => "unsure",
        }
    }
}

/// What the person should do next (our own plain words).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Hint {
    /// Nothing to go by yet: wait (settling) or check the beacon and frequency.
    Wait,
    /// Turn the receiver until it reads in line with the sonde axis.
    TurnInLine,
    /// Walk forward along the handle.
    WalkAhead,
    /// Walk back along the handle.
    WalkBack,
    /// Walk slowly along the handle, either way, keeping its heading: the
    /// receiver needs the change of the field to tell which side the sonde is.
    WalkAlong,
    /// The field is getting weaker the way you are going: go the other way.
    WalkOtherWay,
    /// Step to the left, keeping the heading.
    StepLeft,
    /// Step to the right, keeping the heading.
    StepRight,
    /// One leg of a sweep along the handle (the receiver needs to see the field
    /// change): walk the distance shown ([`Guidance::move_m`]), keeping the heading, and stop.
    SweepAlong,
    /// One leg of a sweep across: step the distance shown sideways, keeping the heading, and stop.
    SweepAcross,
    /// Over the sonde: hold still and read the depth.
    HoldStill,
}

impl Hint {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Hint::Wait => "wait",
            Hint::TurnInLine => "turn-in-line",
            Hint::WalkAhead => "walk-ahead",
            Hint::WalkBack => "walk-back",
            Hint::WalkAlong => "walk-along",
            Hint::WalkOtherWay => "walk-other-way",
            Hint::StepLeft => "step-left",
            Hint::StepRight => "step-right",
            Hint::SweepAlong => "sweep-along",
            Hint::SweepAcross => "sweep-across",
            Hint::HoldStill => "hold-still",
        }
    }
}

/// A distance with its one-sigma uncertainty, m.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Distance {
    /// Value, m.
    pub value_m: f32,
    /// One-sigma, m.
    pub sigma_m: f32,
}

/// Guidance for one readout.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Guidance {
    /// Along the handle.
    pub along: Along,
    /// Across the handle.
    pub across: Across,
    /// Distance ahead (negative: behind) along the handle to the point over the sonde, when known.
    pub ahead: Option<Distance>,
    /// Distance to the left (negative: right) of the handle, when known.
    pub left: Option<Distance>,
    /// Why a direction is unsure (None when both are known).
    pub why: Option<Withheld>,
    /// What to do next.
    pub hint: Hint,
    /// Vertical over horizontal field at the lower coils, `Bz/|Bh|` (sign: the
    /// horizontal field taken facing forward).
    pub vertical_ratio: f32,
    /// The move asked for, when the hint is a move of a set distance: metres
    /// along the hint's own axis (ahead for walks and sweeps along, left for
    /// steps and sweeps across; negative: back or right). Walk it, then stop.
    pub move_m: Option<f32>,
    /// Changes with every new move asked for (so a move is made once).
    pub move_id: u16,
}

impl Guidance {
    /// Nothing known, for `why`.
    pub const fn unsure(why: Withheld, hint: Hint) -> Self {
        Guidance {
            along: Along::Unsure,
            across: Across::Unsure,
            ahead: None,
            left: None,
            why: Some(why),
            hint,
            vertical_ratio: 0.0,
            move_m: None,
            move_id: 0,
        }
    }

    /// Over the sonde in both directions.
    pub fn over(&self) -> bool {
        self.along == Along::Over && self.across == Across::Centred
    }

    /// +1 sonde ahead along the handle, −1 behind, 0 over or unsure.
    pub fn direction(&self) -> i8 {
        match self.along {
            Along::Ahead => 1,
            Along::Behind => -1,
            _ => 0,
        }
    }

    /// +1 sonde to the left, −1 to the right, 0 centred or unsure.
    pub fn side(&self) -> i8 {
        match self.across {
            Across::Left => 1,
            Across::Right => -1,
            _ => 0,
        }
    }
}

/// The over tolerance for a depth (m): `max(0.15 m, 0.1·depth)`.
pub fn over_tolerance_m(depth_m: f32) -> f32 {
    (0.1 * depth_m).max(OVER_TOLERANCE_M)
}

/// Smallest over tolerance, m.
pub const OVER_TOLERANCE_M: f32 = 0.15;

/// Distance ahead of the receiver to the point over a level dipole, from the
/// vertical ratio ρ = Bz/Bx measured along its axis and the depth h, on the
/// branch inside the nulls: `ρ = −3u/(1 − 2u²)` with `u = x/h` the receiver's
/// offset past the sonde (Griffiths eq. 5.89), so `u = (3 − √(9 + 8ρ²))/(4ρ)`
/// and the point over the sonde is `−u·h` ahead.
pub fn offset_from_ratio(ratio: f32, depth_m: f32) -> f32 {
    if libm::fabsf(ratio) < 1e-6 {
        return 0.0;
    }
    -depth_m * (3.0 - libm::sqrtf(9.0 + 8.0 * ratio * ratio)) / (4.0 * ratio)
}
