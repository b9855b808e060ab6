//! A person doing what the receiver asks, for tests at the detection level.
//!
//! The head keeps its heading along the sonde axis (world x); "ahead" is +x and
//! "left" is +y. A move of a set distance (the guidance's `move_m`, made once per
//! `move_id`) is walked at 0.2 m/s and followed by a 0.8 s pause; "walk along"
//! without a distance walks ahead at 0.3 m/s; everything else stands.

use undertone_dsp::locate::guidance::{Guidance, Hint};

/// Where the person is and what they are doing.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Operator {
    /// Position along the sonde axis, m (the sonde at 0).
    pub x: f32,
    /// Position across it, m.
    pub y: f32,
    done: u16,
    to_go: f32,
    dir: (f32, f32),
    pause: f32,
}

/// Pace of a move of a set distance, m/s.
pub const MOVE_M_S: f32 = 0.2;
/// Pause after a move, s.
pub const PAUSE_S: f32 = 0.8;

impl Operator {
    /// A person standing at (x, y).
    pub fn new(x: f32, y: f32) -> Self {
        Self { x, y, done: 0, to_go: 0.0, dir: (0.0, 0.0), pause: 0.0 }
    }

    /// Act on the guidance shown for `dt` seconds; the position afterwards.
    pub fn step(&mut self, g: &Guidance, dt: f32) -> (f32, f32) {
        if self.to_go <= 0.0 && self.pause <= 0.0 {
            if let Some(m) = g.move_m.filter(|_| g.move_id != self.done) {
                self.done = g.move_id;
                let across = matches!(g.hint, Hint::StepLeft | Hint::StepRight | Hint::SweepAcross);
                self.dir = if across { (0.0, m.signum()) } else { (m.signum(), 0.0) };
                self.to_go = m.abs();
            } else if g.move_m.is_none() && g.hint == Hint::WalkAlong {
                self.x += 0.3 * dt;
            }
        }
        if self.to_go > 0.0 {
            let d = (MOVE_M_S * dt).min(self.to_go);
            self.x += self.dir.0 * d;
            self.y += self.dir.1 * d;
            self.to_go -= d;
            if self.to_go <= 0.0 {
                self.pause = PAUSE_S;
            }
        } else if self.pause > 0.0 {
            self.pause -= dt;
        }
        (self.x, self.y)
    }
}

/// What the receiver showed at each readout of a closed loop, and where the head was.
#[derive(Clone, Copy, Debug)]
pub struct Shown<const N: usize> {
    /// Position of the head when the readout's data were taken, m (along, across the sonde axis).
    pub x: f32,
    /// Across, m.
    pub y: f32,
    /// The readout.
    pub readout: undertone_dsp::Readout<N>,
}

/// A closed loop at the detection level: a person starting at `start` does what the
/// receiver asks, one readout every `dt_s`, for at most `seconds` or until `done` says
/// so. `detect(x, y, t_s)` gives the detection at a position.
pub fn follow<const N: usize>(
    rx: &mut undertone_dsp::Receiver<N>,
    start: (f32, f32),
    dt_s: f64,
    seconds: f64,
    mut detect: impl FnMut(f32, f32, f64) -> undertone_dsp::Detection<N>,
    mut done: impl FnMut(&[Shown<N>]) -> bool,
) -> Vec<Shown<N>> {
    let mut op = Operator::new(start.0, start.1);
    let (mut x, mut y) = start;
    let mut out = Vec::new();
    let mut t = 0.0;
    while t < seconds {
        let r = rx.locate(&detect(x, y, t));
        out.push(Shown { x, y, readout: r });
        if done(&out) {
            break;
        }
        (x, y) = op.step(&r.guidance, dt_s as f32);
        t += dt_s;
    }
    out
}
