//! The battery: one lithium-ion cell (3.0–4.2 V) read by the MCU's 12-bit ADC
//! through a resistor divider.
//!
//! Voltage: `V = code/4095 · V_ref · (R_top + R_bottom)/R_bottom`, smoothed by
//! an exponential average with a time constant of [`SMOOTH_S`] (the load steps
//! of the speaker and the screen would otherwise make it flicker). Charge: the
//! open-circuit voltage of a lithium-ion cell against its state of charge,
//! interpolated linearly in [`CHARGE_CURVE`] (a typical curve of the trade,
//! values from memory; a cell under load reads a little low, so the estimate is
//! on the safe side). Below [`LOW_V`] the screen warns; below [`FLAT_V`] the
//! firmware stops saving settings, so that a brown-out cannot catch a flash
//! write (the stored log keeps the last good record in any case).

/// A divider from the battery to the ADC pin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Divider {
    /// Resistor from the battery to the pin, Ω.
    pub r_top_ohm: f32,
    /// Resistor from the pin to ground, Ω.
    pub r_bottom_ohm: f32,
    /// ADC reference voltage, V.
    pub vref_v: f32,
    /// Full-scale ADC code.
    pub full_code: u16,
}

/// The reference board: 100 kΩ over 100 kΩ into a 12-bit ADC with a 3.3 V reference.
pub const BOARD_DIVIDER: Divider = Divider { r_top_ohm: 100_000.0, r_bottom_ohm: 100_000.0, vref_v: 3.3, full_code: 4095 };

impl Divider {
    /// Battery voltage for an ADC code, V.
    pub fn volts(&self, code: u16) -> f32 {
        code.min(self.full_code) as f32 / self.full_code as f32 * self.vref_v * (self.r_top_ohm + self.r_bottom_ohm) / self.r_bottom_ohm
    }

    /// The ADC code a battery voltage gives (for tests and the emulator).
    pub fn code(&self, volts: f32) -> u16 {
        let c = volts * self.r_bottom_ohm / (self.r_top_ohm + self.r_bottom_ohm) / self.vref_v * self.full_code as f32;
        libm::roundf(c.clamp(0.0, self.full_code as f32)) as u16
    }
}

/// Smoothing time constant, s.
pub const SMOOTH_S: f32 = 2.0;
/// Below this the screen warns of a low battery, V.
pub const LOW_V: f32 = 3.5;
/// Below this the battery is flat: settings are no longer saved, V.
pub const FLAT_V: f32 = 3.3;
/// A warning clears only this far above its threshold, V.
pub const HYSTERESIS_V: f32 = 0.05;
/// Open-circuit voltage (V) against charge (%) of a lithium-ion cell.
pub const CHARGE_CURVE: [(f32, f32); 12] = [
    (3.00, 0.0),
    (3.45, 5.0),
    (3.68, 10.0),
    (3.74, 20.0),
    (3.77, 30.0),
    (3.79, 40.0),
    (3.82, 50.0),
    (3.87, 60.0),
    (3.92, 70.0),
    (3.98, 80.0),
    (4.06, 90.0),
    (4.20, 100.0),
];

/// Charge estimate for a voltage, % (0–100).
pub fn charge_percent(v: f32) -> f32 {
    let c = &CHARGE_CURVE;
    if !(v > c[0].0) {
        return 0.0;
    }
    for w in c.windows(2) {
        let ((v0, p0), (v1, p1)) = (w[0], w[1]);
        if v <= v1 {
            return p0 + (p1 - p0) * (v - v0) / (v1 - v0);
        }
    }
    100.0
}

/// How the battery stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Level {
    /// Fine.
    Ok,
    /// Low: warn.
    Low,
    /// Flat: warn, and stop saving.
    Flat,
}

/// What the screen shows of the battery.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BatteryView {
    /// Smoothed voltage, V.
    pub volts: f32,
    /// Charge estimate, %.
    pub percent: f32,
    /// Level.
    pub level: Level,
}

/// The battery monitor.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Battery {
    divider: Divider,
    volts: Option<f32>,
    last_ms: u64,
    level: Level,
}

impl Battery {
    /// A monitor reading through `divider`.
    pub fn new(divider: Divider) -> Self {
        Self { divider, volts: None, last_ms: 0, level: Level::Ok }
    }

    /// A new ADC reading at `now_ms`.
    pub fn update(&mut self, now_ms: u64, code: u16) {
        let v = self.divider.volts(code);
        let smoothed = match self.volts {
            None => v,
            Some(old) => {
                let dt = now_ms.saturating_sub(self.last_ms) as f32 / 1000.0;
                let a = (dt / SMOOTH_S).min(1.0);
                old + a * (v - old)
            }
        };
        self.volts = Some(smoothed);
        self.last_ms = now_ms;
        self.level = match self.level {
            _ if smoothed < FLAT_V => Level::Flat,
            Level::Flat if smoothed < FLAT_V + HYSTERESIS_V => Level::Flat,
            _ if smoothed < LOW_V => Level::Low,
            Level::Low | Level::Flat if smoothed < LOW_V + HYSTERESIS_V => Level::Low,
            _ => Level::Ok,
        };
    }

    /// What to show (None before the first reading).
    pub fn view(&self) -> Option<BatteryView> {
        self.volts.map(|v| BatteryView { volts: v, percent: charge_percent(v), level: self.level })
    }

    /// True when settings may be saved (a reading exists and the battery is not flat; no reading:
    /// a board without the divider fitted, saving allowed).
    pub fn can_save(&self) -> bool {
        self.level != Level::Flat
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn divider_and_charge() {
        let d = BOARD_DIVIDER;
        // 3.7 V over a 1:2 divider is 1.85 V at the pin: 1.85/3.3·4095 = 2295.7.
        assert_eq!(d.code(3.7), 2296);
        assert!((d.volts(2296) - 3.7).abs() < 2e-3);
        assert_eq!(charge_percent(4.3), 100.0);
        assert_eq!(charge_percent(2.9), 0.0);
        assert!((charge_percent(3.82) - 50.0).abs() < 1e-4);
        assert!((charge_percent(3.85) - 56.0).abs() < 1e-3);
    }

    #[test]
    fn warns_low_then_flat_and_clears_with_hysteresis() {
        let mut b = Battery::new(BOARD_DIVIDER);
        let mut t = 0;
        let mut run = |b: &mut Battery, v: f32, secs: u64| {
            for _ in 0..secs * 10 {
                t += 100;
                b.update(t, BOARD_DIVIDER.code(v));
            }
        };
        run(&mut b, 3.9, 5);
        assert_eq!(b.view().unwrap().level, Level::Ok);
        run(&mut b, 3.45, 20);
        assert_eq!(b.view().unwrap().level, Level::Low);
        assert!(b.can_save());
        run(&mut b, 3.2, 20);
        assert_eq!(b.view().unwrap().level, Level::Flat);
        assert!(!b.can_save());
        // Back to 3.32 V (a rested cell): still flat within the hysteresis.
        run(&mut b, 3.32, 20);
        assert_eq!(b.view().unwrap().level, Level::Flat);
        run(&mut b, 3.9, 20);
        assert_eq!(b.view().unwrap().level, Level::Ok);
    }
}
