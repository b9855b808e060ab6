//! Readout flags: a small bit set naming what is doubtful about a readout.

/// Bit set of conditions attached to a detection or readout.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Flags(pub u32);

impl Flags {
    /// No condition.
    pub const NONE: Flags = Flags(0);
    /// A channel reached full scale during the readout interval.
    pub const CLIPPED: Flags = Flags(1 << 0);
    /// A NaN or infinite sample was seen and replaced by zero.
    pub const NON_FINITE: Flags = Flags(1 << 1);
    /// The detector has not yet settled (less than its 99 % settling time since start).
    pub const SETTLING: Flags = Flags(1 << 2);
    /// The settings reject a neighbouring mains harmonic by less than 60 dB.
    pub const MAINS: Flags = Flags(1 << 3);
    /// The tone is off the set frequency by more than a quarter of the bandwidth.
    pub const OFF_FREQUENCY: Flags = Flags(1 << 4);
    /// No beacon tone: the field is below the detection threshold (noise only,
    /// wrong frequency, or no input). Nothing is located.
    pub const NO_SIGNAL: Flags = Flags(1 << 5);
    /// Large quadrature part: interference, eddy currents or nearby metal.
    pub const QUADRATURE: Flags = Flags(1 << 6);
    /// The one-station fit residual is large: the field is not a clean dipole.
    pub const DISTORTED: Flags = Flags(1 << 7);
    /// Samples were dropped before they reached the receiver (queue overrun).
    pub const OVERRUN: Flags = Flags(1 << 8);
    /// A tone, but below the SNR needed for a depth (the locator's `locate_snr_db`, 20 dB by default).
    pub const WEAK: Flags = Flags(1 << 9);

    /// Names in bit order, for printing.
    pub const NAMES: [(Flags, &'static str); 10] = [
        (Flags::CLIPPED, "clipped"),
        (Flags::NON_FINITE, "non-finite"),
        (Flags::SETTLING, "settling"),
        (Flags::MAINS, "mains"),
        (Flags::OFF_FREQUENCY, "off-frequency"),
        (Flags::NO_SIGNAL, "no-signal"),
        (Flags::QUADRATURE, "quadrature"),
        (Flags::DISTORTED, "distorted"),
        (Flags::OVERRUN, "overrun"),
        (Flags::WEAK, "weak"),
    ];

    /// True when every bit of `other` is set.
    pub const fn contains(self, other: Flags) -> bool {
        self.0 & other.0 == other.0
    }

    /// Set the bits of `other` when `on`.
    pub fn set(&mut self, other: Flags, on: bool) {
        if on {
            self.0 |= other.0;
        } else {
            self.0 &= !other.0;
        }
    }

    /// Union.
    pub const fn union(self, other: Flags) -> Flags {
        Flags(self.0 | other.0)
    }

    /// Names of the set bits.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        Flags::NAMES.into_iter().filter(move |(f, _)| self.contains(*f)).map(|(_, n)| n)
    }
}
