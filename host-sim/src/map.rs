//! `map`: the sonde's field over the ground, as a receiver would see it at its
//! lower-coil height: horizontal strength (dB re 1 nT) and the signed vertical
//! component (nT), with the sonde's track and the receiver's path drawn in.
//! Field from this crate's f64 physics (Griffiths eq. 5.89) and first-order
//! soil attenuation.

use crate::error::Result;
use crate::motion::Motion;
use crate::physics::{axis, dipole, skin_depth_m};
use crate::plots::{heatmap, Heatmap};
use crate::scenario::Scenario;
use std::path::{Path, PathBuf};

/// Grid cells per side.
pub const CELLS: usize = 120;

/// Draw both maps into `out_dir`; returns the file paths.
pub fn map(sc: &Scenario, out_dir: &Path) -> Result<Vec<PathBuf>> {
    let motion = Motion::new(&sc.motion, sc.seed);
    let dur = motion.duration_s();
    let steps = 200;
    let path: Vec<(f64, f64)> = (0..=steps).map(|k| motion.pose(dur * k as f64 / steps as f64)).map(|p| (p.x_m, p.y_m)).collect();
    let tracks = vec![("receiver path".to_string(), path, plotters::style::RGBColor(255, 255, 255))];
    let mut files = field_map(sc, out_dir, "map-horizontal", "horizontal field at the lower coil", false, &tracks, dur)?;
    files.extend(field_map(sc, out_dir, "map-vertical", "vertical field at the lower coil", true, &tracks, dur)?);
    Ok(files)
}

/// One field map (horizontal field in dB re 1 nT, or the signed vertical field in nT) as
/// `stem.png`/`stem.svg` in `out_dir`, with `tracks` and the sonde's own track over `dur_s`.
pub fn field_map(
    sc: &Scenario,
    out_dir: &Path,
    stem: &str,
    title: &str,
    vertical: bool,
    tracks: &[crate::plots::Track],
    dur_s: f64,
) -> Result<Vec<PathBuf>> {
    crate::output::folder(out_dir)?;
    let dur = dur_s;
    let s = &sc.sonde;
    let ax = axis(s.yaw_deg.to_radians(), s.pitch_deg.to_radians());
    let sonde_at =
        |t: f64| [s.x_m + ax[0] * s.push_speed_m_s * t, s.y_m + ax[1] * s.push_speed_m_s * t, -s.depth_m + ax[2] * s.push_speed_m_s * t];
    let (p0, p1) = (sonde_at(0.0), sonde_at(dur));
    // The sonde's track, extended ±0.15 m along its axis to show which way it points.
    let track = vec![(p0[0] - 0.15 * ax[0], p0[1] - 0.15 * ax[1]), (p1[0] + 0.15 * ax[0], p1[1] + 0.15 * ax[1])];
    let pts = tracks.iter().flat_map(|t| t.1.iter()).chain(track.iter());
    let (mut x0, mut x1, mut y0, mut y1) = (f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY, f64::NEG_INFINITY);
    for &(x, y) in pts {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let pad = 1.0 + s.depth_m;
    let (x0, x1, y0, y1) = (x0 - pad, x1 + pad, y0 - pad, y1 + pad);
    let delta = skin_depth_m(s.freq_hz, sc.soil.conductivity_s_per_m);
    let m = [ax[0] * s.moment_am2, ax[1] * s.moment_am2, ax[2] * s.moment_am2];
    let h = sc.receiver.height_m;
    let mut bh = vec![vec![0.0; CELLS]; CELLS];
    let mut bz = vec![vec![0.0; CELLS]; CELLS];
    for iy in 0..CELLS {
        for ix in 0..CELLS {
            let x = x0 + (ix as f64 + 0.5) * (x1 - x0) / CELLS as f64;
            let y = y0 + (iy as f64 + 0.5) * (y1 - y0) / CELLS as f64;
            let p = [x, y, h];
            let b = dipole(m, p0, p);
            let d = ((x - p0[0]).powi(2) + (y - p0[1]).powi(2) + (h - p0[2]).powi(2)).sqrt();
            let att = if delta.is_finite() { (-d / delta).exp() } else { 1.0 };
            let hor = (b[0] * b[0] + b[1] * b[1]).sqrt() * att * 1e9;
            bh[iy][ix] = 20.0 * hor.max(1e-9).log10();
            bz[iy][ix] = b[2] * att * 1e9;
        }
    }
    let mut all: Vec<crate::plots::Track> = tracks.to_vec();
    all.push(("sonde track and axis".into(), track, plotters::style::RGBColor(230, 30, 30)));
    let (label, values) = if vertical { ("nT (signed)", bz) } else { ("dB re 1 nT", bh) };
    heatmap(
        &out_dir.join(stem),
        &Heatmap {
            title: format!("{}: {}", sc.name, title),
            x_label: "east (m)".into(),
            y_label: "north (m)".into(),
            value_label: label.into(),
            x: (x0, x1),
            y: (y0, y1),
            values,
            tracks: all,
            marked: vec![],
            marked_name: String::new(),
            cell_labels: None,
        },
    )
}
