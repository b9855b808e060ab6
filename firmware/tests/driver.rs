//! The converter driver against a mocked SPI bus and data-ready pin
//! (embedded-hal-mock): configuration, good frames, CRC errors, timeouts,
//! gain changes and resynchronisation after a missed data-ready.

use embedded_hal_mock::eh1::delay::NoopDelay;
use embedded_hal_mock::eh1::digital::{Mock as PinMock, State, Transaction as PinT};
use embedded_hal_mock::eh1::spi::{Mock as SpiMock, Transaction as SpiT};
use undertone_firmware::ads131::{AdcError, Ads131, Osr};
use undertone_firmware::crc::crc16;

const N: usize = 4;
const FRAME: usize = (N + 2) * 3;

fn word(v: u16) -> [u8; 3] {
    [(v >> 8) as u8, v as u8, 0]
}

/// What the host sends: a command word (and an optional data word), zeros elsewhere.
fn tx(cmd: u16, data: Option<u16>) -> Vec<u8> {
    let mut b = vec![0u8; FRAME];
    b[..3].copy_from_slice(&word(cmd));
    if let Some(d) = data {
        b[3..6].copy_from_slice(&word(d));
    }
    b
}

/// What the converter answers: response word, codes, CRC-16-CCITT over the rest.
fn rx(resp: u16, codes: [i32; N]) -> Vec<u8> {
    let mut b = vec![0u8; FRAME];
    b[..3].copy_from_slice(&word(resp));
    for (i, c) in codes.iter().enumerate() {
        let v = (*c as u32) & 0xFF_FFFF;
        b[3 + 3 * i] = (v >> 16) as u8;
        b[4 + 3 * i] = (v >> 8) as u8;
        b[5 + 3 * i] = v as u8;
    }
    let crc = crc16(&b[..(N + 1) * 3]);
    b[(N + 1) * 3..(N + 1) * 3 + 2].copy_from_slice(&crc.to_be_bytes());
    b
}

fn frame(t: Vec<u8>, r: Vec<u8>) -> Vec<SpiT<u8>> {
    vec![SpiT::transaction_start(), SpiT::transfer_in_place(t, r), SpiT::transaction_end()]
}

fn init_script(osr: Osr, gains: u16) -> Vec<SpiT<u8>> {
    let z = [0; N];
    let clock = osr.clock_reg(N);
    let mut v = Vec::new();
    v.extend(frame(tx(0x0011, None), rx(0x0500, z)));
    v.extend(frame(tx(0x0000, None), rx(0xFF24, z)));
    v.extend(frame(tx(0x6000 | (0x03 << 7), Some(clock)), rx(0x0500, z)));
    v.extend(frame(tx(0x0000, None), rx(0x4000 | (0x03 << 7), z)));
    v.extend(frame(tx(0x6000 | (0x04 << 7), Some(gains)), rx(0x0500, z)));
    v.extend(frame(tx(0x0000, None), rx(0x4000 | (0x04 << 7), z)));
    v.extend(frame(tx(0xA000 | (0x03 << 7), None), rx(0x0500, z)));
    v.extend(frame(tx(0x0000, None), rx(clock, z)));
    v
}

#[test]
fn init_reads_frames_and_sign_extends_codes() {
    let mut script = init_script(Osr::R256, 0x2100);
    let codes = [8_388_607, -8_388_608, -1, 123_456];
    script.extend(frame(tx(0, None), rx(0x050F, codes)));
    let mut spi = SpiMock::new(&script);
    let mut pin = PinMock::new(&[PinT::get(State::Low)]);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(spi.clone(), pin.clone(), NoopDelay::new());
    adc.init(Osr::R256, [0, 0, 1, 2]).unwrap();
    assert_eq!(adc.gains(), [0, 0, 1, 2]);
    adc.wait_ready(100).unwrap();
    assert_eq!(adc.read().unwrap(), codes);
    assert_eq!(adc.stats.frames, 1);
    spi.done();
    pin.done();
}

#[test]
fn bad_crc_is_rejected_and_counted() {
    let mut script = init_script(Osr::R128, 0);
    let mut bad = rx(0x050F, [10, 20, 30, 40]);
    bad[4] ^= 0x01; // one bit flipped in channel 0 after the CRC was made
    script.extend(frame(tx(0, None), bad));
    script.extend(frame(tx(0, None), rx(0x050F, [11, 21, 31, 41])));
    let mut spi = SpiMock::new(&script);
    let mut pin = PinMock::new(&[]);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(spi.clone(), pin.clone(), NoopDelay::new());
    adc.init(Osr::R128, [0; N]).unwrap();
    match adc.read() {
        Err(AdcError::Crc { computed, received }) => assert_ne!(computed, received),
        other => panic!("expected a CRC error, got {other:?}"),
    }
    assert_eq!(adc.stats.crc_errors, 1);
    assert_eq!(adc.read().unwrap(), [11, 21, 31, 41]);
    assert_eq!(adc.stats.frames, 1);
    spi.done();
    pin.done();
}

#[test]
fn wrong_reset_answer_is_reported() {
    let z = [0; N];
    let mut script = frame(tx(0x0011, None), rx(0, z));
    script.extend(frame(tx(0, None), rx(0xFF26, z)));
    let mut spi = SpiMock::new(&script);
    let mut pin = PinMock::new(&[]);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(spi.clone(), pin.clone(), NoopDelay::new());
    assert_eq!(adc.init(Osr::R128, [0; N]), Err(AdcError::BadResponse { expected: 0xFF24, got: 0xFF26 }));
    assert_eq!(adc.init(Osr::R128, [9, 0, 0, 0]), Err(AdcError::BadGain { channel: 0, code: 9 }));
    spi.done();
    pin.done();
}

#[test]
fn data_ready_timeout_then_resync() {
    // Data-ready never comes within 30 µs (polled at 0, 10, 20, 30 µs): a timeout.
    let mut pin = PinMock::new(&[
        PinT::get(State::High),
        PinT::get(State::High),
        PinT::get(State::High),
        PinT::get(State::High),
        // Resync: after one discarded frame data-ready is still low, after the second it is released.
        PinT::get(State::Low),
        PinT::get(State::High),
    ]);
    let z = [0; N];
    let mut script = Vec::new();
    script.extend(frame(tx(0, None), rx(0x050F, z)));
    script.extend(frame(tx(0, None), rx(0x050F, z)));
    let mut spi = SpiMock::new(&script);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(spi.clone(), pin.clone(), NoopDelay::new());
    assert_eq!(adc.wait_ready(30), Err(AdcError::Timeout));
    assert_eq!(adc.stats.timeouts, 1);
    adc.resync().unwrap();
    assert_eq!(adc.stats.resyncs, 1);
    spi.done();
    pin.done();
}

#[test]
fn gain_change_writes_the_gain_register() {
    let mut script = init_script(Osr::R128, 0);
    let z = [0; N];
    // Channel 2 to code 3: GAIN1 = 0x0300.
    script.extend(frame(tx(0x6000 | (0x04 << 7), Some(0x0300)), rx(0x0500, z)));
    script.extend(frame(tx(0, None), rx(0x4000 | (0x04 << 7), z)));
    let mut spi = SpiMock::new(&script);
    let mut pin = PinMock::new(&[]);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(spi.clone(), pin.clone(), NoopDelay::new());
    adc.init(Osr::R128, [0; N]).unwrap();
    adc.set_gain(2, 3).unwrap();
    assert_eq!(adc.gains(), [0, 0, 3, 0]);
    assert_eq!(adc.set_gain(4, 1), Err(AdcError::BadGain { channel: 4, code: 1 }));
    assert_eq!(adc.set_gain(1, 8), Err(AdcError::BadGain { channel: 1, code: 8 }));
    spi.done();
    pin.done();
}

/// A bus that always fails (the mock has no error injection for SPI).
struct BrokenBus;

impl embedded_hal::spi::ErrorType for BrokenBus {
    type Error = embedded_hal::spi::ErrorKind;
}

impl embedded_hal::spi::SpiDevice<u8> for BrokenBus {
    fn transaction(&mut self, _ops: &mut [embedded_hal::spi::Operation<'_, u8>]) -> Result<(), Self::Error> {
        Err(embedded_hal::spi::ErrorKind::Overrun)
    }
}

#[test]
fn spi_failure_is_an_error_not_a_panic() {
    let mut pin = PinMock::new(&[]);
    let mut adc: Ads131<_, _, _, N> = Ads131::new(BrokenBus, pin.clone(), NoopDelay::new());
    assert_eq!(adc.read(), Err(AdcError::Spi(embedded_hal::spi::ErrorKind::Overrun)));
    assert_eq!(adc.init(Osr::R128, [0; N]), Err(AdcError::Spi(embedded_hal::spi::ErrorKind::Overrun)));
    assert_eq!(adc.stats.spi_errors, 2);
    pin.done();
}
