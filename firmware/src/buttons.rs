//! Three push buttons, debounced in software, with short and long presses.
//!
//! Each button's level is sampled once per main-loop pass. A level counts only
//! once it has held for [`DEBOUNCE_MS`] (contact bounce of small tactile
//! switches lasts a few milliseconds; common practice). A press released
//! before [`LONG_MS`] is a short press, reported on release; a press held to
//! [`LONG_MS`] is a long press, reported at once, then repeated every
//! [`REPEAT_MS`] while held (for stepping values quickly).

/// The buttons, left to right.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Button {
    /// "−": previous, smaller.
    Minus,
    /// "OK": choose, confirm; long: back.
    Ok,
    /// "+": next, larger.
    Plus,
}

/// The buttons in pin order.
pub const BUTTONS: [Button; 3] = [Button::Minus, Button::Ok, Button::Plus];

/// A debounced press.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Press {
    /// Pressed and released within [`LONG_MS`].
    Short(Button),
    /// Held for [`LONG_MS`].
    Long(Button),
    /// Still held, every [`REPEAT_MS`] after the long press.
    Repeat(Button),
}

/// A level must hold this long to count, ms.
pub const DEBOUNCE_MS: u64 = 20;
/// A press held this long is a long press, ms.
pub const LONG_MS: u64 = 800;
/// Repeat period while a long press is held, ms.
pub const REPEAT_MS: u64 = 150;

#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
struct Debounce {
    raw: bool,
    raw_since_ms: u64,
    down: bool,
    down_since_ms: u64,
    next_repeat_ms: Option<u64>,
}

/// The debouncer for the three buttons.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Buttons {
    b: [Debounce; 3],
}

impl Buttons {
    /// All released.
    pub fn new() -> Self {
        Self::default()
    }

    /// Sample the levels (true = pressed) at `now_ms`; the presses completed, in button order.
    pub fn update(&mut self, now_ms: u64, pressed: [bool; 3]) -> heapless::Vec<Press, 3> {
        let mut out = heapless::Vec::new();
        for (i, d) in self.b.iter_mut().enumerate() {
            let button = BUTTONS[i];
            if pressed[i] != d.raw {
                d.raw = pressed[i];
                d.raw_since_ms = now_ms;
            }
            let settled = now_ms.saturating_sub(d.raw_since_ms) >= DEBOUNCE_MS;
            let ev = if settled && d.raw != d.down {
                d.down = d.raw;
                if d.down {
                    d.down_since_ms = now_ms;
                    d.next_repeat_ms = None;
                    None
                } else if d.next_repeat_ms.is_none() {
                    Some(Press::Short(button))
                } else {
                    None
                }
            } else if d.down {
                match d.next_repeat_ms {
                    None if now_ms.saturating_sub(d.down_since_ms) >= LONG_MS => {
                        d.next_repeat_ms = Some(now_ms + REPEAT_MS);
                        Some(Press::Long(button))
                    }
                    Some(t) if now_ms >= t => {
                        d.next_repeat_ms = Some(t + REPEAT_MS);
                        Some(Press::Repeat(button))
                    }
                    _ => None,
                }
            } else {
                None
            };
            if let Some(e) = ev {
                let _ = out.push(e);
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Run `levels(t)` every millisecond from `from` to `to`, collecting presses.
    fn run(b: &mut Buttons, from: u64, to: u64, levels: impl Fn(u64) -> [bool; 3]) -> std::vec::Vec<(u64, Press)> {
        let mut out = std::vec::Vec::new();
        for t in from..to {
            for p in b.update(t, levels(t)) {
                out.push((t, p));
            }
        }
        out
    }

    #[test]
    fn bouncy_short_press_is_one_press() {
        let mut b = Buttons::new();
        // OK pressed at 100 ms with 6 ms of bounce, released at 300 ms with bounce.
        let ev = run(&mut b, 0, 600, |t| {
            let down = (100..300).contains(&t) && !(t < 106 && t % 2 == 1) || (300..305).contains(&t) && t % 2 == 0;
            [false, down, false]
        });
        assert_eq!(ev.len(), 1, "{ev:?}");
        assert_eq!(ev[0].1, Press::Short(Button::Ok));
        // Reported once the release has held for the debounce time (last bounce at 305 ms).
        assert_eq!(ev[0].0, 305 + DEBOUNCE_MS);
    }

    #[test]
    fn long_press_repeats_and_gives_no_short() {
        let mut b = Buttons::new();
        let ev = run(&mut b, 0, 2000, |t| [(0..1500).contains(&t), false, false]);
        assert_eq!(ev[0], (DEBOUNCE_MS + LONG_MS, Press::Long(Button::Minus)));
        let repeats = ev.iter().filter(|(_, p)| *p == Press::Repeat(Button::Minus)).count();
        // Held 1500 ms: the long press at 820 ms, then a repeat every 150 ms until 1520 ms.
        assert_eq!(repeats, ((1500 + DEBOUNCE_MS - (DEBOUNCE_MS + LONG_MS)) / REPEAT_MS) as usize);
        assert!(!ev.iter().any(|(_, p)| matches!(p, Press::Short(_))));
    }

    #[test]
    fn glitches_shorter_than_the_debounce_are_ignored() {
        let mut b = Buttons::new();
        let ev = run(&mut b, 0, 500, |t| [false, false, t % 50 < 10]);
        assert!(ev.is_empty(), "{ev:?}");
    }
}
