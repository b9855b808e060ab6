//! A monotonic millisecond clock that cannot wrap in the field.
//!
//! The board's free-running counters are 32 bits wide: the DWT cycle counter at
//! 100 MHz wraps every 2³²/10⁸ s = 42.9 s. [`Uptime`] extends such a counter to
//! 64-bit milliseconds: each reading adds the wrapping difference from the last
//! one (`Δ = now − last mod 2³²`), carries whole milliseconds and keeps the
//! remainder in counter ticks, so no tick is lost and the sum is exact. It must be
//! read at least once per counter period (the main loop runs every few
//! milliseconds and the watchdog resets the board if it stops for 500 ms).
//! 2⁶⁴ ms is 5.8·10⁸ years.

/// Milliseconds since start from a wrapping 32-bit tick counter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Uptime {
    ticks_per_ms: u32,
    last: u32,
    rem: u32,
    ms: u64,
}

impl Uptime {
    /// Start at `now` (raw counter value) with `ticks_per_ms` counter ticks per millisecond
    /// (100 000 for the cycle counter at 100 MHz; at least 1).
    pub fn new(ticks_per_ms: u32, now: u32) -> Self {
        Self { ticks_per_ms: ticks_per_ms.max(1), last: now, rem: 0, ms: 0 }
    }

    /// Take a new counter reading; milliseconds since start.
    pub fn update(&mut self, now: u32) -> u64 {
        let d = now.wrapping_sub(self.last);
        self.last = now;
        // rem < ticks_per_ms, so rem + d cannot overflow when split this way.
        let whole = d / self.ticks_per_ms;
        let part = d % self.ticks_per_ms;
        self.ms += whole as u64;
        self.rem += part;
        if self.rem >= self.ticks_per_ms {
            self.rem -= self.ticks_per_ms;
            self.ms += 1;
        }
        self.ms
    }

    /// Milliseconds since start at the last reading.
    pub fn ms(&self) -> u64 {
        self.ms
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn carries_through_many_counter_wraps() {
        // 100 MHz cycle counter read every 7.3 ms (an odd step) for 3 wraps and a bit.
        let mut raw = 0xFFFF_0000u32;
        let mut u = Uptime::new(100_000, raw);
        let step = 730_000u32;
        let n = 20_000u64;
        for _ in 0..n {
            raw = raw.wrapping_add(step);
            u.update(raw);
        }
        assert_eq!(u.ms(), n * step as u64 / 100_000);
    }
}
