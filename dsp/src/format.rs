//! Formatting lengths for display: metres or feet and inches, into a fixed buffer.
//!
//! SI inside; feet and inches only here, at the edge (1 ft = 0.3048 m exactly,
//! 12 in = 1 ft). Integer arithmetic only (centimetres or inches rounded half
//! away from zero), so a board that shows lengths needs none of `core`'s float
//! printing.

use core::fmt::Write;

/// Display units for lengths.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LengthUnit {
    /// Metres with two decimals.
    Metres,
    /// Feet and whole inches.
    FeetInches,
}

/// Format `m` metres, e.g. `1.52 m` or `5' 0"`. Non-finite gives `--`.
/// `assert_eq!(undertone_dsp::format::length(1.524, undertone_dsp::format::LengthUnit::FeetInches).as_str(), "5' 0\"");`
/// `assert_eq!(undertone_dsp::format::length(-0.456, undertone_dsp::format::LengthUnit::Metres).as_str(), "-0.46 m");`
pub fn length(m: f32, unit: LengthUnit) -> heapless::String<16> {
    let mut s = heapless::String::new();
    if !m.is_finite() || libm::fabsf(m) > 1e6 {
        let _ = s.push_str("--");
        return s;
    }
    match unit {
        LengthUnit::Metres => {
            // |m| ≤ 1e6 m: the centimetres fit an i32 (no 64-bit divide on the board).
            let cm = libm::round(m as f64 * 100.0) as i32;
            let sign = if cm < 0 { "-" } else { "" };
            let a = cm.unsigned_abs();
            let _ = write!(s, "{}{}.{:02} m", sign, a / 100, a % 100);
        }
        LengthUnit::FeetInches => {
            let total_in = libm::roundf(libm::fabsf(m) / 0.0254) as i32;
            let sign = if m < 0.0 && total_in > 0 { "-" } else { "" };
            let _ = write!(s, "{}{}' {}\"", sign, total_in / 12, total_in % 12);
        }
    }
    s
}
