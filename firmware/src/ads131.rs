//! Driver for a 24-bit simultaneous-sampling delta-sigma converter of the
//! ADS131M0x family (4, 6 or 8 channels) on SPI, with a data-ready line.
//!
//! Generic over embedded-hal 1.0: an [`SpiDevice`] (mode 1, chip select handled
//! by the device), an [`InputPin`] for the active-low data-ready line and a
//! [`DelayNs`]. No allocation; every fault is counted and returned as a typed
//! error, never a panic.
//!
//! ## Frames (24-bit words, the converter's default word length)
//! Every SPI transaction is one frame of `N + 2` words: a command word in and
//! the response to the *previous* command out, then one word per channel (24-bit
//! two's complement codes out), then a CRC word (CRC-16-CCITT over every byte
//! before it, in the top 16 bits). A frame whose CRC does not match is counted
//! and rejected, never used.
//!
//! Command words (per the family's data sheet; values from memory, checked
//! against the public drivers): NULL 0x0000, RESET 0x0011 (answered by
//! 0xFF20 | channels), RREG 0xA000 | addr << 7 | (n − 1), WREG 0x6000 | addr << 7 |
//! (n − 1) with the register value in the next word. Registers used: ID 0x00,
//! STATUS 0x01, MODE 0x02, CLOCK 0x03 (channel enables, OSR, power mode),
//! GAIN1 0x04 (PGA gain code 0–7 = ×1 … ×128, 3 bits per channel, 4 bits apart),
//! GAIN2 0x05 for channels 4–7.

use crate::crc::crc16;
use crate::queue::FrameProducer;
use embedded_hal::delay::DelayNs;
use embedded_hal::digital::InputPin;
use embedded_hal::spi::{Error as _, ErrorKind, SpiDevice};

/// Bytes per word.
pub const WORD: usize = 3;
/// Largest frame: 8 channels + response + CRC.
pub const MAX_FRAME: usize = (8 + 2) * WORD;

/// Register addresses.
pub mod reg {
    /// ID.
    pub const ID: u8 = 0x00;
    /// STATUS.
    pub const STATUS: u8 = 0x01;
    /// MODE.
    pub const MODE: u8 = 0x02;
    /// CLOCK.
    pub const CLOCK: u8 = 0x03;
    /// GAIN1 (channels 0–3).
    pub const GAIN1: u8 = 0x04;
    /// GAIN2 (channels 4–7).
    pub const GAIN2: u8 = 0x05;
}

/// Command words.
pub mod cmd {
    /// No operation (reads data).
    pub const NULL: u16 = 0x0000;
    /// Reset.
    pub const RESET: u16 = 0x0011;
    /// Read registers.
    pub const RREG: u16 = 0xA000;
    /// Write registers.
    pub const WREG: u16 = 0x6000;
}

/// Oversampling ratio → output data rate with an 8.192 MHz clock in high-resolution mode.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Osr {
    /// 128: 32 kSPS.
    R128,
    /// 256: 16 kSPS.
    R256,
    /// 512: 8 kSPS.
    R512,
}

impl Osr {
    /// Output rate, samples per second.
    pub fn rate_hz(self) -> f32 {
        match self {
            Osr::R128 => 32_000.0,
            Osr::R256 => 16_000.0,
            Osr::R512 => 8_000.0,
        }
    }

    /// CLOCK register value for N channels enabled, high-resolution power mode.
    pub fn clock_reg(self, channels: usize) -> u16 {
        let en = ((1u16 << channels.min(8)) - 1) << 8;
        let osr = match self {
            Osr::R128 => 0,
            Osr::R256 => 1,
            Osr::R512 => 2,
        };
        en | (osr << 2) | 0b10
    }
}

/// What went wrong talking to the converter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AdcError {
    /// The SPI bus reported an error.
    Spi(ErrorKind),
    /// The data-ready pin could not be read.
    Pin,
    /// A frame's CRC did not match (the frame is rejected).
    Crc {
        /// CRC computed over the frame.
        computed: u16,
        /// CRC the frame carried.
        received: u16,
    },
    /// Data-ready did not come within the timeout.
    Timeout,
    /// The converter answered a command with something else.
    BadResponse {
        /// Expected response word.
        expected: u16,
        /// Word received.
        got: u16,
    },
    /// A gain code outside 0–7 or a channel outside the converter.
    BadGain {
        /// Channel.
        channel: u8,
        /// Code.
        code: u8,
    },
}

/// Counts of everything the driver has seen.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct AdcStats {
    /// Good frames read.
    pub frames: u32,
    /// Frames rejected for a bad CRC.
    pub crc_errors: u32,
    /// Data-ready timeouts.
    pub timeouts: u32,
    /// Resynchronisations after a missed data-ready.
    pub resyncs: u32,
    /// SPI errors.
    pub spi_errors: u32,
}

/// The driver, for `N` channels.
pub struct Ads131<SPI, DRDY, D, const N: usize> {
    spi: SPI,
    drdy: DRDY,
    delay: D,
    /// Counters.
    pub stats: AdcStats,
    gains: [u8; N],
    osr: Option<Osr>,
}

/// Put a 16-bit value in the top of a 24-bit word.
fn put_word(buf: &mut [u8], i: usize, v: u16) {
    buf[i * WORD] = (v >> 8) as u8;
    buf[i * WORD + 1] = v as u8;
    buf[i * WORD + 2] = 0;
}

/// The 16-bit value at the top of word `i`.
pub fn get_word(buf: &[u8], i: usize) -> u16 {
    ((buf[i * WORD] as u16) << 8) | buf[i * WORD + 1] as u16
}

/// Word `i` as a sign-extended 24-bit code.
pub fn get_code(buf: &[u8], i: usize) -> i32 {
    let raw = ((buf[i * WORD] as u32) << 16) | ((buf[i * WORD + 1] as u32) << 8) | buf[i * WORD + 2] as u32;
    ((raw << 8) as i32) >> 8
}

/// Check a received frame of `n` channels: CRC over all words before the CRC word.
pub fn check_frame(buf: &[u8], n: usize) -> Result<(), AdcError> {
    let crc_at = (n + 1) * WORD;
    let computed = crc16(&buf[..crc_at]);
    let received = get_word(buf, n + 1);
    if computed == received {
        Ok(())
    } else {
        Err(AdcError::Crc { computed, received })
    }
}

impl<SPI: SpiDevice, DRDY: InputPin, D: DelayNs, const N: usize> Ads131<SPI, DRDY, D, N> {
    const FRAME: usize = (N + 2) * WORD;
    const SHAPE: () = assert!(N >= 1 && N <= 8, "the converter family has 1 to 8 channels");

    /// Wrap the bus, the data-ready pin and a delay.
    pub fn new(spi: SPI, drdy: DRDY, delay: D) -> Self {
        #[allow(clippy::let_unit_value)]
        let _ = Self::SHAPE;
        Self { spi, drdy, delay, stats: AdcStats::default(), gains: [0; N], osr: None }
    }

    /// Give back the parts.
    pub fn release(self) -> (SPI, DRDY, D) {
        (self.spi, self.drdy, self.delay)
    }

    /// The data-ready pin (to clear its interrupt flag in the handler).
    pub fn drdy_mut(&mut self) -> &mut DRDY {
        &mut self.drdy
    }

    /// Use the bus directly (for a test fixture or an emulated converter).
    pub fn with_spi<R>(&mut self, f: impl FnOnce(&mut SPI) -> R) -> R {
        f(&mut self.spi)
    }

    /// Gain codes in force as far as the driver knows (0–7 = ×1 … ×128): after a reset
    /// that was not followed by a successful gain write, the reset value ×1.
    pub fn gains(&self) -> [u8; N] {
        self.gains
    }

    /// The output rate set by the last [`Ads131::init`].
    pub fn osr(&self) -> Option<Osr> {
        self.osr
    }

    /// One frame: send `command` (and `data` in the second word), return what came back.
    fn frame(&mut self, command: u16, data: Option<u16>) -> Result<[u8; MAX_FRAME], AdcError> {
        let mut buf = [0u8; MAX_FRAME];
        put_word(&mut buf, 0, command);
        if let Some(d) = data {
            put_word(&mut buf, 1, d);
        }
        self.spi.transfer_in_place(&mut buf[..Self::FRAME]).map_err(|e| {
            self.stats.spi_errors += 1;
            AdcError::Spi(e.kind())
        })?;
        Ok(buf)
    }

    /// A frame whose CRC must hold.
    fn checked(&mut self, command: u16, data: Option<u16>) -> Result<[u8; MAX_FRAME], AdcError> {
        let buf = self.frame(command, data)?;
        if let Err(e) = check_frame(&buf, N) {
            self.stats.crc_errors += 1;
            return Err(e);
        }
        Ok(buf)
    }

    /// Reset and configure: output rate and per-channel gain codes; verified by reading back.
    pub fn init(&mut self, osr: Osr, gains: [u8; N]) -> Result<(), AdcError> {
        for (c, &g) in gains.iter().enumerate() {
            if g > 7 {
                return Err(AdcError::BadGain { channel: c as u8, code: g });
            }
        }
        self.frame(cmd::RESET, None)?;
        // The reset sets every gain to ×1 until the new gains are written.
        self.gains = [0; N];
        self.osr = Some(osr);
        // The data sheet allows a few microseconds after reset; wait 1 ms.
        self.delay.delay_ms(1);
        let r = self.checked(cmd::NULL, None)?;
        let want = 0xFF20 | N as u16;
        if get_word(&r, 0) != want {
            return Err(AdcError::BadResponse { expected: want, got: get_word(&r, 0) });
        }
        self.write_reg(reg::CLOCK, osr.clock_reg(N))?;
        let reset = self.gains;
        self.gains = gains;
        if let Err(e) = self.write_gains() {
            self.gains = reset;
            return Err(e);
        }
        let clock = self.read_reg(reg::CLOCK)?;
        if clock != osr.clock_reg(N) {
            return Err(AdcError::BadResponse { expected: osr.clock_reg(N), got: clock });
        }
        Ok(())
    }

    fn gain_words(&self) -> (u16, u16) {
        let mut g1 = 0u16;
        let mut g2 = 0u16;
        for (c, &g) in self.gains.iter().enumerate() {
            let v = (g as u16 & 7) << ((c % 4) * 4);
            if c < 4 {
                g1 |= v;
            } else {
                g2 |= v;
            }
        }
        (g1, g2)
    }

    fn write_gains(&mut self) -> Result<(), AdcError> {
        let (g1, g2) = self.gain_words();
        self.write_reg(reg::GAIN1, g1)?;
        if N > 4 {
            self.write_reg(reg::GAIN2, g2)?;
        }
        Ok(())
    }

    /// Write one register (the acknowledgement arrives with the next frame and is checked).
    pub fn write_reg(&mut self, addr: u8, value: u16) -> Result<(), AdcError> {
        let c = cmd::WREG | ((addr as u16 & 0x3F) << 7);
        self.frame(c, Some(value))?;
        let r = self.checked(cmd::NULL, None)?;
        // WREG is acknowledged with 0x4000 | addr << 7 | (n − 1).
        let ack = 0x4000 | ((addr as u16 & 0x3F) << 7);
        if get_word(&r, 0) != ack {
            return Err(AdcError::BadResponse { expected: ack, got: get_word(&r, 0) });
        }
        Ok(())
    }

    /// Read one register.
    pub fn read_reg(&mut self, addr: u8) -> Result<u16, AdcError> {
        let c = cmd::RREG | ((addr as u16 & 0x3F) << 7);
        self.frame(c, None)?;
        let r = self.checked(cmd::NULL, None)?;
        Ok(get_word(&r, 0))
    }

    /// Change one channel's PGA gain code (0–7 = ×1 … ×128).
    pub fn set_gain(&mut self, channel: usize, code: u8) -> Result<(), AdcError> {
        if channel >= N || code > 7 {
            return Err(AdcError::BadGain { channel: channel as u8, code });
        }
        let old = self.gains[channel];
        self.gains[channel] = code;
        if let Err(e) = self.write_gains() {
            self.gains[channel] = old;
            return Err(e);
        }
        Ok(())
    }

    /// True when the converter has a conversion ready (data-ready low).
    pub fn data_ready(&mut self) -> Result<bool, AdcError> {
        self.drdy.is_low().map_err(|_| AdcError::Pin)
    }

    /// Wait for data-ready, polling every 10 µs, at most `timeout_us`.
    pub fn wait_ready(&mut self, timeout_us: u32) -> Result<(), AdcError> {
        let mut waited = 0;
        loop {
            if self.data_ready()? {
                return Ok(());
            }
            if waited >= timeout_us {
                self.stats.timeouts += 1;
                return Err(AdcError::Timeout);
            }
            self.delay.delay_us(10);
            waited += 10;
        }
    }

    /// Read one conversion: a code per channel. A bad CRC rejects the frame.
    pub fn read(&mut self) -> Result<[i32; N], AdcError> {
        let buf = self.checked(cmd::NULL, None)?;
        let mut out = [0i32; N];
        for (c, o) in out.iter_mut().enumerate() {
            *o = get_code(&buf, c + 1);
        }
        self.stats.frames += 1;
        Ok(out)
    }

    /// After a missed data-ready the converter's output buffer holds old
    /// conversions: read and discard until data-ready is released (at most
    /// three frames), so the next data-ready starts a fresh, aligned conversion.
    pub fn resync(&mut self) -> Result<(), AdcError> {
        self.stats.resyncs += 1;
        for _ in 0..3 {
            let _ = self.frame(cmd::NULL, None)?;
            if !self.data_ready()? {
                return Ok(());
            }
        }
        Err(AdcError::Timeout)
    }
}

/// The data-ready interrupt's work: read one frame into the queue; a frame the
/// driver rejects (CRC, bus) is counted for the supervisor, a full queue as an overrun.
pub fn read_into<SPI: SpiDevice, DRDY: InputPin, D: DelayNs, const N: usize>(
    adc: &mut Ads131<SPI, DRDY, D, N>,
    tx: &mut FrameProducer<'_, N>,
) {
    match adc.read() {
        Ok(f) => {
            tx.push(f);
        }
        Err(_) => tx.bad_frame(),
    }
}
