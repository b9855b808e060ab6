//! The board program for the reference receiver: an STM32F411 (100 MHz
//! Cortex-M4F) with a 4-channel ADS131M04-class converter on SPI1, a 128×64
//! SSD1306-class OLED on I2C1, three buttons and a battery divider.
//!
//! Wiring (see `firmware/README.md`): SPI1 SCK PA5, MISO PA6, MOSI PA7, chip
//! select PA4, data-ready PB0 (EXTI0, falling edge); OLED SCL PB6, SDA PB7;
//! buttons − PB12, OK PB13, + PB14 (to ground, internal pull-ups); battery
//! divider PA1 (ADC1 channel 1); speaker PB5 (TIM3 channel 2 PWM); status LED
//! PC13. The log goes out with defmt over RTT; commands arrive on RTT down
//! channel 0.
//!
//! This file only wires the hardware to the library's `App`, whose `step` is the
//! whole main loop; the data-ready interrupt reads frames into the queue.

#![no_std]
#![no_main]

use core::cell::RefCell;
use cortex_m_rt::entry;
use critical_section::Mutex;
use embedded_hal_bus::spi::ExclusiveDevice;
use ssd1306::command::AddrMode;
use ssd1306::mode::BasicMode;
use ssd1306::prelude::*;
use ssd1306::{I2CDisplayInterface, Ssd1306};
use stm32f4xx_hal::{
    adc::config::{AdcConfig, SampleTime},
    adc::Adc,
    flash::{FlashExt, LockedFlash},
    gpio::{Edge, ExtiPin, Input, Output, Pin},
    i2c::I2c,
    interrupt, pac,
    prelude::*,
    rcc::Config,
    spi::Spi,
    timer::Delay,
    watchdog::IndependentWatchdog,
};
use undertone_dsp::format::length;
use undertone_firmware::ads131::{read_into, Ads131, Osr};
use undertone_firmware::app::{App, Event, Hardware, Inputs, Panel, PanelError, SettingsStore, Shared};
use undertone_firmware::battery::BOARD_DIVIDER;
use undertone_firmware::queue::{split, FrameProducer, FrameQueue, PathCounts};
use undertone_firmware::settings::Settings;
use undertone_firmware::storage::{LoadOutcome, Store, StoreError};

/// Converter output rate.
const OSR: Osr = Osr::R128;
/// Flash offset and size of the settings sector (sector 7 of the STM32F411CE).
const STORE_BASE: u32 = 0x6_0000;
const STORE_SIZE: u32 = 0x2_0000;
/// Core clock, Hz (the DWT cycle counter's rate).
const CORE_HZ: u32 = 100_000_000;
/// Frames the queue holds: 255 at 32 kSPS is 8 ms, more than a screen page transfer takes.
const QUEUE_CAP: usize = 256;
/// Battery readings per second.
const BATTERY_EVERY_MS: u64 = 100;

type Bus = ExclusiveDevice<Spi<pac::SPI1>, Pin<'A', 4, Output>, SpinDelay>;

/// Delays inside an SPI transaction (the converter's driver asks for none): a busy wait at
/// the 100 MHz core clock. The bus crate's `NoDelay` would panic instead, and its message costs
/// more flash than this loop.
struct SpinDelay;

impl embedded_hal::delay::DelayNs for SpinDelay {
    fn delay_ns(&mut self, ns: u32) {
        cortex_m::asm::delay(ns / 10 + 1);
    }
}
type Adc131 = Ads131<Bus, Pin<'B', 0, Input>, Delay<pac::TIM5, 1_000_000>, 4>;
type BoardApp = App<Shared<'static, Adc131>, Oled, FlashStore, 4>;

static ADC: Mutex<RefCell<Option<Adc131>>> = Mutex::new(RefCell::new(None));
static PRODUCER: Mutex<RefCell<Option<FrameProducer<'static, 4>>>> = Mutex::new(RefCell::new(None));
static COUNTS: PathCounts = PathCounts::new();

#[interrupt]
fn EXTI0() {
    critical_section::with(|cs| {
        if let (Some(adc), Some(tx)) = (ADC.borrow_ref_mut(cs).as_mut(), PRODUCER.borrow_ref_mut(cs).as_mut()) {
            adc.drdy_mut().clear_interrupt_pending_bit();
            read_into(adc, tx);
        }
    });
}

/// The OLED, taking one page at a time.
struct Oled(Ssd1306<I2CInterface<I2c<pac::I2C1>>, DisplaySize128x64, BasicMode>);

impl Panel for Oled {
    fn send_page(&mut self, page: usize, bytes: &[u8]) -> Result<(), PanelError> {
        let y = (page * 8) as u8;
        self.0.set_draw_area((0, y), (128, y + 8)).map_err(|_| PanelError)?;
        self.0.draw(bytes).map_err(|_| PanelError)
    }
}

/// The settings sector, unlocked only while it is written.
struct FlashStore(LockedFlash);

impl SettingsStore<4> for FlashStore {
    fn load(&mut self, defaults: Settings<4>) -> (Settings<4>, LoadOutcome) {
        match Store::new(self.0.unlocked(), STORE_BASE, STORE_SIZE) {
            Ok(mut st) => st.load(defaults),
            Err(_) => (defaults, LoadOutcome::Corrupt),
        }
    }
    fn save(&mut self, s: &Settings<4>) -> Result<u32, StoreError> {
        Store::new(self.0.unlocked(), STORE_BASE, STORE_SIZE)?.save(s)
    }
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

    // Converter on SPI1, mode 1, 12.5 MHz (APB2/8; the converter takes up to 25 MHz): a frame of
    // 18 bytes takes 11.5 µs of the 31.25 µs between conversions at 32 kSPS.
    let spi = Spi::new(dp.SPI1, (Some(gpioa.pa5), Some(gpioa.pa6), Some(gpioa.pa7)), embedded_hal::spi::MODE_1, 12_500.kHz(), &mut rcc);
    let cs = gpioa.pa4.into_push_pull_output();
    let Ok(bus) = ExclusiveDevice::new(spi, cs, SpinDelay);
    let mut drdy = gpiob.pb0.into_pull_up_input();
    let mut syscfg = dp.SYSCFG.constrain(&mut rcc);
    drdy.make_interrupt_source(&mut syscfg);
    drdy.trigger_on_edge(&mut dp.EXTI, Edge::Falling);
    drdy.enable_interrupt(&mut dp.EXTI);
    let delay = dp.TIM5.delay_us(&mut rcc);
    let mut adc: Adc131 = Ads131::new(bus, drdy, delay);
    match adc.init(OSR, [0; 4]) {
        Ok(()) => defmt::info!("converter ready"),
        Err(_) => defmt::error!("converter did not initialise; will retry"),
    }

    // OLED on I2C1 at 400 kHz: a page of 128 bytes takes about 3 ms.
    let i2c = I2c::new(dp.I2C1, (gpiob.pb6, gpiob.pb7), 400.kHz(), &mut rcc);
    let mut oled = Ssd1306::new(I2CDisplayInterface::new(i2c), DisplaySize128x64, DisplayRotation::Rotate0);
    if oled.init_with_addr_mode(AddrMode::Horizontal).is_err() {
        defmt::warn!("screen did not answer; carrying on without it");
    }

    // Buttons to ground with pull-ups; battery divider on PA1.
    let minus = gpiob.pb12.into_pull_up_input();
    let ok = gpiob.pb13.into_pull_up_input();
    let plus = gpiob.pb14.into_pull_up_input();
    let battery_pin = gpioa.pa1.into_analog();
    let mut battery_adc = Adc::new(dp.ADC1, true, AdcConfig::default(), &mut rcc);

    // The frame queue, split between the interrupt and the main loop.
    let Some(queue) = cortex_m::singleton!(: FrameQueue<4, QUEUE_CAP> = FrameQueue::new()) else {
        defmt::panic!("queue already taken");
    };
    let (tx, mut rx) = split(queue, &COUNTS);

    let fsc = 8_388_607;
    let hw = Hardware {
        fs: OSR.rate_hz(),
        full_scale_code: fsc,
        unity_scale: [1.0 / fsc as f32; 4],
        ticks_per_ms: CORE_HZ / 1000,
        divider: BOARD_DIVIDER,
    };
    // Readouts are logged with defmt's deferred formatting (numbers are formatted on the
    // host); lengths in the units chosen.
    let log = |e: Event<'_, 4>, units| match e {
        Event::Readout(r) => {
            let (d, s) = match r.depth {
                Some(d) => (length(d.below_ground_m, units), length(d.depth.sigma_m, units)),
                None => (length(f32::NAN, units), length(f32::NAN, units)),
            };
            defmt::info!(
                "t={=f32} s {=f32} dBFS SNR {=f32} dB bearing {=f32} deg {=str} {=str}/{=str} depth {=str} +-{=str} flags {=u32:x}",
                r.t_s as f32,
                r.strength_db,
                r.snr_db,
                r.bearing_deg,
                r.state.name(),
                r.guidance.along.name(),
                r.guidance.across.name(),
                d.as_str(),
                s.as_str(),
                r.flags.0
            );
        }
        Event::Reply(t) => defmt::info!("{=str}", t),
        Event::Note(t) => defmt::warn!("{=str}", t),
        Event::Screen { .. } => {}
    };
    let app = match App::new(
        hw,
        Settings::defaults(),
        Shared(&ADC),
        Oled(oled),
        FlashStore(LockedFlash::new(dp.FLASH)),
        cortex_m::peripheral::DWT::cycle_count(),
        &mut |e| log(e, undertone_dsp::format::LengthUnit::Metres),
    ) {
        Ok(a) => a,
        Err(_) => defmt::panic!("factory settings do not build"),
    };
    // In static memory, so `cargo board` counts it.
    let Some(app) = cortex_m::singleton!(: BoardApp = app) else {
        defmt::panic!("application already taken");
    };

    critical_section::with(|cs| {
        ADC.borrow_ref_mut(cs).replace(adc);
        PRODUCER.borrow_ref_mut(cs).replace(tx);
    });
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

    let mut last_pitch = 0.0f32;
    let mut next_battery_ms = 0u64;
    loop {
        let mut buf = [0u8; 32];
        let n = commands.read(&mut buf);
        let battery_code = (app.now_ms() >= next_battery_ms).then(|| {
            next_battery_ms = app.now_ms() + BATTERY_EVERY_MS;
            battery_adc.convert(&battery_pin, SampleTime::Cycles_480)
        });
        let inputs = Inputs {
            ticks: cortex_m::peripheral::DWT::cycle_count(),
            buttons: [minus.is_low(), ok.is_low(), plus.is_low()],
            battery_code,
            command: &buf[..n],
        };
        let units = app.settings().units;
        let o = app.step(&mut rx, &inputs, &mut |e| log(e, units));
        if o.pitch_hz != last_pitch {
            if o.pitch_hz > 0.0 {
                pwm_mgr.set_period((o.pitch_hz as u32).Hz());
                speaker.set_duty(speaker.get_max_duty() / 2);
            } else {
                speaker.set_duty(0);
            }
            last_pitch = o.pitch_hz;
        }
        if o.fault {
            led.toggle();
        } else {
            led.set_low();
        }
        wdg.feed();
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    // The place, not the formatted message: formatting every panic message's arguments would
    // keep core's whole float printer in flash for a path that should never run.
    match info.location() {
        Some(l) => defmt::error!("panic at {=str}:{=u32}", l.file(), l.line()),
        None => defmt::error!("panic"),
    }
    cortex_m::peripheral::SCB::sys_reset()
}
