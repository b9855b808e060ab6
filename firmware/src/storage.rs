//! Settings and calibration kept in the last flash sector.
//!
//! The sector is a log of fixed-size slots. Each save writes the next erased
//! slot; only when the sector is full is it erased and the log restarted. A
//! slot holds: magic "UTSR" (4 bytes), record version (u16), payload length
//! (u16), payload, CRC-32 of everything before it. Loading takes the last slot
//! with a good magic and CRC. A power cut while a slot is being written leaves
//! that slot bad and the one before it in force; a power cut between erasing a
//! full sector and writing leaves no record, so the defaults come back — and the
//! firmware says which of these happened ([`LoadOutcome`]).
//!
//! Storage goes through `embedded-storage`'s `NorFlash`, so it is tested on the
//! host with an in-memory flash.

use crate::crc::crc32;
use crate::settings::Settings;
use embedded_storage::nor_flash::{NorFlash, ReadNorFlash};
use undertone_dsp::field::head::{Coil, Roles};
use undertone_dsp::format::LengthUnit;
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::{DetectorKind, Head, Window};

/// Magic at the start of every record.
pub const MAGIC: [u8; 4] = *b"UTSR";
/// Record layout version written by this firmware.
pub const VERSION: u16 = 1;
/// Bytes per slot.
pub const SLOT: usize = 512;
const HEADER: usize = 8;

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
}

/// The settings log in a flash region.
pub struct Store<F> {
    flash: F,
    base: u32,
    size: u32,
}

fn put_f32(b: &mut [u8], at: &mut usize, v: f32) {
    b[*at..*at + 4].copy_from_slice(&v.to_le_bytes());
    *at += 4;
}

fn get_f32(b: &[u8], at: &mut usize) -> f32 {
    let v = f32::from_le_bytes([b[*at], b[*at + 1], b[*at + 2], b[*at + 3]]);
    *at += 4;
    v
}

/// Encode settings into a payload; returns its length.
pub fn encode<const N: usize>(s: &Settings<N>, out: &mut [u8]) -> usize {
    let mut at = 0;
    put_f32(out, &mut at, s.beacon_hz);
    put_f32(out, &mut at, s.bandwidth_hz.unwrap_or(f32::NAN));
    let (k, p) = match s.kind {
        DetectorKind::LockIn { poles } => (0u8, poles),
        DetectorKind::Block { window } => (
            1,
            match window {
                Window::Rectangular => 0,
                Window::Hann => 1,
                Window::BlackmanHarris4 => 2,
            },
        ),
    };
    out[at] = k;
    out[at + 1] = p;
    out[at + 2] = match s.units {
        LengthUnit::Metres => 0,
        LengthUnit::FeetInches => 1,
    };
    out[at + 3] = N as u8;
    at += 4;
    put_f32(out, &mut at, s.readout_hz);
    for c in s.head.coils.iter() {
        for v in c.pos_m.iter().chain(c.axis.iter()) {
            put_f32(out, &mut at, *v);
        }
        put_f32(out, &mut at, c.gain);
    }
    for r in s.head.roles.lower.iter().chain(s.head.roles.upper.iter()) {
        out[at] = r.unwrap_or(0xFF);
        at += 1;
    }
    put_f32(out, &mut at, s.calibration.upper_gain);
    put_f32(out, &mut at, s.calibration.strength);
    put_f32(out, &mut at, s.calibration.strength_sigma);
    at
}

/// Decode a payload (None if it is not a valid settings record for N coils).
pub fn decode<const N: usize>(b: &[u8]) -> Option<Settings<N>> {
    let need = 4 + 4 + 4 + 4 + N * 28 + 6 + 12;
    if b.len() < need {
        return None;
    }
    let mut at = 0;
    let beacon_hz = get_f32(b, &mut at);
    let bw = get_f32(b, &mut at);
    let (k, p, u, n) = (b[at], b[at + 1], b[at + 2], b[at + 3]);
    at += 4;
    if n as usize != N {
        return None;
    }
    let kind = match (k, p) {
        (0, 1..=4) => DetectorKind::LockIn { poles: p },
        (1, 0) => DetectorKind::Block { window: Window::Rectangular },
        (1, 1) => DetectorKind::Block { window: Window::Hann },
        (1, 2) => DetectorKind::Block { window: Window::BlackmanHarris4 },
        _ => return None,
    };
    let units = match u {
        0 => LengthUnit::Metres,
        1 => LengthUnit::FeetInches,
        _ => return None,
    };
    let readout_hz = get_f32(b, &mut at);
    let mut coils = [Coil { pos_m: [0.0; 3], axis: [1.0, 0.0, 0.0], gain: 1.0 }; N];
    for c in coils.iter_mut() {
        for v in c.pos_m.iter_mut() {
            *v = get_f32(b, &mut at);
        }
        for v in c.axis.iter_mut() {
            *v = get_f32(b, &mut at);
        }
        c.gain = get_f32(b, &mut at);
    }
    let mut roles = Roles::default();
    for i in 0..6 {
        let v = b[at + i];
        let r = if v == 0xFF { None } else { Some(v) };
        if i < 3 {
            roles.lower[i] = r;
        } else {
            roles.upper[i - 3] = r;
        }
    }
    at += 6;
    let calibration = Calibration { upper_gain: get_f32(b, &mut at), strength: get_f32(b, &mut at), strength_sigma: get_f32(b, &mut at) };
    Some(Settings {
        beacon_hz,
        bandwidth_hz: if bw.is_nan() { None } else { Some(bw) },
        kind,
        readout_hz,
        units,
        head: Head { coils, roles },
        calibration,
    })
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

    /// Load the newest good record, or the defaults given, with what happened.
    pub fn load<const N: usize>(&mut self, defaults: Settings<N>) -> (Settings<N>, LoadOutcome) {
        let mut buf = [0u8; SLOT];
        let mut newest: Option<(u32, u16, usize)> = None;
        let mut any = false;
        for i in 0..self.slots() {
            if self.read_slot(i, &mut buf).is_err() {
                continue;
            }
            if buf[..4] == [0xFF; 4] {
                break;
            }
            any = true;
            if buf[..4] != MAGIC {
                continue;
            }
            let version = u16::from_le_bytes([buf[4], buf[5]]);
            let len = u16::from_le_bytes([buf[6], buf[7]]) as usize;
            if HEADER + len + 4 > SLOT {
                continue;
            }
            let crc = u32::from_le_bytes([buf[HEADER + len], buf[HEADER + len + 1], buf[HEADER + len + 2], buf[HEADER + len + 3]]);
            if crc == crc32(&buf[..HEADER + len]) {
                newest = Some((i, version, len));
            }
        }
        match newest {
            None if any => (defaults, LoadOutcome::Corrupt),
            None => (defaults, LoadOutcome::Empty),
            Some((_, v, _)) if v != VERSION => (defaults, LoadOutcome::OtherVersion { found: v }),
            Some((i, _, len)) => {
                if self.read_slot(i, &mut buf).is_err() {
                    return (defaults, LoadOutcome::Corrupt);
                }
                match decode::<N>(&buf[HEADER..HEADER + len]) {
                    Some(s) => (s, LoadOutcome::Loaded { slot: i }),
                    None => (defaults, LoadOutcome::Invalid),
                }
            }
        }
    }

    /// Append a record; erase the sector first when it is full. Returns the slot written.
    pub fn save<const N: usize>(&mut self, s: &Settings<N>) -> Result<u32, StoreError> {
        let mut rec = [0xFFu8; SLOT];
        let len = encode(s, &mut rec[HEADER..]);
        rec[..4].copy_from_slice(&MAGIC);
        rec[4..6].copy_from_slice(&VERSION.to_le_bytes());
        rec[6..8].copy_from_slice(&(len as u16).to_le_bytes());
        let crc = crc32(&rec[..HEADER + len]);
        rec[HEADER + len..HEADER + len + 4].copy_from_slice(&crc.to_le_bytes());
        let mut buf = [0u8; SLOT];
        let mut free = None;
        for i in 0..self.slots() {
            self.read_slot(i, &mut buf)?;
            if buf.iter().all(|&b| b == 0xFF) {
                free = Some(i);
                break;
            }
        }
        let slot = match free {
            Some(i) => i,
            None => {
                self.flash.erase(self.base, self.base + self.size).map_err(|_| StoreError::Flash)?;
                0
            }
        };
        let at = self.base + slot * SLOT as u32;
        self.flash.write(at, &rec).map_err(|_| StoreError::Flash)?;
        self.read_slot(slot, &mut buf)?;
        if buf != rec {
            return Err(StoreError::Verify);
        }
        Ok(slot)
    }
}

/// An in-memory NOR flash for tests and the emulator image: erases to 0xFF,
/// writes can only clear bits, and a write can be cut short after a given
/// number of bytes to model a power cut.
pub struct RamFlash<const SIZE: usize> {
    /// Contents.
    pub mem: [u8; SIZE],
    /// Cut the next write after this many bytes (then fail).
    pub cut_after: Option<usize>,
}

impl<const SIZE: usize> RamFlash<SIZE> {
    /// Erased flash.
    pub const fn new() -> Self {
        Self { mem: [0xFF; SIZE], cut_after: None }
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
    /// Power cut during the write.
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
        let r = self.mem.get_mut(from as usize..to as usize).ok_or(RamFlashError::OutOfBounds)?;
        r.fill(0xFF);
        Ok(())
    }
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        let o = offset as usize;
        if !o.is_multiple_of(4) || !bytes.len().is_multiple_of(4) {
            return Err(RamFlashError::OutOfBounds);
        }
        let n = match self.cut_after.take() {
            Some(k) => k.min(bytes.len()),
            None => bytes.len(),
        };
        let dst = self.mem.get_mut(o..o + bytes.len()).ok_or(RamFlashError::OutOfBounds)?;
        for (d, s) in dst.iter_mut().zip(bytes.iter()).take(n) {
            *d &= *s;
        }
        if n < bytes.len() {
            return Err(RamFlashError::PowerCut);
        }
        Ok(())
    }
}
