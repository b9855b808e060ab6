//! Faults of the sample path and what to do about them.
//!
//! The converter delivers a frame every `1/fs`; if none arrives for
//! [`STALL_MS`], or [`MAX_BAD_FRAMES`] frames in a row fail their CRC, the
//! firmware enters the reported fault state and re-initialises the converter,
//! retrying every [`RETRY_MS`]. Times are milliseconds of the monotonic
//! 64-bit clock ([`crate::clock::Uptime`]), which does not wrap.

/// No frame for this long is a stall, ms.
pub const STALL_MS: u64 = 100;
/// This many bad frames in a row is a fault.
pub const MAX_BAD_FRAMES: u32 = 16;
/// Time between re-initialisation attempts, ms.
pub const RETRY_MS: u64 = 500;

/// The state of the sample path.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PathState {
    /// Frames arriving.
    Running,
    /// No usable frames: the converter is being re-initialised.
    Fault {
        /// Re-initialisation attempts so far.
        retries: u32,
    },
}

/// What the main loop should do now.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Action {
    /// Carry on.
    None,
    /// Re-initialise the converter (and report the fault).
    Reinit,
}

/// Watches the sample path.
#[derive(Clone, Copy, Debug)]
pub struct Supervisor {
    /// State.
    pub state: PathState,
    last_frame_ms: u64,
    last_try_ms: u64,
    bad_in_row: u32,
}

impl Supervisor {
    /// Start watching at `now_ms`.
    pub fn new(now_ms: u64) -> Self {
        Self { state: PathState::Running, last_frame_ms: now_ms, last_try_ms: now_ms, bad_in_row: 0 }
    }

    /// A good frame arrived.
    pub fn good_frame(&mut self, now_ms: u64) {
        self.last_frame_ms = now_ms;
        self.bad_in_row = 0;
        self.state = PathState::Running;
    }

    /// `n` frames failed (CRC, SPI error).
    pub fn bad_frames(&mut self, n: u32) {
        self.bad_in_row = self.bad_in_row.saturating_add(n);
    }

    /// Check at `now_ms`.
    pub fn poll(&mut self, now_ms: u64) -> Action {
        let stalled = now_ms.saturating_sub(self.last_frame_ms) > STALL_MS;
        let bad = self.bad_in_row >= MAX_BAD_FRAMES;
        match self.state {
            PathState::Running if stalled || bad => {
                self.state = PathState::Fault { retries: 1 };
                self.last_try_ms = now_ms;
                self.bad_in_row = 0;
                Action::Reinit
            }
            PathState::Fault { retries } if now_ms.saturating_sub(self.last_try_ms) >= RETRY_MS => {
                self.state = PathState::Fault { retries: retries.saturating_add(1) };
                self.last_try_ms = now_ms;
                self.bad_in_row = 0;
                Action::Reinit
            }
            _ => Action::None,
        }
    }
}
