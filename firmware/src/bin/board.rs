//! The board program for the reference receiver: an STM32F411 (100 MHz
//! Cortex-M4F) with a 4-channel ADS131M04-class converter on SPI1.
//!
//! Wiring (see `firmware/README.md`): SPI1 SCK PA5, MISO PA6, MOSI PA7, chip
//! select PA4, data-ready PB0 (EXTI0, falling edge), converter clock from an
//! 8.192 MHz oscillator; speaker driver on PB5 (TIM3 channel 2 PWM); status
//! LED PC13. Readouts and replies are logged with defmt over RTT; commands
//! arrive on RTT down channel 0.
//!
//! Everything decided here is decided by the library (`App`, `Supervisor`,
//! `tone_for`): this file only wires the hardware to it.

#![no_std]
#![no_main]

use core::cell::RefCell;
use cortex_m_rt::entry;
use critical_section::Mutex;
use embedded_hal_bus::spi::{ExclusiveDevice, NoDelay};
use heapless::String;
use stm32f4xx_hal::{
    gpio::{Edge, ExtiPin, Input, Output, Pin},
    interrupt, pac,
    prelude::*,
    rcc::Config,
    spi::Spi,
    timer::Delay,
    watchdog::IndependentWatchdog,
};
use undertone_firmware::ads131::{Ads131, Osr};
use undertone_firmware::app::{App, Effect, REPLY};
use undertone_firmware::protocol::{LineBuffer, LineEvent};
use undertone_firmware::queue::FrameQueue;
use undertone_firmware::settings::Settings;
use undertone_firmware::storage::{LoadOutcome, Store};
use undertone_firmware::supervisor::{Action, Supervisor};
use undertone_firmware::tone::tone_for;

/// Converter output rate.
const OSR: Osr = Osr::R128;
/// Flash offset and size of the settings sector (sector 7 of the STM32F411CE).
const STORE_BASE: u32 = 0x6_0000;
const STORE_SIZE: u32 = 0x2_0000;

type Bus = ExclusiveDevice<Spi<pac::SPI1>, Pin<'A', 4, Output>, NoDelay>;
type Adc = Ads131<Bus, Pin<'B', 0, Input>, Delay<pac::TIM5, 1_000_000>, 4>;

static ADC: Mutex<RefCell<Option<Adc>>> = Mutex::new(RefCell::new(None));
static QUEUE: FrameQueue<4, 64> = FrameQueue::new();
static BAD_FRAMES: Mutex<core::cell::Cell<u32>> = Mutex::new(core::cell::Cell::new(0));

#[interrupt]
fn EXTI0() {
    critical_section::with(|cs| {
        if let Some(adc) = ADC.borrow_ref_mut(cs).as_mut() {
            adc.drdy_mut().clear_interrupt_pending_bit();
            match adc.read() {
                Ok(f) => {
                    QUEUE.push(f);
                }
                Err(_) => {
                    let c = BAD_FRAMES.borrow(cs);
                    c.set(c.get().saturating_add(1));
                }
            }
        }
    });
}

fn now_ms() -> u32 {
    // DWT cycle counter at 100 MHz.
    cortex_m::peripheral::DWT::cycle_count() / 100_000
}

#[entry]
fn main() -> ! {
    let channels = rtt_target::rtt_init! {
        up: { 0: { size: 2048, name: "defmt" } }
        down: { 0: { size: 128, name: "commands" } }
    };
    rtt_target::set_defmt_channel(channels.up.0);
    let mut commands = channels.down.0;

    let (Some(mut dp), Some(mut cp)) = (pac::Peripherals::take(), cortex_m::Peripherals::take()) else {
        defmt::panic!("peripherals already taken");
    };
    let mut rcc = dp.RCC.freeze(Config::hse(25.MHz()).sysclk(100.MHz()));
    cp.DCB.enable_trace();
    cp.DWT.enable_cycle_counter();

    let gpioa = dp.GPIOA.split(&mut rcc);
    let gpiob = dp.GPIOB.split(&mut rcc);
    let gpioc = dp.GPIOC.split(&mut rcc);
    let mut led = gpioc.pc13.into_push_pull_output();

    // Converter on SPI1, mode 1, 4 MHz.
    let spi = Spi::new(dp.SPI1, (Some(gpioa.pa5), Some(gpioa.pa6), Some(gpioa.pa7)), embedded_hal::spi::MODE_1, 4.MHz(), &mut rcc);
    let cs = gpioa.pa4.into_push_pull_output();
    let Ok(bus) = ExclusiveDevice::new(spi, cs, NoDelay);
    let mut drdy = gpiob.pb0.into_pull_up_input();
    let mut syscfg = dp.SYSCFG.constrain(&mut rcc);
    drdy.make_interrupt_source(&mut syscfg);
    drdy.trigger_on_edge(&mut dp.EXTI, Edge::Falling);
    drdy.enable_interrupt(&mut dp.EXTI);
    let delay = dp.TIM5.delay_us(&mut rcc);
    let mut adc: Adc = Ads131::new(bus, drdy, delay);

    // Settings from the last flash sector.
    let mut flash = stm32f4xx_hal::flash::LockedFlash::new(dp.FLASH);
    let (settings, outcome) = {
        let unlocked = stm32f4xx_hal::flash::FlashExt::unlocked(&mut flash);
        match Store::new(unlocked, STORE_BASE, STORE_SIZE) {
            Ok(mut st) => st.load(Settings::defaults()),
            Err(_) => (Settings::defaults(), LoadOutcome::Corrupt),
        }
    };
    match outcome {
        LoadOutcome::Loaded { slot } => defmt::info!("settings loaded from slot {=u32}", slot),
        LoadOutcome::Empty => defmt::warn!("no stored settings: defaults"),
        LoadOutcome::Corrupt => defmt::warn!("stored settings corrupt: defaults"),
        LoadOutcome::OtherVersion { found } => defmt::warn!("stored settings are version {=u16}: defaults", found),
        LoadOutcome::Invalid => defmt::warn!("stored settings invalid: defaults"),
    }
    let fsc = 8_388_607;
    let (mut app, refused) = match App::new(settings, Settings::defaults(), OSR.rate_hz(), fsc, [1.0 / fsc as f32; 4]) {
        Ok(a) => a,
        Err(_) => defmt::panic!("factory settings do not build"),
    };
    if refused.is_some() {
        defmt::warn!("stored settings refused by the receiver: defaults");
    }

    match adc.init(OSR, [0; 4]) {
        Ok(()) => defmt::info!("converter ready"),
        Err(_) => defmt::error!("converter did not initialise; will retry"),
    }
    critical_section::with(|cs| ADC.borrow_ref_mut(cs).replace(adc));
    // SAFETY: the handler only touches state behind critical sections.
    #[allow(unsafe_code)] // unmasking an interrupt is `unsafe` in cortex-m; the one place this crate needs it
    unsafe {
        cortex_m::peripheral::NVIC::unmask(pac::Interrupt::EXTI0)
    };

    // Speaker on TIM3 channel 2 (PB5).
    let (mut pwm_mgr, (_, ch2, ..)) = dp.TIM3.pwm_hz(1.kHz(), &mut rcc);
    let mut speaker = ch2.with(gpiob.pb5);
    speaker.set_duty(0);
    speaker.enable();

    let mut wdg = IndependentWatchdog::new(dp.IWDG);
    wdg.start(500.millis());

    let mut sup = Supervisor::new(now_ms());
    let mut lines = LineBuffer::new();
    let mut reply: String<REPLY> = String::new();
    let mut tone = undertone_firmware::tone::Tone::Off;
    let mut last_pitch = 0.0f32;
    loop {
        let t = now_ms();
        // Drain the queue a burst at a time into the receiver's fast path.
        let mut burst = [[0i32; 4]; 16];
        let mut k = 0;
        while k < burst.len() {
            match QUEUE.pop() {
                Some(f) => {
                    burst[k] = f;
                    k += 1;
                }
                None => break,
            }
        }
        if k > 0 {
            sup.good_frame(t);
        }
        let mut readouts: heapless::Vec<undertone_dsp::Readout<4>, 2> = heapless::Vec::new();
        app.process_block(&burst[..k], |r| {
            let _ = readouts.push(r);
        });
        for r in readouts.iter() {
            let (d, sd) = r.depth().map(|e| (e.depth_m, e.sigma_m)).unwrap_or((f32::NAN, f32::NAN));
            defmt::info!(
                "t={=f64} str={=f32} dB={=f32} snr={=f32} bear={=f32} {=str} depth={=f32}±{=f32} flags={=u32:x}",
                r.t_s,
                r.strength,
                r.strength_db,
                r.snr_db,
                r.bearing_deg,
                r.state.name(),
                d,
                sd,
                r.flags.0
            );
            tone = tone_for(r);
            if let Some(g) = r.gain_request {
                let ch = g.channel as usize;
                let stepped = critical_section::with(|cs| {
                    ADC.borrow_ref_mut(cs).as_mut().and_then(|a| {
                        let old = a.gains()[ch];
                        let new = if g.up { old.saturating_add(1).min(7) } else { old.saturating_sub(1) };
                        (new != old && a.set_gain(ch, new).is_ok()).then_some(new > old)
                    })
                });
                if let Some(up) = stepped {
                    app.gain_changed(ch, if up { 2.0 } else { 0.5 });
                }
            }
        }
        app.note_overruns(QUEUE.take_overruns());
        let bad = critical_section::with(|cs| BAD_FRAMES.borrow(cs).replace(0));
        for _ in 0..bad {
            sup.bad_frame();
        }
        if sup.poll(t) == Action::Reinit {
            defmt::warn!("converter fault: re-initialising");
            let ok = critical_section::with(|cs| ADC.borrow_ref_mut(cs).as_mut().map(|a| a.init(OSR, [0; 4]).is_ok()).unwrap_or(false));
            if ok {
                defmt::info!("converter back");
            }
        }
        // Commands.
        let mut buf = [0u8; 32];
        let n = commands.read(&mut buf);
        for &b in &buf[..n] {
            match lines.push(b) {
                LineEvent::Line(l) => {
                    if app.command(&l, &mut reply) == Effect::Save {
                        let unlocked = stm32f4xx_hal::flash::FlashExt::unlocked(&mut flash);
                        let saved = Store::new(unlocked, STORE_BASE, STORE_SIZE)
                            .ok()
                            .map(|mut st| st.save(app.settings()).is_ok())
                            .unwrap_or(false);
                        if !saved {
                            reply.clear();
                            let _ = reply.push_str("err save failed: flash error");
                        }
                    }
                    defmt::info!("{=str}", reply.as_str());
                }
                LineEvent::TooLong => defmt::info!("err line too long (at most 96 characters)"),
                LineEvent::NotText => defmt::info!("err line is not text"),
                LineEvent::None => {}
            }
        }
        // Tone.
        let pitch = tone.pitch_at(t);
        if pitch != last_pitch {
            if pitch > 0.0 {
                pwm_mgr.set_period((pitch as u32).Hz());
                speaker.set_duty(speaker.get_max_duty() / 2);
            } else {
                speaker.set_duty(0);
            }
            last_pitch = pitch;
        }
        if sup.state == undertone_firmware::supervisor::PathState::Running {
            led.set_low();
        } else {
            led.toggle();
        }
        wdg.feed();
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    defmt::error!("panic: {}", defmt::Display2Format(info));
    cortex_m::peripheral::SCB::sys_reset()
}
