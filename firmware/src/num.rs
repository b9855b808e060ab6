//! Number printing and parsing for the settings protocol and the screen.
//!
//! * [`write_f32`] prints the shortest decimal that reads back as the same
//!   `f32`: for 1, 2, … 9 significant digits a candidate from `f64` arithmetic
//!   and its two neighbours are read back by [`parse_f32`]; the first that
//!   gives the same bits wins (nine digits always identify an `f32`). Plain
//!   notation for 10⁻³ ≤ |v| < 10⁷, exponent notation outside (so subnormals
//!   and the extremes print in a dozen characters), `nan`, `inf`, `-inf`.
//!   [`write_fixed`] prints a set number of decimals for the screen.
//!   Neither uses `core`'s float formatting, which would cost about 12 KiB of
//!   the board's flash.
//! * [`parse_f32`] reads `[+-]digits[.digits][e[+-]digits]`, `inf`, `infinity`
//!   and `nan` (any case), correctly rounded (round half to even), including
//!   subnormals, overflow to infinity and underflow to zero. `core`'s parser
//!   is also exact but carries a 20 KiB table of powers of five; this one finds
//!   a candidate in `f64` and settles it by comparing the decimal exactly with
//!   the midpoints to its neighbours, in a 1024-bit integer.
//!
//! Both are checked against `core` on the host by property tests over every
//! class of float (normal, subnormal, zero, infinities, NaN).

use core::cmp::Ordering;
use core::fmt::Write;

/// Print `v`: the shortest decimal that reads back as `v`.
pub fn write_f32(out: &mut dyn Write, v: f32) -> core::fmt::Result {
    if v.is_nan() {
        return out.write_str("nan");
    }
    if v.is_infinite() {
        return out.write_str(if v < 0.0 { "-inf" } else { "inf" });
    }
    if v == 0.0 {
        return out.write_str(if v.is_sign_negative() { "-0" } else { "0" });
    }
    let (digits, exp) = shortest(v);
    if v < 0.0 {
        out.write_char('-')?;
    }
    let mut d = [0u8; 10];
    let n = decimal_digits(digits, &mut d);
    let d = &d[..n];
    // `exp` is the power of ten of the first digit.
    if (-3..7).contains(&exp) {
        if exp < 0 {
            out.write_str("0.")?;
            for _ in 0..(-exp - 1) {
                out.write_char('0')?;
            }
            for &c in d {
                out.write_char(c as char)?;
            }
        } else {
            let int = exp as usize + 1;
            for i in 0..int.max(n) {
                if i == int {
                    out.write_char('.')?;
                }
                out.write_char(*d.get(i).unwrap_or(&b'0') as char)?;
            }
        }
        Ok(())
    } else {
        for (i, &c) in d.iter().enumerate() {
            if i == 1 {
                out.write_char('.')?;
            }
            out.write_char(c as char)?;
        }
        write!(out, "e{exp}")
    }
}

/// The ASCII digits of `n` (no trailing zeros: the caller strips them), most significant first.
fn decimal_digits(mut n: u64, out: &mut [u8; 10]) -> usize {
    let mut tmp = [0u8; 20];
    let mut k = 0;
    while n > 0 || k == 0 {
        tmp[k] = b'0' + (n % 10) as u8;
        n /= 10;
        k += 1;
    }
    let k = k.min(10);
    for i in 0..k {
        out[i] = tmp[k - 1 - i];
    }
    k
}

/// The fewest significant digits `d` (as an integer without trailing zeros) and the power of ten
/// of the first one such that `d·10^(exp − len + 1)` parses back to `|v|` exactly. Candidates
/// come from `f64` arithmetic (exact for the `f32` input, one rounding for the scaling); each is
/// settled by the exact parser, trying the neighbours too, so an `f64` rounding at a tie cannot
/// make a wrong or longer answer than the nearest decimal gives.
fn shortest(v: f32) -> (u64, i32) {
    let a = libm::fabsf(v);
    let x = a as f64;
    // In f32 (`ln x·log₁₀ e`, from the `logf` in the image already; f64's would add 0.7 KiB): off by one at
    // most near powers of ten, which the two steps below settle.
    let mut e10 = libm::floorf(undertone_dsp::powf::log10f(a)) as i32;
    if x >= pow10_signed(e10 + 1) {
        e10 += 1;
    } else if x < pow10_signed(e10) {
        e10 -= 1;
    }
    for p in 1..=9i32 {
        let k = e10 - p + 1;
        let scaled = x / pow10_signed(k);
        let c = libm::round(scaled) as u64;
        for cand in [c, c.wrapping_sub(1), c + 1] {
            if cand == 0 {
                continue;
            }
            if reads_back(cand, k, a) {
                let (mut d, mut k) = (cand, k);
                while d % 10 == 0 {
                    d /= 10;
                    k += 1;
                }
                let len = count_digits(d) as i32;
                return (d, k + len - 1);
            }
        }
    }
    // Nine digits always identify an f32; this is not reached.
    (libm::round(x / pow10_signed(e10 - 8)) as u64, e10)
}

fn count_digits(mut d: u64) -> u32 {
    let mut n = 1;
    while d >= 10 {
        d /= 10;
        n += 1;
    }
    n
}

fn pow10_signed(e: i32) -> f64 {
    let p = pow10_f64(e.unsigned_abs());
    if e < 0 {
        1.0 / p
    } else {
        p
    }
}

/// Does `d·10^k` parse back to `a` exactly?
fn reads_back(d: u64, k: i32, a: f32) -> bool {
    let mut digs: heapless::Vec<u8, MAX_DIGITS> = heapless::Vec::new();
    let mut buf = [0u8; 10];
    let n = decimal_digits(d, &mut buf);
    for &c in &buf[..n] {
        let _ = digs.push(c - b'0');
    }
    let lead = k + n as i32 - 1;
    if !(-46..=39).contains(&lead) {
        return false;
    }
    nearest(&digs, k, false).to_bits() == a.to_bits()
}

/// Print `v` with `decimals` digits after the point, rounded half away from zero (integer
/// arithmetic on the `f64` value; a negative value keeps its sign even when it rounds to zero,
/// as `core` prints it; values of 2·10⁹ or more in the last decimal, more than 9 decimals or not finite go through [`write_f32`]).
pub fn write_fixed(out: &mut dyn Write, v: f32, decimals: u32) -> core::fmt::Result {
    let scale = pow10_f64(decimals);
    let x = v as f64 * scale;
    // 32-bit integers (the board has no 64-bit divide); larger values print with an exponent.
    if decimals > 9 || !(libm::fabs(x) < 2e9) {
        return write_f32(out, v);
    }
    let n = libm::round(x) as i32;
    if v < 0.0 {
        out.write_char('-')?;
    }
    let a = n.unsigned_abs();
    let s = scale as u32;
    write!(out, "{}", a / s)?;
    if decimals > 0 {
        write!(out, ".{:0w$}", a % s, w = decimals as usize)?;
    }
    Ok(())
}

/// [`write_fixed`] with a sign always shown.
pub fn write_fixed_signed(out: &mut dyn Write, v: f32, decimals: u32) -> core::fmt::Result {
    if !(v < 0.0) {
        out.write_char('+')?;
    }
    write_fixed(out, v, decimals)
}

/// Parse a decimal number; `None` when the text is not one.
pub fn parse_f32(s: &str) -> Option<f32> {
    let b = s.as_bytes();
    let mut i = 0;
    let neg = take_sign(b, &mut i);
    let signed = |v: f32| if neg { -v } else { v };
    let rest = &b[i..];
    if rest.eq_ignore_ascii_case(b"inf") || rest.eq_ignore_ascii_case(b"infinity") {
        return Some(signed(f32::INFINITY));
    }
    if rest.eq_ignore_ascii_case(b"nan") {
        return Some(f32::NAN);
    }
    // Significant digits (leading zeros skipped) up to MAX_DIGITS; nonzero digits past that set
    // `sticky`. `exp10` is the power of ten of the last digit kept.
    let mut digs: heapless::Vec<u8, MAX_DIGITS> = heapless::Vec::new();
    let mut exp10: i32 = 0;
    let mut digits = 0;
    let mut sticky = false;
    let mut frac = false;
    while i < b.len() {
        let c = b[i];
        if c == b'.' && !frac {
            frac = true;
        } else if c.is_ascii_digit() {
            let d = c - b'0';
            digits += 1;
            let leading_zero = digs.is_empty() && d == 0;
            if leading_zero || digs.push(d).is_ok() {
                if frac {
                    exp10 -= 1;
                }
            } else {
                sticky |= d != 0;
                if !frac {
                    exp10 = exp10.saturating_add(1);
                }
            }
        } else {
            break;
        }
        i += 1;
    }
    if digits == 0 {
        return None;
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        i += 1;
        let eneg = take_sign(b, &mut i);
        let start = i;
        let mut e: i32 = 0;
        while i < b.len() && b[i].is_ascii_digit() {
            e = (e * 10 + (b[i] - b'0') as i32).min(100_000);
            i += 1;
        }
        if i == start {
            return None;
        }
        exp10 = exp10.saturating_add(if eneg { -e } else { e });
    }
    if i != b.len() {
        return None;
    }
    while digs.last() == Some(&0) {
        digs.pop();
        exp10 += 1;
    }
    if digs.is_empty() {
        return Some(signed(0.0));
    }
    // Decimal exponent of the leading digit: the value lies in [10^lead, 10^(lead+1)).
    let lead = exp10.saturating_add(digs.len() as i32 - 1);
    if lead > 39 {
        return Some(signed(f32::INFINITY));
    }
    if lead < -46 {
        return Some(signed(0.0));
    }
    Some(signed(nearest(&digs, exp10, sticky)))
}

/// Most significant digits kept exactly. Every midpoint between two neighbouring
/// `f32` values, `(2m+1)·2^(e−1)` with m < 2²⁴ and e ≥ −149, has at most 113
/// significant digits, so a decimal that agrees with one in its first 128 digits
/// is decided by whether any later digit is nonzero.
pub const MAX_DIGITS: usize = 128;

/// The `f32` nearest to `digits·10^exp10` (plus a sliver when `sticky`), ties to even.
fn nearest(digits: &[u8], exp10: i32, sticky: bool) -> f32 {
    let head = digits.len().min(19);
    let mant = digits[..head].iter().fold(0u64, |m, &d| m * 10 + d as u64);
    let e = exp10 + (digits.len() - head) as i32;
    let p = pow10_f64(e.unsigned_abs());
    let approx = if e < 0 { mant as f64 / p } else { mant as f64 * p };
    let mut big = Big::ZERO;
    for &d in digits {
        big.mul_small(10);
        big.add_small(d as u32);
    }
    let mut x = (approx as f32).min(f32::MAX);
    // The candidate is within a couple of units in the last place; settle it exactly.
    for _ in 0..8 {
        let (m, e) = decompose(x);
        // Upper midpoint (2m+1)·2^(e−1): above it (or on it with m odd) the answer is higher.
        let up = cmp_decimal(&big, exp10, sticky, 2 * m as u64 + 1, e - 1);
        if up == Ordering::Greater || (up == Ordering::Equal && m & 1 == 1) {
            if x == f32::MAX {
                return f32::INFINITY;
            }
            x = f32::from_bits(x.to_bits() + 1);
            continue;
        }
        if m == 0 {
            break;
        }
        // Lower midpoint: at the bottom of a binade the step below is half as large.
        let (lo_m, lo_e) = if m == 1 << 23 && e > -149 { (4 * m as u64 - 1, e - 2) } else { (2 * m as u64 - 1, e - 1) };
        let down = cmp_decimal(&big, exp10, sticky, lo_m, lo_e);
        if down == Ordering::Less || (down == Ordering::Equal && m & 1 == 1) {
            x = f32::from_bits(x.to_bits() - 1);
            continue;
        }
        break;
    }
    x
}

/// A non-negative finite `f32` as `m·2^e` (m < 2^24).
fn decompose(x: f32) -> (u32, i32) {
    let bits = x.to_bits();
    let biased = ((bits >> 23) & 0xFF) as i32;
    let frac = bits & 0x7F_FFFF;
    if biased == 0 {
        (frac, -149)
    } else {
        (frac | 1 << 23, biased - 150)
    }
}

/// Compare `d·10^q` (increased by a sliver when `sticky`) with `n·2^k`, exactly.
fn cmp_decimal(d: &Big, q: i32, sticky: bool, n: u64, k: i32) -> Ordering {
    // d·5^q·2^q against n·2^k: powers of five and two moved to the side where they are positive.
    let mut lhs = *d;
    let mut rhs = Big::from_u64(n);
    if q >= 0 {
        lhs.mul_pow5(q as u32);
    } else {
        rhs.mul_pow5(q.unsigned_abs());
    }
    if q >= k {
        lhs.shl((q - k) as u32);
    } else {
        rhs.shl((k - q) as u32);
    }
    match lhs.cmp(&rhs) {
        Ordering::Equal if sticky => Ordering::Greater,
        o => o,
    }
}

/// A 1024-bit unsigned integer (32 little-endian 32-bit limbs), enough for every
/// comparison [`parse_f32`] makes: at most 40 digits times 5³⁹ times 2¹⁹⁰ (values
/// below 10⁴⁰), 128 digits times 2⁸⁷, or a 26-bit midpoint times 5¹⁶⁷ times 2²⁷¹
/// (about 690 bits).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Big([u32; LIMBS]);

const LIMBS: usize = 32;

impl Big {
    const ZERO: Big = Big([0; LIMBS]);

    fn from_u64(v: u64) -> Self {
        let mut l = [0u32; LIMBS];
        l[0] = v as u32;
        l[1] = (v >> 32) as u32;
        Big(l)
    }

    fn mul_small(&mut self, k: u32) {
        let mut carry = 0u64;
        for l in self.0.iter_mut() {
            let t = *l as u64 * k as u64 + carry;
            *l = t as u32;
            carry = t >> 32;
        }
    }

    fn add_small(&mut self, k: u32) {
        let mut carry = k as u64;
        for l in self.0.iter_mut() {
            if carry == 0 {
                break;
            }
            let t = *l as u64 + carry;
            *l = t as u32;
            carry = t >> 32;
        }
    }

    fn mul_pow5(&mut self, mut n: u32) {
        // 5^13 = 1 220 703 125 < 2^32.
        while n >= 13 {
            self.mul_small(1_220_703_125);
            n -= 13;
        }
        self.mul_small(5u32.pow(n));
    }

    fn shl(&mut self, bits: u32) {
        let (w, b) = ((bits / 32) as usize, bits % 32);
        let mut out = [0u32; LIMBS];
        for i in (0..LIMBS).rev() {
            if i < w {
                break;
            }
            let lo = self.0[i - w];
            let below = if b > 0 && i > w { self.0[i - w - 1] >> (32 - b) } else { 0 };
            out[i] = if b > 0 { (lo << b) | below } else { lo };
        }
        self.0 = out;
    }
}

impl PartialOrd for Big {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for Big {
    fn cmp(&self, other: &Self) -> Ordering {
        self.0.iter().rev().cmp(other.0.iter().rev())
    }
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

/// Print a configuration error as `[coil i ]<param> <value> <unit> is not allowed: allowed <min> to <max> <unit>`.
pub fn write_config_error(out: &mut dyn Write, e: &undertone_dsp::ConfigError) -> core::fmt::Result {
    let u = e.param.unit();
    let sp = if u.is_empty() { "" } else { " " };
    if let Some(i) = e.param.coil() {
        write!(out, "coil {i} ")?;
    }
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
    use proptest::prelude::*;

    fn show(v: f32) -> std::string::String {
        let mut s = std::string::String::new();
        write_f32(&mut s, v).unwrap();
        s
    }

    #[test]
    fn prints_like_a_person_writes() {
        assert_eq!(show(512.0), "512");
        assert_eq!(show(0.74282), "0.74282");
        assert_eq!(show(0.9), "0.9");
        assert_eq!(show(-1.5), "-1.5");
        assert_eq!(show(0.0012), "0.0012");
        assert_eq!(show(2.5e-8), "2.5e-8");
        assert_eq!(show(3.0e38), "3e38");
        assert_eq!(show(f32::NAN), "nan");
        assert_eq!(show(f32::NEG_INFINITY), "-inf");
        // The two values the old printer got wrong.
        assert_eq!(show(f32::MIN_POSITIVE), "1.1754944e-38");
        assert_eq!(show(1e-40), "1e-40");
    }

    #[test]
    fn fixed_decimals_round_half_away_from_zero() {
        let fixed = |v: f32, d: u32| {
            let mut s = std::string::String::new();
            write_fixed(&mut s, v, d).unwrap();
            s
        };
        assert_eq!(fixed(-42.46, 1), "-42.5");
        assert_eq!(fixed(0.25, 1), "0.3");
        assert_eq!(fixed(-0.04, 1), "-0.0");
        assert_eq!(fixed(3.999, 2), "4.00");
        assert_eq!(fixed(512.3, 0), "512");
        assert_eq!(fixed(1e20, 2), "1e20");
        assert_eq!(fixed(f32::NAN, 1), "nan");
        // Against core's formatting where no tie is involved.
        for i in 0..2000 {
            let v = (i as f32 - 1000.0) * 0.0371;
            assert_eq!(fixed(v, 2), format!("{v:.2}"), "{v}");
        }
    }

    #[test]
    fn refuses_junk() {
        for bad in ["", "-", ".", "1e", "1.2.3", "abc", "12x", "e5", "1e+", "in", "nan1", "--1"] {
            assert_eq!(parse_f32(bad), None, "{bad}");
        }
        assert_eq!(parse_f32("1e99"), Some(f32::INFINITY));
        assert_eq!(parse_f32("-1e-99").map(f32::to_bits), Some((-0.0f32).to_bits()));
        assert_eq!(parse_f32(".5"), Some(0.5));
    }

    #[test]
    fn rounds_exact_halfway_cases_to_even() {
        // 2^24 + 1 is halfway between 2^24 and 2^24 + 2: to even, 2^24.
        assert_eq!(parse_f32("16777217"), Some(16_777_216.0));
        // 2^24 + 3 is halfway between 2^24 + 2 and 2^24 + 4: to even, 2^24 + 4.
        assert_eq!(parse_f32("16777219"), Some(16_777_220.0));
        // Half the smallest subnormal rounds to zero (even); a hair above rounds up.
        assert_eq!(
            parse_f32("7.00649232162408535461864791644958065640130970938257885878534141944895541342930300743319094181060791015625e-46"),
            Some(0.0)
        );
        assert_eq!(
            parse_f32("7.006492321624085354618647916449580656401309709382578858785341419448955413429303007433190941810607910156251e-46"),
            Some(f32::from_bits(1))
        );
        // Half an ulp above the largest finite value rounds (to even) to infinity.
        assert_eq!(parse_f32("340282356779733661637539395458142568448"), Some(f32::INFINITY));
        assert_eq!(parse_f32("340282356779733661637539395458142568447"), Some(f32::MAX));
    }

    /// Every class of float: any bit pattern (normal, subnormal, zero, infinities, NaN).
    fn any_f32() -> impl Strategy<Value = f32> {
        prop_oneof![
            any::<u32>().prop_map(f32::from_bits),
            (0u32..0x80_0000, any::<bool>()).prop_map(|(m, s)| f32::from_bits(m | (s as u32) << 31)),
            Just(0.0f32),
            Just(-0.0f32),
            Just(f32::INFINITY),
            Just(f32::NEG_INFINITY),
            Just(f32::NAN),
            Just(f32::MAX),
            Just(f32::MIN_POSITIVE),
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(20_000))]

        #[test]
        fn printing_and_parsing_round_trip(v in any_f32()) {
            let s = show(v);
            let back = parse_f32(&s).unwrap_or_else(|| panic!("{s} does not parse"));
            if v.is_nan() {
                prop_assert!(back.is_nan(), "{s}");
            } else {
                prop_assert_eq!(back.to_bits(), v.to_bits(), "{} -> {}", s, back);
            }
            // What is printed is core's shortest round-trip form, in one of its two notations.
            if v.is_finite() {
                prop_assert!(s == format!("{v}") || s == format!("{v:e}"), "{}", s);
            }
        }

        #[test]
        fn parsing_is_correctly_rounded(neg in any::<bool>(), int in "[0-9]{1,30}", frac in "[0-9]{0,40}", e in -90i32..50) {
            // Reference: core's parser, which is correctly rounded (round half to even).
            let s = format!("{}{int}.{frac}e{e}", if neg { "-" } else { "" });
            let want: f32 = s.parse().unwrap();
            let got = parse_f32(&s).unwrap();
            prop_assert_eq!(got.to_bits(), want.to_bits(), "{}", s);
        }

        #[test]
        fn midpoints_of_neighbours_round_to_even(bits in 0u32..0x7F7F_FFFF) {
            // The exact decimal halfway between a float and the next one up (f64 holds it exactly).
            let lo = f32::from_bits(bits) as f64;
            let hi = f32::from_bits(bits + 1) as f64;
            let mid = (lo + hi) / 2.0;
            let s = format!("{mid:e}");
            let want: f32 = s.parse().unwrap();
            prop_assert_eq!(parse_f32(&s).unwrap().to_bits(), want.to_bits(), "{}", s);
        }
    }
}
