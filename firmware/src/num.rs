//! Small number parsing and printing for the settings protocol.
//!
//! `core`'s float parser and printer are exact but large (about 40 KiB of
//! tables and code on a Cortex-M); the protocol needs neither their exactness
//! nor their size. [`parse_f32`] reads `[+-]digits[.digits][e[+-]digits]`
//! (and the words `inf`/`nan`, refused later as not finite); [`write_f32`]
//! prints up to six significant digits, in exponent form outside 1e-3…1e6.

use core::fmt::Write;

/// Parse a decimal number; `None` when the text is not one.
pub fn parse_f32(s: &str) -> Option<f32> {
    let b = s.as_bytes();
    let mut i = 0;
    let neg = take_sign(b, &mut i);
    let mut mant: u64 = 0;
    let mut exp10: i32 = 0;
    let mut digits = 0;
    while i < b.len() && b[i].is_ascii_digit() {
        if mant < 100_000_000_000_000 {
            mant = mant * 10 + (b[i] - b'0') as u64;
        } else {
            exp10 += 1;
        }
        digits += 1;
        i += 1;
    }
    if i < b.len() && b[i] == b'.' {
        i += 1;
        while i < b.len() && b[i].is_ascii_digit() {
            if mant < 100_000_000_000_000 {
                mant = mant * 10 + (b[i] - b'0') as u64;
                exp10 -= 1;
            }
            digits += 1;
            i += 1;
        }
    }
    if digits == 0 {
        return None;
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        i += 1;
        let eneg = take_sign(b, &mut i);
        let mut e: i32 = 0;
        let start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            e = (e * 10 + (b[i] - b'0') as i32).min(10_000);
            i += 1;
        }
        if i == start {
            return None;
        }
        exp10 += if eneg { -e } else { e };
    }
    if i != b.len() {
        return None;
    }
    // In f64 (mantissa below 2^53, powers of ten within 1e-15 relative) then rounded once to f32.
    let e = exp10.clamp(-400, 400);
    let p = pow10_f64(e.unsigned_abs());
    let v = if e < 0 { mant as f64 / p } else { mant as f64 * p };
    let v = v as f32;
    Some(if neg { -v } else { v })
}

/// Skip a leading '+' or '-' at `i`; true for '-'.
fn take_sign(b: &[u8], i: &mut usize) -> bool {
    match b.get(*i) {
        Some(b'-') => {
            *i += 1;
            true
        }
        Some(b'+') => {
            *i += 1;
            false
        }
        _ => false,
    }
}

fn pow10_f64(mut n: u32) -> f64 {
    let mut r = 1.0f64;
    let mut base = 10.0f64;
    while n > 0 {
        if n & 1 == 1 {
            r *= base;
        }
        base *= base;
        n >>= 1;
    }
    r
}

fn pow10(e: i32) -> f32 {
    let p = pow10_f64(e.clamp(-80, 80).unsigned_abs());
    (if e < 0 { 1.0 / p } else { p }) as f32
}

/// Print `v` with up to six significant digits.
pub fn write_f32(out: &mut impl Write, v: f32) -> core::fmt::Result {
    if v.is_nan() {
        return out.write_str("nan");
    }
    if v.is_infinite() {
        return out.write_str(if v > 0.0 { "inf" } else { "-inf" });
    }
    if v == 0.0 {
        return out.write_str("0");
    }
    if v < 0.0 {
        out.write_char('-')?;
    }
    let a = libm::fabsf(v);
    let mut e = libm::floorf(libm::log10f(a)) as i32;
    // Six significant digits as an integer.
    let mut m = libm::roundf(a / pow10(e - 5)) as u32;
    if m >= 1_000_000 {
        m /= 10;
        e += 1;
    }
    if (-3..6).contains(&e) {
        // Fixed point: integer part and fraction with trailing zeros removed.
        let mut digits = [0u8; 6];
        let mut x = m;
        for d in digits.iter_mut().rev() {
            *d = (x % 10) as u8;
            x /= 10;
        }
        let int_digits = (e + 1).max(0) as usize;
        if int_digits == 0 {
            out.write_str("0")?;
        }
        for d in &digits[..int_digits.min(6)] {
            out.write_char((b'0' + d) as char)?;
        }
        let frac = &digits[int_digits.min(6)..];
        let last = frac.iter().rposition(|&d| d != 0);
        if let Some(l) = last {
            out.write_char('.')?;
            for _ in 0..(-(e + 1)).max(0) {
                out.write_char('0')?;
            }
            for d in &frac[..=l] {
                out.write_char((b'0' + d) as char)?;
            }
        }
        Ok(())
    } else {
        let lead = m / 100_000;
        let mut rest = m % 100_000;
        out.write_char((b'0' + lead as u8) as char)?;
        if rest != 0 {
            out.write_char('.')?;
            let mut div = 10_000;
            while rest != 0 {
                out.write_char((b'0' + (rest / div) as u8) as char)?;
                rest %= div;
                div /= 10;
            }
        }
        write!(out, "e{}", e)
    }
}

/// Print a configuration error as `<param> <value> <unit> is not allowed: allowed <min> to <max> <unit>`.
pub fn write_config_error(out: &mut impl Write, e: &undertone_dsp::ConfigError) -> core::fmt::Result {
    let u = e.param.unit();
    let sp = if u.is_empty() { "" } else { " " };
    out.write_str(e.param.name())?;
    out.write_char(' ')?;
    write_f32(out, e.value)?;
    write!(out, "{sp}{u} is not allowed: allowed ")?;
    write_f32(out, e.min)?;
    write!(out, "{sp}{u} to ")?;
    write_f32(out, e.max)?;
    write!(out, "{sp}{u}")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn show(v: f32) -> std::string::String {
        let mut s = std::string::String::new();
        write_f32(&mut s, v).unwrap();
        s
    }

    #[test]
    fn prints_like_a_person_writes() {
        assert_eq!(show(512.0), "512");
        assert_eq!(show(0.74282), "0.74282");
        assert_eq!(show(7200.0), "7200");
        assert_eq!(show(-1.5), "-1.5");
        assert_eq!(show(0.0012), "0.0012");
        assert_eq!(show(2.5e-8), "2.5e-8");
        assert_eq!(show(3.0e38), "3e38");
        assert_eq!(show(f32::NAN), "nan");
    }

    #[test]
    fn parses_what_it_prints_and_refuses_junk() {
        for v in [512.0f32, 0.74282, -1.5, 2.5e-8, 1.0e-30, 3.0e38, 123_456.7] {
            let p = parse_f32(&show(v)).unwrap();
            assert!((p - v).abs() <= 1e-5 * v.abs(), "{v} -> {} -> {p}", show(v));
        }
        assert_eq!(parse_f32("1e3"), Some(1000.0));
        assert_eq!(parse_f32(".5"), Some(0.5));
        for bad in ["", "-", ".", "1e", "1.2.3", "abc", "12x", "e5", "1e+"] {
            assert_eq!(parse_f32(bad), None, "{bad}");
        }
        assert_eq!(parse_f32("1e99"), Some(f32::INFINITY));
    }
}
