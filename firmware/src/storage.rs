//! Settings and calibration kept in the last flash sector.
//!
//! The sector is a log of fixed-size slots. Each save writes the next erased
//! slot; only when the sector is full is it erased and the log restarted. A
//! slot holds a 12-byte header (magic "UTSR", record version u16, payload
//! length u16, sequence number u32, little-endian), the payload (the settings
//! as a [`postcard`] record, [`Record`]) and the CRC-32 of everything before it.
//! Loading takes the good slot (magic and CRC) with the highest sequence
//! number. So a power cut while a slot is being written leaves that slot bad
//! and the one before it in force; a cut during or right after the erase of a
//! full sector leaves the newest record that survived, or none, and the
//! defaults come back — and the firmware says which of these happened
//! ([`LoadOutcome`]). The application refuses to save on a flat battery.
//!
//! Storage goes through `embedded-storage`'s `NorFlash`, so it is tested on the
//! host with an in-memory flash that can cut the power at any write step.

use crate::crc::crc32;
use crate::settings::Settings;
use embedded_storage::nor_flash::{NorFlash, ReadNorFlash};
use serde::{Deserialize, Serialize};
use undertone_dsp::field::head::{Coil, Roles};
use undertone_dsp::format::LengthUnit;
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::{DetectorKind, Head, Window};

/// Magic at the start of every record.
pub const MAGIC: [u8; 4] = *b"UTSR";
/// Record layout version written by this firmware (2: postcard payload, sequence number).
pub const VERSION: u16 = 2;
/// Bytes per slot.
pub const SLOT: usize = 512;
/// Header bytes before the payload.
pub const HEADER: usize = 12;

/// What loading found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LoadOutcome {
    /// A good record in this slot.
    Loaded {
        /// Slot index.
        slot: u32,
    },
    /// No record at all (new board, or power cut after an erase): defaults.
    Empty,
    /// Records present but none with a good CRC: defaults.
    Corrupt,
    /// The newest good record is of another layout version: defaults.
    OtherVersion {
        /// Version found.
        found: u16,
    },
    /// A good record whose values do not decode: defaults.
    Invalid,
}

/// Storage failures.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StoreError {
    /// The flash reported an error.
    Flash,
    /// What was written does not read back the same.
    Verify,
    /// The region is smaller than one slot.
    TooSmall,
    /// The settings do not fit a slot (more coils than a record holds).
    Encode,
}

/// One coil as stored.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CoilRecord {
    /// Position, m.
    pub pos_m: [f32; 3],
    /// Unit axis.
    pub axis: [f32; 3],
    /// Relative gain.
    pub gain: f32,
}

/// The stored form of [`Settings`]: plain fields, encoded with postcard.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// Beacon, Hz.
    pub beacon_hz: f32,
    /// Bandwidth, Hz (None: the preset's).
    pub bandwidth_hz: Option<f32>,
    /// 0 lock-in, 1 block.
    pub detector: u8,
    /// Poles (lock-in) or window 0 rect / 1 Hann / 2 Blackman–Harris (block).
    pub detector_param: u8,
    /// Readouts per second.
    pub readout_hz: f32,
    /// Feet and inches on the screen and in replies.
    pub imperial: bool,
    /// The coils (at most 8).
    pub coils: heapless::Vec<CoilRecord, 8>,
    /// Roles: lower x, y, z, upper x, y, z (0xFF: none).
    pub roles: [u8; 6],
    /// Calibration: upper-coil gain, strength, its σ.
    pub calibration: [f32; 3],
    /// Coil height above the ground, m.
    pub coil_height_m: f32,
    /// Calibration and check distance, m.
    pub check_distance_m: f32,
}

impl Record {
    /// The stored form of `s`.
    pub fn from_settings<const N: usize>(s: &Settings<N>) -> Option<Self> {
        let (detector, detector_param) = match s.kind {
            DetectorKind::LockIn { poles } => (0, poles),
            DetectorKind::Block { window } => (1, window as u8),
        };
        let mut coils = heapless::Vec::new();
        for c in &s.head.coils {
            coils.push(CoilRecord { pos_m: c.pos_m, axis: c.axis, gain: c.gain }).ok()?;
        }
        let mut roles = [0xFF; 6];
        for (r, v) in roles.iter_mut().zip(s.head.roles.lower.iter().chain(s.head.roles.upper.iter())) {
            *r = v.unwrap_or(0xFF);
        }
        Some(Record {
            beacon_hz: s.beacon_hz,
            bandwidth_hz: s.bandwidth_hz,
            detector,
            detector_param,
            readout_hz: s.readout_hz,
            imperial: s.units == LengthUnit::FeetInches,
            coils,
            roles,
            calibration: [s.calibration.upper_gain, s.calibration.strength, s.calibration.strength_sigma],
            coil_height_m: s.coil_height_m,
            check_distance_m: s.check_distance_m,
        })
    }

    /// The settings, if this record is one for `N` coils with known detector codes.
    pub fn to_settings<const N: usize>(&self) -> Option<Settings<N>> {
        if self.coils.len() != N {
            return None;
        }
        let kind = match (self.detector, self.detector_param) {
            (0, p @ 1..=4) => DetectorKind::LockIn { poles: p },
            (1, 0) => DetectorKind::Block { window: Window::Rectangular },
            (1, 1) => DetectorKind::Block { window: Window::Hann },
            (1, 2) => DetectorKind::Block { window: Window::BlackmanHarris4 },
            _ => return None,
        };
        let mut coils = [Coil { pos_m: [0.0; 3], axis: [1.0, 0.0, 0.0], gain: 1.0 }; N];
        for (c, r) in coils.iter_mut().zip(self.coils.iter()) {
            *c = Coil { pos_m: r.pos_m, axis: r.axis, gain: r.gain };
        }
        let role = |v: u8| if v == 0xFF { None } else { Some(v) };
        let roles = Roles {
            lower: [role(self.roles[0]), role(self.roles[1]), role(self.roles[2])],
            upper: [role(self.roles[3]), role(self.roles[4]), role(self.roles[5])],
        };
        Some(Settings {
            beacon_hz: self.beacon_hz,
            bandwidth_hz: self.bandwidth_hz,
            kind,
            readout_hz: self.readout_hz,
            units: if self.imperial { LengthUnit::FeetInches } else { LengthUnit::Metres },
            head: Head { coils, roles },
            calibration: Calibration {
                upper_gain: self.calibration[0],
                strength: self.calibration[1],
                strength_sigma: self.calibration[2],
            },
            coil_height_m: self.coil_height_m,
            check_distance_m: self.check_distance_m,
        })
    }
}

/// Encode settings into a payload; its length (None: it does not fit).
pub fn encode<const N: usize>(s: &Settings<N>, out: &mut [u8]) -> Option<usize> {
    let rec = Record::from_settings(s)?;
    postcard::to_slice(&rec, out).ok().map(|b| b.len())
}

/// Decode a payload (None if it is not a valid settings record for N coils).
pub fn decode<const N: usize>(b: &[u8]) -> Option<Settings<N>> {
    postcard::from_bytes::<Record>(b).ok()?.to_settings()
}

/// The settings log in a flash region.
pub struct Store<F> {
    flash: F,
    base: u32,
    size: u32,
}

/// A slot's header, when its magic is right and its CRC holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Header {
    version: u16,
    len: usize,
    seq: u32,
}

fn header(buf: &[u8; SLOT]) -> Option<Header> {
    if buf[..4] != MAGIC {
        return None;
    }
    let version = u16::from_le_bytes([buf[4], buf[5]]);
    let len = u16::from_le_bytes([buf[6], buf[7]]) as usize;
    let seq = u32::from_le_bytes([buf[8], buf[9], buf[10], buf[11]]);
    if HEADER + len + 4 > SLOT {
        return None;
    }
    let end = HEADER + len;
    let crc = u32::from_le_bytes([buf[end], buf[end + 1], buf[end + 2], buf[end + 3]]);
    (crc == crc32(&buf[..end])).then_some(Header { version, len, seq })
}

impl<F: NorFlash> Store<F> {
    /// The region `[base, base + size)` of `flash` (a whole erase sector).
    pub fn new(flash: F, base: u32, size: u32) -> Result<Self, StoreError> {
        if (size as usize) < SLOT || !SLOT.is_multiple_of(F::WRITE_SIZE) {
            return Err(StoreError::TooSmall);
        }
        Ok(Self { flash, base, size })
    }

    /// Give back the flash.
    pub fn release(self) -> F {
        self.flash
    }

    fn slots(&self) -> u32 {
        self.size / SLOT as u32
    }

    fn read_slot(&mut self, i: u32, buf: &mut [u8; SLOT]) -> Result<(), StoreError> {
        self.flash.read(self.base + i * SLOT as u32, buf).map_err(|_| StoreError::Flash)
    }

    /// The newest good slot (index and header), whether any slot was written, and the first erased slot.
    fn scan(&mut self) -> (Option<(u32, Header)>, bool, Option<u32>) {
        let mut buf = [0u8; SLOT];
        let (mut newest, mut any, mut free) = (None::<(u32, Header)>, false, None);
        for i in 0..self.slots() {
            if self.read_slot(i, &mut buf).is_err() {
                any = true;
                continue;
            }
            if buf.iter().all(|&b| b == 0xFF) {
                free = free.or(Some(i));
                continue;
            }
            any = true;
            if let Some(h) = header(&buf) {
                if newest.map(|(_, n)| h.seq > n.seq).unwrap_or(true) {
                    newest = Some((i, h));
                }
            }
        }
        (newest, any, free)
    }

    /// Load the newest good record, or the defaults given, with what happened.
    pub fn load<const N: usize>(&mut self, defaults: Settings<N>) -> (Settings<N>, LoadOutcome) {
        let (newest, any, _) = self.scan();
        match newest {
            None if any => (defaults, LoadOutcome::Corrupt),
            None => (defaults, LoadOutcome::Empty),
            Some((_, h)) if h.version != VERSION => (defaults, LoadOutcome::OtherVersion { found: h.version }),
            Some((i, h)) => {
                let mut buf = [0u8; SLOT];
                if self.read_slot(i, &mut buf).is_err() {
                    return (defaults, LoadOutcome::Corrupt);
                }
                match decode::<N>(&buf[HEADER..HEADER + h.len]) {
                    Some(s) => (s, LoadOutcome::Loaded { slot: i }),
                    None => (defaults, LoadOutcome::Invalid),
                }
            }
        }
    }

    /// Append a record; erase the sector first when it is full. Returns the slot written.
    pub fn save<const N: usize>(&mut self, s: &Settings<N>) -> Result<u32, StoreError> {
        let mut rec = [0xFFu8; SLOT];
        let len = encode(s, &mut rec[HEADER..SLOT - 4]).ok_or(StoreError::Encode)?;
        let (newest, _, free) = self.scan();
        let seq = newest.map(|(_, h)| h.seq.wrapping_add(1)).unwrap_or(1);
        rec[..4].copy_from_slice(&MAGIC);
        rec[4..6].copy_from_slice(&VERSION.to_le_bytes());
        rec[6..8].copy_from_slice(&(len as u16).to_le_bytes());
        rec[8..12].copy_from_slice(&seq.to_le_bytes());
        let crc = crc32(&rec[..HEADER + len]);
        rec[HEADER + len..HEADER + len + 4].copy_from_slice(&crc.to_le_bytes());
        let slot = match free {
            Some(i) => i,
            None => {
                self.flash.erase(self.base, self.base + self.size).map_err(|_| StoreError::Flash)?;
                0
            }
        };
        let at = self.base + slot * SLOT as u32;
        self.flash.write(at, &rec).map_err(|_| StoreError::Flash)?;
        let mut buf = [0u8; SLOT];
        self.read_slot(slot, &mut buf)?;
        if buf != rec {
            return Err(StoreError::Verify);
        }
        Ok(slot)
    }
}

/// An in-memory NOR flash for tests and the emulator image: erases to 0xFF,
/// writes can only clear bits, and the power can be cut after a given number
/// of bytes written, or part-way through an erase.
pub struct RamFlash<const SIZE: usize> {
    /// Contents.
    pub mem: [u8; SIZE],
    /// Cut the power after this many more bytes are written (then every operation fails).
    pub cut_after: Option<usize>,
    /// Cut the power after this many bytes of the next erase are erased.
    pub cut_erase_after: Option<usize>,
    /// The power is off: every operation fails.
    pub dead: bool,
}

impl<const SIZE: usize> RamFlash<SIZE> {
    /// Erased flash.
    pub const fn new() -> Self {
        Self { mem: [0xFF; SIZE], cut_after: None, cut_erase_after: None, dead: false }
    }

    /// The power comes back (the contents stay as the cut left them).
    pub fn power_on(&mut self) {
        self.dead = false;
        self.cut_after = None;
        self.cut_erase_after = None;
    }
}

impl<const SIZE: usize> Default for RamFlash<SIZE> {
    fn default() -> Self {
        Self::new()
    }
}

/// Errors of the RAM flash.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RamFlashError {
    /// Out of bounds or misaligned.
    OutOfBounds,
    /// The power was cut.
    PowerCut,
}

impl embedded_storage::nor_flash::NorFlashError for RamFlashError {
    fn kind(&self) -> embedded_storage::nor_flash::NorFlashErrorKind {
        match self {
            RamFlashError::OutOfBounds => embedded_storage::nor_flash::NorFlashErrorKind::OutOfBounds,
            RamFlashError::PowerCut => embedded_storage::nor_flash::NorFlashErrorKind::Other,
        }
    }
}

impl<const SIZE: usize> embedded_storage::nor_flash::ErrorType for RamFlash<SIZE> {
    type Error = RamFlashError;
}

impl<const SIZE: usize> ReadNorFlash for RamFlash<SIZE> {
    const READ_SIZE: usize = 1;
    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        if self.dead {
            return Err(RamFlashError::PowerCut);
        }
        let o = offset as usize;
        let src = self.mem.get(o..o + bytes.len()).ok_or(RamFlashError::OutOfBounds)?;
        bytes.copy_from_slice(src);
        Ok(())
    }
    fn capacity(&self) -> usize {
        SIZE
    }
}

impl<const SIZE: usize> NorFlash for RamFlash<SIZE> {
    const WRITE_SIZE: usize = 4;
    const ERASE_SIZE: usize = SIZE;
    fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        if self.dead {
            return Err(RamFlashError::PowerCut);
        }
        let r = self.mem.get_mut(from as usize..to as usize).ok_or(RamFlashError::OutOfBounds)?;
        match self.cut_erase_after.take() {
            Some(k) => {
                let k = k.min(r.len());
                r[..k].fill(0xFF);
                self.dead = true;
                Err(RamFlashError::PowerCut)
            }
            None => {
                r.fill(0xFF);
                Ok(())
            }
        }
    }
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        if self.dead {
            return Err(RamFlashError::PowerCut);
        }
        let o = offset as usize;
        if !o.is_multiple_of(4) || !bytes.len().is_multiple_of(4) {
            return Err(RamFlashError::OutOfBounds);
        }
        let dst = self.mem.get_mut(o..o + bytes.len()).ok_or(RamFlashError::OutOfBounds)?;
        let n = match self.cut_after {
            Some(k) if k < bytes.len() => k,
            Some(k) => {
                self.cut_after = Some(k - bytes.len());
                bytes.len()
            }
            None => bytes.len(),
        };
        for (d, s) in dst.iter_mut().zip(bytes.iter()).take(n) {
            *d &= *s;
        }
        if n < bytes.len() {
            self.dead = true;
            return Err(RamFlashError::PowerCut);
        }
        Ok(())
    }
}
