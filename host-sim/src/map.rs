//! `map`: the sonde's field over the ground, as a receiver would see it at its
//! lower-coil height: horizontal strength (dB re 1 nT) and the signed vertical
//! component (nT), with the sonde's track, the receiver's path and the
//! detection range drawn in. Field from this crate's f64 physics (Griffiths
//! eq. 5.89) and first-order soil attenuation. A sonde pushed along the pipe
//! is drawn where it is at the end of the run (where a person locates it),
//! its track from where it started.

use crate::error::Result;
use crate::motion::Motion;
use crate::physics::{axis, dipole_in_ground, skin_depth_m};
use crate::plots::{heatmap, Heatmap, Marks, Track};
use crate::report::CAUTION_LINE;
use crate::scenario::Scenario;
use plotters::style::RGBColor;
use std::path::{Path, PathBuf};

/// Grid cells per side.
pub const CELLS: usize = 120;

/// Draw both maps into `out_dir`; returns the file paths and the detection range, m.
pub fn map(sc: &Scenario, out_dir: &Path) -> Result<(Vec<PathBuf>, f64)> {
    crate::output::folder(out_dir)?;
    let motion = Motion::new(&sc.motion, sc.seed);
    let dur = motion.duration_s();
    let steps = 400;
    let path: Vec<(f64, f64)> = (0..=steps).map(|k| motion.pose(dur * k as f64 / steps as f64)).map(|p| (p.x_m, p.y_m)).collect();
    let range = crate::range::detection_range_m(sc)?;
    let end = sonde_at(sc, dur);
    let circle: Vec<(f64, f64)> = (0..=96)
        .map(|k| {
            let a = k as f64 * std::f64::consts::TAU / 96.0;
            (end[0] + range * a.cos(), end[1] + range * a.sin())
        })
        .collect();
    let tracks = vec![
        ("receiver path".to_string(), path, RGBColor(255, 255, 255)),
        (format!("detection range, {range:.2} m (best coil 20 dB SNR)"), circle, RGBColor(255, 150, 0)),
    ];
    let mut files = field_map(sc, out_dir, "map-horizontal", "horizontal field at the lower coil", false, &tracks, dur)?;
    files.extend(field_map(sc, out_dir, "map-vertical", "vertical field at the lower coil", true, &tracks, dur)?);
    Ok((files, range))
}

/// Where the sonde is at time `t_s` (pushed along its axis), (east, north, up), m.
fn sonde_at(sc: &Scenario, t_s: f64) -> [f64; 3] {
    let s = &sc.sonde;
    let ax = axis(s.yaw_deg.to_radians(), s.pitch_deg.to_radians());
    let d = s.push_speed_m_s * t_s;
    [s.x_m + ax[0] * d, s.y_m + ax[1] * d, -s.depth_m + ax[2] * d]
}

/// One field map (horizontal field in dB re 1 nT, or the signed vertical field in nT) as
/// `stem.png`/`stem.svg` in `out_dir`, with `tracks` and the sonde's own track over `dur_s`.
pub fn field_map(
    sc: &Scenario,
    out_dir: &Path,
    stem: &str,
    title: &str,
    vertical: bool,
    tracks: &[Track],
    dur_s: f64,
) -> Result<Vec<PathBuf>> {
    field_map_marked(sc, out_dir, stem, title, vertical, tracks, &[], dur_s)
}

/// As [`field_map`], with points marked (crosses) over the map.
#[allow(clippy::too_many_arguments)]
pub fn field_map_marked(
    sc: &Scenario,
    out_dir: &Path,
    stem: &str,
    title: &str,
    vertical: bool,
    tracks: &[Track],
    marks: &[Marks],
    dur_s: f64,
) -> Result<Vec<PathBuf>> {
    crate::output::folder(out_dir)?;
    let s = &sc.sonde;
    let ax = axis(s.yaw_deg.to_radians(), s.pitch_deg.to_radians());
    let (p0, p1) = (sonde_at(sc, 0.0), sonde_at(sc, dur_s));
    // The sonde's track, extended ±0.15 m along its axis to show which way it points.
    let track = vec![(p0[0] - 0.15 * ax[0], p0[1] - 0.15 * ax[1]), (p1[0] + 0.15 * ax[0], p1[1] + 0.15 * ax[1])];
    let pts = tracks.iter().flat_map(|t| t.1.iter()).chain(marks.iter().flat_map(|m| m.1.iter())).chain(track.iter());
    let (mut x0, mut x1, mut y0, mut y1) = (f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY, f64::NEG_INFINITY);
    for &(x, y) in pts {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let pad = 1.0 + s.depth_m;
    let (x0, x1, y0, y1) = (x0 - pad, x1 + pad, y0 - pad, y1 + pad);
    // Square cells: the shorter side grows to the longer one.
    let side = (x1 - x0).max(y1 - y0);
    let (cx, cy) = (0.5 * (x0 + x1), 0.5 * (y0 + y1));
    let (x0, x1, y0, y1) = (cx - side / 2.0, cx + side / 2.0, cy - side / 2.0, cy + side / 2.0);
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
            // Field magnitudes in the ground (phase aside; the vertical keeps its static sign).
            let (re, im) = dipole_in_ground(m, p1, p, delta);
            let hor = (re[0] * re[0] + re[1] * re[1] + im[0] * im[0] + im[1] * im[1]).sqrt() * 1e9;
            bh[iy][ix] = 20.0 * hor.max(1e-9).log10();
            bz[iy][ix] = re[2].signum() * re[2].hypot(im[2]) * 1e9;
        }
    }
    let mut all: Vec<Track> = tracks.to_vec();
    let moved = s.push_speed_m_s > 0.0 && dur_s > 0.0;
    all.push((if moved { "sonde track (pushed) and axis" } else { "sonde axis" }.into(), track, RGBColor(230, 30, 30)));
    // The truth first, so the estimates are drawn over it.
    let mut marked: Vec<Marks> = vec![("sonde (truth)".into(), vec![(p1[0], p1[1])], RGBColor(230, 30, 30))];
    marked.extend(marks.iter().cloned());
    let (label, values) = if vertical { ("nT (signed)", bz) } else { ("dB re 1 nT", bh) };
    let when = if moved { format!(", sonde where it is at {dur_s:.0} s (end of the run)") } else { String::new() };
    heatmap(
        &out_dir.join(stem),
        &Heatmap {
            title: format!("{}\n{title}{when}", sc.name),
            x_label: "east (m)".into(),
            y_label: "north (m)".into(),
            value_label: label.into(),
            x: (x0, x1),
            y: (y0, y1),
            values,
            tracks: all,
            marks: marked,
            marked: vec![],
            marked_name: String::new(),
            cell_labels: None,
            caption: Some(CAUTION_LINE.into()),
        },
    )
}
