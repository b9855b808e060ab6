//! Units at the edge: lengths in metres or in feet and inches, and numbers
//! written the way people read them.
//!
//! Everything inside is SI; only what is printed or plotted changes. Depths
//! go through the firmware's own length formatting
//! ([`undertone_dsp::format::length`]: metres with two decimals, or feet and
//! whole inches), so the simulator and the board's screen agree to the
//! character. Positions and distances along a walk are printed in metres or
//! in decimal feet (1 ft = 0.3048 m exactly, 12 in = 1 ft). JSON stays in
//! metres whatever the choice.

use undertone_dsp::format::{length, LengthUnit};

/// Metres per foot (exact, by definition of the international foot).
pub const M_PER_FT: f64 = 0.3048;

/// How lengths are shown.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum Units {
    /// Metres.
    #[default]
    Metric,
    /// Feet and inches (depths), decimal feet (positions).
    Imperial,
}

impl Units {
    /// The firmware's length unit.
    pub fn length_unit(self) -> LengthUnit {
        match self {
            Units::Metric => LengthUnit::Metres,
            Units::Imperial => LengthUnit::FeetInches,
        }
    }

    /// A depth or other length a person digs to: `1.52 m` or `5' 0"`; `--` when unknown.
    ///
    /// ```
    /// use undertone_sim::units::Units;
    /// assert_eq!(Units::Imperial.depth(1.524), "5' 0\"");
    /// assert_eq!(Units::Metric.depth(1.524), "1.52 m");
    /// assert_eq!(Units::Metric.depth(f64::NAN), "--");
    /// ```
    pub fn depth(self, m: f64) -> String {
        length(m as f32, self.length_unit()).as_str().to_string()
    }

    /// A depth with its one-sigma: `1.52 ± 0.03 m` or `5' 0" ± 1"`.
    ///
    /// ```
    /// use undertone_sim::units::Units;
    /// assert_eq!(Units::Metric.depth_sigma(1.5, 0.031), "1.50 ± 0.03 m");
    /// assert_eq!(Units::Imperial.depth_sigma(1.5, 0.05), "4' 11\" ± 2\"");
    /// assert_eq!(Units::Imperial.depth_sigma(3.0, 0.40), "9' 10\" ± 1' 4\"");
    /// ```
    pub fn depth_sigma(self, m: f64, sigma_m: f64) -> String {
        match self {
            Units::Metric => format!("{m:.2} ± {sigma_m:.2} m"),
            Units::Imperial => format!("{} ± {}", self.depth(m), inches(sigma_m)),
        }
    }

    /// A one-sigma alone: `0.03 m` or `1"`.
    pub fn sigma(self, sigma_m: f64) -> String {
        match self {
            Units::Metric => format!("{sigma_m:.2} m"),
            Units::Imperial => inches(sigma_m),
        }
    }

    /// A length for a table column or an axis, in the column's unit (m or ft).
    pub fn value(self, m: f64) -> f64 {
        match self {
            Units::Metric => m,
            Units::Imperial => m / M_PER_FT,
        }
    }

    /// The column and axis unit: `m` or `ft`.
    pub fn unit(self) -> &'static str {
        match self {
            Units::Metric => "m",
            Units::Imperial => "ft",
        }
    }

    /// A position or distance with its unit, two decimals: `-1.25 m` or `-4.10 ft`.
    pub fn dist(self, m: f64) -> String {
        if m.is_finite() {
            format!("{:.2} {}", self.value(m), self.unit())
        } else {
            "--".into()
        }
    }
}

/// A small length in whole inches (`2"`), or feet and inches from a foot up.
fn inches(m: f64) -> String {
    let n = (m.abs() / (M_PER_FT / 12.0)).round();
    if !n.is_finite() {
        "--".into()
    } else if n < 1.0 {
        "<1\"".into()
    } else if n < 12.0 {
        format!("{n:.0}\"")
    } else {
        length(m.abs() as f32, LengthUnit::FeetInches).as_str().to_string()
    }
}

/// A number with at most four significant digits and no trailing zeros, for
/// limits and values quoted in messages.
///
/// ```
/// use undertone_sim::units::num;
/// assert_eq!(num(31.570063), "31.57");
/// assert_eq!(num(7200.0), "7200");
/// assert_eq!(num(250000.0), "250000");
/// assert_eq!(num(0.05), "0.05");
/// assert_eq!(num(1e-12), "1e-12");
/// assert_eq!(num(-5.0), "-5");
/// ```
pub fn num(v: f64) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e7).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        let s = format!("{v:.3e}");
        match s.split_once('e') {
            Some((m, e)) => {
                let m = if m.contains('.') { m.trim_end_matches('0').trim_end_matches('.') } else { m };
                format!("{m}e{e}")
            }
            None => s,
        }
    }
}
