//! The emulator image: the board's application (`App`: driver, queue,
//! receiver, gain steps, supervisor, commands, buttons, battery, screen in a
//! RAM frame buffer) fed by an emulated converter through the same driver and
//! interrupt work, lines printed over semihosting, run under QEMU's
//! `mps2-an386`. On the host the same run prints to stdout: its twin.
//!
//! Cost: SysTick counts the core clock (25 MHz on this machine); under
//! `-icount shift=0` QEMU executes one instruction per nanosecond, so one tick
//! is 40 instructions. The last line reports ticks spent in the application's
//! step (the whole main loop) and in the interrupt work.

#![cfg_attr(target_os = "none", no_std)]
#![cfg_attr(target_os = "none", no_main)]

use undertone_firmware::emulated::EMU_FRAMES as FRAMES;

#[cfg(target_os = "none")]
mod target {
    use cortex_m::peripheral::syst::SystClkSource;
    use cortex_m::peripheral::SYST;
    use cortex_m_rt::entry;
    use cortex_m_semihosting::{debug, hprintln};
    use undertone_firmware::bench;

    #[entry]
    fn main() -> ! {
        let Some(cp) = cortex_m::Peripherals::take() else {
            debug::exit(debug::EXIT_FAILURE);
            loop {}
        };
        let mut syst = cp.SYST;
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(0x00FF_FFFF);
        syst.clear_current();
        syst.enable_counter();
        let mut last = SYST::get_current();
        let mut total: u64 = 0;
        let mut clock = || {
            let now = SYST::get_current();
            total += (last.wrapping_sub(now) & 0x00FF_FFFF) as u64;
            last = now;
            total
        };
        let rep = undertone_firmware::emulated::run(super::FRAMES, &mut clock, &mut |l| hprintln!("{}", l));
        // Cost table: the Goertzel floor, the detector, the whole receiver, the 6-coil fit, the screen.
        let n = 32_000usize;
        let g = bench::goertzel_floor(n, &mut clock);
        hprintln!("B goertzel-floor channel_samples={} ticks={}", n, g);
        let (d, _) = bench::detector(n, &mut clock);
        hprintln!("B detector channel_samples={} ticks={}", n * 4, d);
        let (r, outs) = bench::receiver(n, &mut clock);
        hprintln!("B receiver channel_samples={} ticks={} readouts={}", n * 4, r, outs);
        let (mix, ends) = bench::lockin_parts(n, &mut clock);
        hprintln!("B lockin-mix channel_samples={} ticks={}", n * 4, mix);
        hprintln!("B lockin-boxcar-ends channel_samples={} ticks={}", n * 4, ends);
        let f = bench::six_coil_fit(4, &mut clock);
        hprintln!("B six-coil-fit fits=4 ticks={}", f);
        let w = bench::six_coil_fit_warm(8, &mut clock);
        hprintln!("B six-coil-fit-warm fits=8 ticks={}", w);
        let s = bench::screen(20, &mut clock);
        hprintln!("B screen-draw draws=20 ticks={}", s);
        hprintln!(
            "E frames={} readouts={} screens={} app_ticks={} isr_ticks={} gain_steps={} rejected={}",
            rep.frames,
            rep.readouts,
            rep.screens,
            rep.app_clock,
            rep.isr_clock,
            rep.gain_steps,
            rep.rejected
        );
        debug::exit(debug::EXIT_SUCCESS);
        loop {}
    }

    #[panic_handler]
    fn panic(info: &core::panic::PanicInfo) -> ! {
        hprintln!("panic: {}", info);
        debug::exit(debug::EXIT_FAILURE);
        loop {}
    }
}

#[cfg(not(target_os = "none"))]
fn main() {
    let rep = undertone_firmware::emulated::run(FRAMES, &mut || 0, &mut |l| println!("{l}"));
    println!(
        "E frames={} readouts={} screens={} app_ticks=0 isr_ticks=0 gain_steps={} rejected={}",
        rep.frames, rep.readouts, rep.screens, rep.gain_steps, rep.rejected
    );
}
