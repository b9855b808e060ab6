//! Settings storage on an in-memory NOR flash: round trip, log wrap-around,
//! corrupt and other-version records, and the power cut at every write step
//! of a save (each 4-byte word of the record, and part-way through the erase
//! of a full sector): afterwards the log holds the old settings or the new
//! ones, never anything else, and says which.

use proptest::prelude::*;
use undertone_dsp::format::LengthUnit;
use undertone_firmware::settings::Settings;
use undertone_firmware::storage::{encode, LoadOutcome, RamFlash, Store, HEADER, SLOT, VERSION};

const SIZE: usize = 8 * SLOT;

fn changed(k: f32) -> Settings<4> {
    let mut s = Settings::defaults();
    s.beacon_hz = 640.0;
    s.bandwidth_hz = Some(0.9);
    s.units = LengthUnit::FeetInches;
    s.calibration.upper_gain = 1.0 + k;
    s.calibration.strength = 3.0e-8;
    s.head.coils[3].pos_m[2] = 0.41;
    s.coil_height_m = 0.25;
    s.check_distance_m = 1.5;
    s
}

fn store(flash: RamFlash<SIZE>) -> Store<RamFlash<SIZE>> {
    Store::new(flash, 0, SIZE as u32).unwrap()
}

#[test]
fn empty_flash_gives_defaults_and_says_so() {
    let mut st = store(RamFlash::new());
    let (s, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::Empty);
    assert_eq!(s, Settings::defaults());
}

#[test]
fn round_trip_and_log_wraps() {
    let mut st = store(RamFlash::new());
    for i in 0..20 {
        let s = changed(i as f32 * 0.001);
        let slot = st.save(&s).unwrap();
        assert_eq!(slot, (i % 8) as u32, "save {i}");
        let (back, o) = st.load(Settings::defaults());
        assert_eq!(o, LoadOutcome::Loaded { slot });
        assert_eq!(back, s);
    }
}

/// Save `new` over a log holding `saves` records (the last one `old`), with the power cut after
/// `cut` bytes of the record's write (or `erase_cut` bytes into the sector erase); then load.
fn cut_during_save(saves: usize, cut: Option<usize>, erase_cut: Option<usize>) -> (Settings<4>, Settings<4>, Settings<4>, LoadOutcome) {
    let mut st = store(RamFlash::new());
    let mut old = Settings::defaults();
    for i in 0..saves {
        old = changed(i as f32 * 0.001);
        st.save(&old).unwrap();
    }
    let new = changed(0.123);
    let mut flash = st.release();
    flash.cut_after = cut;
    flash.cut_erase_after = erase_cut;
    let mut st = store(flash);
    let _ = st.save(&new);
    let mut flash = st.release();
    flash.power_on();
    let (back, o) = store(flash).load(Settings::defaults());
    (old, new, back, o)
}

#[test]
fn a_power_cut_at_every_word_of_a_save_keeps_old_or_new() {
    let mut buf = [0u8; SLOT];
    let len = HEADER + encode(&changed(0.123), &mut buf).unwrap() + 4;
    for saves in [1, 3] {
        for cut in (0..=SLOT).step_by(4) {
            let (old, new, back, o) = cut_during_save(saves, Some(cut), None);
            if cut >= len {
                // Every byte of the record made it (the rest of the slot stays erased).
                assert_eq!((back, o), (new, LoadOutcome::Loaded { slot: saves as u32 }), "cut at {cut}");
            } else {
                assert_eq!((back, o), (old, LoadOutcome::Loaded { slot: saves as u32 - 1 }), "cut at {cut}");
            }
        }
    }
}

#[test]
fn a_power_cut_during_the_erase_of_a_full_sector() {
    for erase_cut in (0..=SIZE).step_by(SLOT / 2) {
        let (old, _new, back, o) = cut_during_save(8, None, Some(erase_cut));
        let slots_erased = erase_cut.div_ceil(SLOT);
        if slots_erased < 8 {
            // The newest record, in the last slot, survives until the erase reaches it.
            assert_eq!((back, o), (old, LoadOutcome::Loaded { slot: 7 }), "erase cut at {erase_cut}");
        } else {
            // Everything erased, nothing written: the defaults, and the firmware says so.
            assert_eq!((back, o), (Settings::defaults(), LoadOutcome::Empty), "erase cut at {erase_cut}");
        }
    }
    // The erase completes but the write of the new record is cut: no record, defaults.
    for cut in [0, 4, 40, 100] {
        let (_, _, back, o) = cut_during_save(8, Some(cut), None);
        assert_eq!(back, Settings::defaults());
        assert!(matches!(o, LoadOutcome::Corrupt | LoadOutcome::Empty), "{o:?}");
    }
}

#[test]
fn after_a_partial_erase_the_next_save_wins() {
    // Half the sector erased by a cut; the next save goes to the first free slot and, being
    // the newest by its sequence number, wins over the older records still in the other half.
    let mut st = store(RamFlash::new());
    for i in 0..8 {
        st.save(&changed(i as f32 * 0.001)).unwrap();
    }
    let mut flash = st.release();
    flash.cut_erase_after = Some(4 * SLOT);
    let mut st = store(flash);
    assert!(st.save(&changed(0.5)).is_err());
    let mut flash = st.release();
    flash.power_on();
    let mut st = store(flash);
    let c = changed(0.7);
    assert_eq!(st.save(&c).unwrap(), 0);
    assert_eq!(st.load(Settings::defaults()), (c, LoadOutcome::Loaded { slot: 0 }));
}

#[test]
fn corrupt_and_other_version_records_fall_back() {
    let mut st = store(RamFlash::new());
    st.save(&changed(0.01)).unwrap();
    let mut flash = st.release();
    flash.mem[20] ^= 0x04; // a flipped bit in the payload
    let mut st = store(flash);
    assert_eq!(st.load(Settings::defaults()).1, LoadOutcome::Corrupt);
    // A record of another layout version with a good CRC.
    let mut flash = RamFlash::<SIZE>::new();
    let mut rec = [0xFFu8; SLOT];
    let len = encode(&changed(0.0), &mut rec[HEADER..]).unwrap();
    rec[..4].copy_from_slice(b"UTSR");
    rec[4..6].copy_from_slice(&(VERSION + 1).to_le_bytes());
    rec[6..8].copy_from_slice(&(len as u16).to_le_bytes());
    rec[8..12].copy_from_slice(&1u32.to_le_bytes());
    let crc = undertone_firmware::crc::crc32(&rec[..HEADER + len]);
    rec[HEADER + len..HEADER + len + 4].copy_from_slice(&crc.to_le_bytes());
    flash.mem[..SLOT].copy_from_slice(&rec);
    let mut st = store(flash);
    let (s, o) = st.load(Settings::defaults());
    assert_eq!(o, LoadOutcome::OtherVersion { found: VERSION + 1 });
    assert_eq!(s, Settings::defaults());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn any_settings_round_trip_through_a_record(beacon in 1.0f32..20_000.0, bw in prop::option::of(0.05f32..50.0),
        height in 0.0f32..2.0, dist in 0.2f32..5.0, gain in 0.1f32..10.0, imperial in any::<bool>()) {
        let mut s = Settings::defaults();
        s.beacon_hz = beacon;
        s.bandwidth_hz = bw;
        s.coil_height_m = height;
        s.check_distance_m = dist;
        s.head.coils[2].gain = gain;
        s.units = if imperial { LengthUnit::FeetInches } else { LengthUnit::Metres };
        let mut buf = [0u8; SLOT];
        let n = encode(&s, &mut buf).unwrap();
        prop_assert!(HEADER + n + 4 <= SLOT);
        prop_assert_eq!(undertone_firmware::storage::decode::<4>(&buf[..n]), Some(s));
    }
}
