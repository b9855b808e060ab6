//! `demo` and `walk`: run a scenario, print the timeline, the summary and the
//! cautions, and plot strength and depth along the run.

use crate::error::Result;
use crate::plots::{line_chart, Chart, Series};
use crate::report::{print_summary, summarise, timeline, CAUTIONS};
use crate::run::simulate;
use crate::scenario::Scenario;
use plotters::style::RGBColor;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Run, print and plot. With `json`, print one JSON object per readout instead of the report.
pub fn walk(sc: &Scenario, out_dir: &Path, json: bool, seed: Option<u64>, out: &mut dyn Write) -> Result<Vec<PathBuf>> {
    let run = simulate(sc, seed, None)?;
    let io = |e: std::io::Error| crate::error::SimError::io(Path::new("<stdout>"), "write", e);
    if json {
        crate::report::json_lines(out, &run.rows)?;
        return Ok(Vec::new());
    }
    let info = run.info;
    writeln!(out, "Undertone simulation: {}", sc.name).map_err(io)?;
    writeln!(
        out,
        "{} coils, beacon {:.1} Hz, fs {:.0} Hz, bandwidth {:.2} Hz, 99% settling {:.2} s, {:.1} readouts/s, {:.1} s of signal",
        sc.coils(),
        info.tone_hz,
        info.sample_rate_hz,
        info.bandwidth_hz,
        info.settle_99_s,
        1.0 / info.readout_interval_s,
        run.samples as f64 / info.sample_rate_hz as f64
    )
    .map_err(io)?;
    let worst = run.mains.worst_rejection_db();
    writeln!(
        out,
        "mains: nearest harmonics {:.0} Hz and {:.0} Hz, worst neighbouring rejection {:.1} dB",
        run.mains.nearest(50.0).freq_hz,
        run.mains.nearest(60.0).freq_hz,
        worst
    )
    .map_err(io)?;
    writeln!(out).map_err(io)?;
    timeline(out, &run.rows, 0.5).map_err(io)?;
    let summary = summarise(sc, &run);
    print_summary(out, &summary).map_err(io)?;
    let axis = crate::physics::axis(sc.sonde.yaw_deg.to_radians(), sc.sonde.pitch_deg.to_radians());
    crate::report::print_score(out, &crate::score::score(&run.rows, axis)).map_err(io)?;
    crate::output::folder(out_dir)?;
    let t: Vec<f64> = run.rows.iter().map(|r| r.t_s).collect();
    let strength = Chart {
        title: format!("{}: strength along the run", sc.name),
        x_label: "time (s)".into(),
        y_label: "level (dB)".into(),
        series: vec![
            Series {
                name: "horizontal field, dB re 1 nT".into(),
                points: t.iter().zip(&run.rows).map(|(t, r)| (*t, r.strength_db + 180.0)).collect(),
                color: RGBColor(31, 119, 180),
                dots: false,
            },
            Series {
                name: "SNR of the lower along coil, dB".into(),
                points: t.iter().zip(&run.rows).map(|(t, r)| (*t, r.snr_db)).collect(),
                color: RGBColor(255, 127, 14),
                dots: false,
            },
        ],
        y_range: None,
    };
    let mut paths = line_chart(&out_dir.join("strength"), &strength)?;
    let pick = |f: &dyn Fn(&crate::run::Row) -> Option<f64>| run.rows.iter().filter_map(|r| f(r).map(|d| (r.t_s, d))).collect::<Vec<_>>();
    let depth = Chart {
        title: format!("{}: depth estimates against the truth", sc.name),
        x_label: "time (s)".into(),
        y_label: "depth below the lower coil (m)".into(),
        series: vec![
            Series { name: "true depth".into(), points: pick(&|r| r.truth.map(|t| t.depth_m)), color: RGBColor(0, 0, 0), dots: false },
            Series { name: "gradient".into(), points: pick(&|r| r.gradient.depth_m), color: RGBColor(214, 39, 40), dots: true },
            Series { name: "one-station fit".into(), points: pick(&|r| r.fit.depth_m), color: RGBColor(44, 160, 44), dots: true },
            Series { name: "known moment".into(), points: pick(&|r| r.known_moment.depth_m), color: RGBColor(148, 103, 189), dots: true },
        ],
        y_range: Some((0.0, run.rows.iter().filter_map(|r| r.truth.map(|t| t.depth_m)).fold(0.0, f64::max) * 2.0 + 0.1)),
    };
    paths.extend(line_chart(&out_dir.join("depth"), &depth)?);
    writeln!(out, "\nplots:").map_err(io)?;
    for p in &paths {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(paths)
}
