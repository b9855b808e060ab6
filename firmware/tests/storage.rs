//! Settings storage on an in-memory NOR flash: round trip, log wrap-around,
//! corrupt and other-version records, and a power cut mid-write.

use undertone_dsp::format::LengthUnit;
use undertone_firmware::settings::Settings;
use undertone_firmware::storage::{encode, LoadOutcome, RamFlash, Store, SLOT, VERSION};

const SIZE: usize = 8 * SLOT;

fn changed(k: f32) -> Settings<4> {
    let mut s = Settings::defaults();
    s.beacon_hz = 640.0;
    s.bandwidth_hz = Some(0.9);
    s.units = LengthUnit::FeetInches;
    s.calibration.upper_gain = 1.0 + k;
    s.calibration.strength = 3.0e-8;
    s.head.coils[3].pos_m[2] = 0.41;
    s
}

#[test]
fn empty_flash_gives_defaults_and_says_so() {
    let mut st = Store::new(RamFlash::<SIZE>::new(), 0, SIZE as u32).unwrap();
    let (s, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::Empty);
    assert_eq!(s, Settings::defaults());
}

#[test]
fn round_trip_and_log_wraps() {
    let mut st = Store::new(RamFlash::<SIZE>::new(), 0, SIZE as u32).unwrap();
    for i in 0..20 {
        let s = changed(i as f32 * 0.001);
        let slot = st.save(&s).unwrap();
        assert_eq!(slot, (i % 8) as u32, "save {i}");
        let (back, o) = st.load(Settings::defaults());
        assert_eq!(o, LoadOutcome::Loaded { slot });
        assert_eq!(back, s);
    }
}

#[test]
fn power_cut_mid_write_keeps_the_previous_record() {
    let mut st = Store::new(RamFlash::<SIZE>::new(), 0, SIZE as u32).unwrap();
    let a = changed(0.01);
    st.save(&a).unwrap();
    let mut flash = st.release();
    flash.cut_after = Some(40);
    let mut st = Store::new(flash, 0, SIZE as u32).unwrap();
    assert!(st.save(&changed(0.02)).is_err());
    let (back, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::Loaded { slot: 0 });
    assert_eq!(back, a);
    // The next save goes after the damaged slot and wins.
    let c = changed(0.03);
    assert_eq!(st.save(&c).unwrap(), 2);
    assert_eq!(st.load(Settings::defaults()).0, c);
}

#[test]
fn power_cut_right_after_an_erase_gives_defaults() {
    let mut st = Store::new(RamFlash::<SIZE>::new(), 0, SIZE as u32).unwrap();
    for i in 0..8 {
        st.save(&changed(i as f32 * 0.001)).unwrap();
    }
    // The sector is full: the next save erases it, and the power fails during the write.
    let mut flash = st.release();
    flash.cut_after = Some(4);
    let mut st = Store::new(flash, 0, SIZE as u32).unwrap();
    assert!(st.save(&changed(0.05)).is_err());
    let (s, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::Corrupt);
    assert_eq!(s, Settings::defaults());
}

#[test]
fn corrupt_and_other_version_records_fall_back() {
    let mut st = Store::new(RamFlash::<SIZE>::new(), 0, SIZE as u32).unwrap();
    st.save(&changed(0.01)).unwrap();
    let mut flash = st.release();
    flash.mem[20] ^= 0x04; // a flipped bit in the payload
    let mut st = Store::new(flash, 0, SIZE as u32).unwrap();
    assert_eq!(st.load(Settings::defaults()).1, LoadOutcome::Corrupt);
    // A record of another layout version with a good CRC.
    let mut flash = RamFlash::<SIZE>::new();
    let mut rec = [0xFFu8; SLOT];
    let len = encode(&changed(0.0), &mut rec[8..]);
    rec[..4].copy_from_slice(b"UTSR");
    rec[4..6].copy_from_slice(&(VERSION + 1).to_le_bytes());
    rec[6..8].copy_from_slice(&(len as u16).to_le_bytes());
    let crc = undertone_firmware::crc::crc32(&rec[..8 + len]);
    rec[8 + len..12 + len].copy_from_slice(&crc.to_le_bytes());
    flash.mem[..SLOT].copy_from_slice(&rec);
    let mut st = Store::new(flash, 0, SIZE as u32).unwrap();
    let (s, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::OtherVersion { found: VERSION + 1 });
    assert_eq!(s, Settings::defaults());
}
