//! What the board's screen shows during a simulated run: `screens.gif`, one
//! frame per screen refresh at the board's own rate
//! ([`REFRESH_HZ`](undertone_firmware::screen::REFRESH_HZ)), and PNG stills at
//! the peak, at a null and when the depth first appears.
//!
//! The pictures are drawn by the firmware's own code: the view model built from
//! each readout ([`View::from_readout`]) and the drawing
//! ([`undertone_firmware::screen::draw`]) into its frame buffer, exactly as the
//! board refreshes its OLED. The board shows its start-up caution for the first
//! [`CAUTION_MS`]; after that each refresh shows the newest readout whose data
//! had arrived by then (a readout is shown when its latest sample is in).
//! The simulated receiver has no battery: its gauge reads `--`.

use crate::error::{Result, SimError};
use crate::output::write_atomic;
use crate::run::SimRun;
use crate::scenario::Scenario;
use std::borrow::Cow;
use std::path::{Path, PathBuf};
use undertone_dsp::format::LengthUnit;
use undertone_dsp::ReceiverSettings;
use undertone_firmware::menu::CAUTION_MS;
use undertone_firmware::screen::{draw, Frame, Page, HEIGHT, REFRESH_MS, WIDTH};
use undertone_firmware::view::{DepthLine, View, ViewContext};

/// Screen pixels per picture pixel side.
pub const SCALE: usize = 3;
/// Unlit and lit pixel colours (a white-on-black OLED), RGB.
pub const PALETTE: [u8; 6] = [8, 10, 14, 225, 235, 255];

/// The view context of a simulated run: metric, the beacon set, the converter's full scale in
/// the simulation's reading units (tesla), no battery.
pub fn context<const N: usize>(sc: &Scenario, s: &ReceiverSettings<N>) -> ViewContext {
    ViewContext {
        units: LengthUnit::Metres,
        beacon_hz: s.detector.beacon.freq_hz(),
        full_scale_db: 20.0 * (sc.receiver.full_scale_t as f32).log10(),
        battery: None,
        fault: false,
        muted: false,
    }
}

/// The page on screen at each refresh: (time in ms, page, index of the readout shown).
pub fn timeline(run: &SimRun, fs: f64) -> Vec<(u64, Page, Option<usize>)> {
    let end_ms = (run.samples as f64 / fs * 1000.0) as u64;
    let mut out = Vec::new();
    let mut shown: Option<usize> = None;
    let mut t = 0;
    while t <= end_ms {
        loop {
            let next = shown.map_or(0, |i| i + 1);
            if next < run.rows.len() && run.rows[next].t_latest_s * 1000.0 <= t as f64 {
                shown = Some(next);
            } else {
                break;
            }
        }
        let page = if t < CAUTION_MS {
            Page::Caution
        } else {
            match shown {
                Some(i) => Page::Locate(run.views[i].clone()),
                None => Page::Starting,
            }
        };
        out.push((t, page, shown.filter(|_| t >= CAUTION_MS)));
        t += REFRESH_MS;
    }
    out
}

fn pixels(f: &Frame) -> Vec<u8> {
    let (w, h) = (WIDTH * SCALE, HEIGHT * SCALE);
    let mut p = vec![0u8; w * h];
    for y in 0..h {
        for x in 0..w {
            p[y * w + x] = f.pixel(x / SCALE, y / SCALE) as u8;
        }
    }
    p
}

fn rendered(page: &Page) -> Frame {
    let mut f = Frame::new();
    let _ = draw(page, &mut f);
    f
}

fn io_err(path: &Path, e: impl std::fmt::Display) -> SimError {
    SimError::io(path, "write", std::io::Error::other(e.to_string()))
}

fn png_of(f: &Frame, path: &Path) -> Result<Vec<u8>> {
    let (w, h) = (WIDTH * SCALE, HEIGHT * SCALE);
    let rgb: Vec<u8> = pixels(f).iter().flat_map(|&on| PALETTE[on as usize * 3..on as usize * 3 + 3].to_vec()).collect();
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, w as u32, h as u32);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut wr = enc.write_header().map_err(|e| io_err(path, e))?;
        wr.write_image_data(&rgb).map_err(|e| io_err(path, e))?;
    }
    Ok(bytes)
}

/// The refreshes the stills show: (name, index into the timeline).
pub fn stills(frames: &[(u64, Page, Option<usize>)]) -> Vec<(&'static str, usize)> {
    let strength = |p: &Page| match p {
        Page::Locate(v) => v.strength_dbfs,
        _ => None,
    };
    let mut out = Vec::new();
    let peak = (0..frames.len())
        .filter(|&i| strength(&frames[i].1).is_some())
        .max_by(|&a, &b| strength(&frames[a].1).unwrap_or(f32::MIN).total_cmp(&strength(&frames[b].1).unwrap_or(f32::MIN)));
    if let Some(p) = peak {
        out.push(("peak", p));
        // A null: the weakest tone on the way in to the peak (the fore null of a walk along the
        // axis), else the weakest anywhere.
        let first = (0..p).find(|&i| strength(&frames[i].1).is_some()).unwrap_or(p);
        let weakest = |r: std::ops::Range<usize>| {
            r.filter(|&i| strength(&frames[i].1).is_some())
                .min_by(|&a, &b| strength(&frames[a].1).unwrap_or(0.0).total_cmp(&strength(&frames[b].1).unwrap_or(0.0)))
        };
        if let Some(n) = weakest(first..p).or_else(|| weakest(0..frames.len())) {
            out.push(("null", n));
        }
    }
    if let Some(d) = frames.iter().position(|(_, p, _)| matches!(p, Page::Locate(View { depth: DepthLine::Shown { .. }, .. }))) {
        out.push(("depth", d));
    }
    out
}

/// Write `screens.gif` and the stills into `dir`; their paths.
pub fn write(run: &SimRun, fs: f64, dir: &Path) -> Result<Vec<PathBuf>> {
    crate::output::folder(dir)?;
    let frames = timeline(run, fs);
    let gif_path = dir.join("screens.gif");
    let (w, h) = ((WIDTH * SCALE) as u16, (HEIGHT * SCALE) as u16);
    let mut bytes = Vec::new();
    {
        let mut enc = gif::Encoder::new(&mut bytes, w, h, &PALETTE).map_err(|e| io_err(&gif_path, e))?;
        enc.set_repeat(gif::Repeat::Infinite).map_err(|e| io_err(&gif_path, e))?;
        for (_, page, _) in &frames {
            let mut f = gif::Frame::from_indexed_pixels(w, h, pixels(&rendered(page)), None);
            // GIF delays are in hundredths of a second: one refresh period.
            f.delay = (REFRESH_MS / 10) as u16;
            f.buffer = Cow::Owned(f.buffer.into_owned());
            enc.write_frame(&f).map_err(|e| io_err(&gif_path, e))?;
        }
    }
    write_atomic(&gif_path, &bytes)?;
    let mut paths = vec![gif_path];
    for (name, i) in stills(&frames) {
        let path = dir.join(format!("screen-{name}.png"));
        write_atomic(&path, &png_of(&rendered(&frames[i].1), &path)?)?;
        paths.push(path);
    }
    Ok(paths)
}

/// `walk --screens` / `demo --screens`: run the scenario and write its screens into `dir`,
/// listing the files on `out`.
pub fn walk(sc: &Scenario, dir: &Path, seed: Option<u64>, out: &mut dyn std::io::Write) -> Result<Vec<PathBuf>> {
    let run = crate::run::simulate(sc, seed, None)?;
    let paths = write(&run, sc.receiver.sample_rate_hz, dir)?;
    let io = |e: std::io::Error| SimError::io(Path::new("<stdout>"), "write", e);
    writeln!(
        out,
        "\nthe board's screen ({} refreshes a second, drawn by the firmware's own code):",
        undertone_firmware::screen::REFRESH_HZ
    )
    .map_err(io)?;
    for p in &paths {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    Ok(paths)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_frame_per_refresh_and_the_stills_show_what_they_say() {
        let sc = Scenario::demo();
        let run = crate::run::simulate(&sc, None, None).unwrap();
        let fs = sc.receiver.sample_rate_hz;
        let frames = timeline(&run, fs);
        let seconds = run.samples as f64 / fs;
        assert_eq!(frames.len(), (seconds * 1000.0) as usize / REFRESH_MS as usize + 1);
        assert!(frames.windows(2).all(|w| w[1].0 - w[0].0 == REFRESH_MS));
        // Every locating frame shows the newest readout in by then.
        for (t, page, shown) in &frames {
            if let (Page::Locate(v), Some(i)) = (page, shown) {
                assert_eq!(v, &run.views[*i]);
                assert!(run.rows[*i].t_latest_s * 1000.0 <= *t as f64);
                assert!(run.rows.get(i + 1).is_none_or(|r| r.t_latest_s * 1000.0 > *t as f64));
            }
        }
        let s = stills(&frames);
        let names: Vec<&str> = s.iter().map(|x| x.0).collect();
        assert_eq!(names, ["peak", "null", "depth"]);
        let row = |name: &str| &run.rows[frames[s.iter().find(|x| x.0 == name).unwrap().1].2.unwrap()];
        // The demo's sonde is 1.5 m down: the peak within 0.3 m of the point over it (truth),
        // the null near h/√2 = 1.06 m along the axis (the level dipole's horizontal-field zero,
        // Griffiths eq. 5.89), the first depth shown near the point over it.
        let peak = row("peak").truth.unwrap();
        assert!(peak.ahead_m.hypot(peak.left_m) < 0.3, "{peak:?}");
        let null = row("null").truth.unwrap();
        assert!((null.ahead_m.abs() - 1.5 / 2f64.sqrt()).abs() < 0.3, "{null:?}");
        assert!(row("depth").depth_m.is_some());
    }
}
