//! Printing and plotting for `sweep` and `depthcheck`.

use crate::depthcheck::{self, HeadChoice, DEPTHS_M, LIMIT_PCT, METHODS, PITCHES_DEG};
use crate::error::{Result, SimError};
use crate::output::{folder, write_atomic};
use crate::plots::{heatmap, line_chart, Chart, Heatmap, Series};
use crate::report::CAUTIONS;
use crate::scenario::Scenario;
use crate::sweep::{recommend, sweep as run_sweep};
use plotters::style::RGBColor;
use std::io::{IsTerminal, Write};
use std::path::Path;

fn io(e: std::io::Error) -> SimError {
    SimError::io(Path::new("<stdout>"), "write", e)
}

fn f(v: Option<f64>, p: usize) -> String {
    v.map(|v| format!("{v:.p$}")).unwrap_or_else(|| "--".into())
}

/// `sweep`.
pub fn sweep(sc: &Scenario, bandwidths: &[f64], trials: usize, max_lag_m: f64, out_dir: &Path, out: &mut dyn Write) -> Result<()> {
    let rows = run_sweep(sc, bandwidths, trials, std::io::stderr().is_terminal())?;
    writeln!(out, "Bandwidth sweep: {} ({} trials per bandwidth, {} threads)", sc.name, trials, rayon::current_num_threads())
        .map_err(io)?;
    writeln!(
        out,
        "{:>10} {:>7} {:>11} {:>13} {:>9} {:>9} {:>11}",
        "bw Hz", "depth", "bias %", "scatter %", "settle s", "lag m", "false peak"
    )
    .map_err(io)?;
    let mut csv = String::from("bandwidth_hz,trials,with_depth,depth_bias_pct,depth_scatter_pct,settle_s,lag_m,false_peak_rate\n");
    for r in &rows {
        writeln!(
            out,
            "{:>10.3} {:>3}/{:<3} {:>11} {:>13} {:>9.2} {:>9} {:>11.2}",
            r.bandwidth_hz,
            r.with_depth,
            r.trials,
            f(r.depth_bias_pct, 2),
            f(r.depth_scatter_pct, 2),
            r.settle_s,
            f(r.lag_m, 3),
            r.false_peak_rate
        )
        .map_err(io)?;
        csv += &format!(
            "{},{},{},{},{},{},{},{}\n",
            r.bandwidth_hz,
            r.trials,
            r.with_depth,
            f(r.depth_bias_pct, 4),
            f(r.depth_scatter_pct, 4),
            r.settle_s,
            f(r.lag_m, 4),
            r.false_peak_rate
        );
    }
    match recommend(&rows, max_lag_m) {
        Some(b) => writeln!(
            out,
            "recommended: {b} Hz, the narrowest bandwidth with peak lag within {max_lag_m} m, false peaks in at most {:.0} % of trials, a depth in at least half of them and depth bias within ±{} %",
            100.0 * crate::sweep::MAX_FALSE_PEAK_RATE,
            crate::sweep::MAX_DEPTH_BIAS_PCT
        )
        .map_err(io)?,
        None => writeln!(out, "no bandwidth keeps the peak lag within {max_lag_m} m with few false peaks and a small depth bias; try other bandwidths or a slower walk").map_err(io)?,
    }
    folder(out_dir)?;
    let csv_path = out_dir.join("sweep.csv");
    write_atomic(&csv_path, csv.as_bytes())?;
    let pts = |g: &dyn Fn(&crate::sweep::SweepRow) -> Option<f64>| {
        rows.iter().filter_map(|r| g(r).map(|v| (r.bandwidth_hz, v))).collect::<Vec<_>>()
    };
    let mut files = vec![csv_path];
    files.extend(line_chart(
        &out_dir.join("sweep-depth"),
        &Chart {
            title: format!("{}: depth error against bandwidth", sc.name),
            x_label: "detection bandwidth (Hz)".into(),
            y_label: "depth error (%)".into(),
            series: vec![
                Series {
                    name: "bias (mean of trials)".into(),
                    points: pts(&|r| r.depth_bias_pct),
                    color: RGBColor(214, 39, 40),
                    dots: false,
                },
                Series {
                    name: "scatter (sd of trials)".into(),
                    points: pts(&|r| r.depth_scatter_pct),
                    color: RGBColor(31, 119, 180),
                    dots: false,
                },
            ],
            y_range: None,
        },
    )?);
    files.extend(line_chart(
        &out_dir.join("sweep-lag"),
        &Chart {
            title: format!("{}: peak lag and settling against bandwidth", sc.name),
            x_label: "detection bandwidth (Hz)".into(),
            y_label: "lag (m) / settling (s)".into(),
            series: vec![
                Series { name: "peak lag, m".into(), points: pts(&|r| r.lag_m), color: RGBColor(44, 160, 44), dots: false },
                Series { name: "99 % settling, s".into(), points: pts(&|r| Some(r.settle_s)), color: RGBColor(148, 103, 189), dots: false },
                Series {
                    name: format!("lag limit {max_lag_m} m"),
                    points: rows.iter().map(|r| (r.bandwidth_hz, max_lag_m)).collect(),
                    color: RGBColor(120, 120, 120),
                    dots: false,
                },
            ],
            y_range: None,
        },
    )?);
    writeln!(out, "files:").map_err(io)?;
    for p in files {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(())
}

/// `depthcheck`.
pub fn depthcheck(head: HeadChoice, snr_db: f64, out_dir: &Path, out: &mut dyn Write) -> Result<()> {
    let cases = depthcheck::run(head, snr_db)?;
    let methods: Vec<&str> = METHODS.iter().cloned().filter(|m| cases.iter().any(|c| c.method == *m)).collect();
    writeln!(out, "Depth check ({head:?} head): worst |error| noise-free / RMS error at {snr_db} dB SNR, over offsets (0, 0.05h ahead, 0.1h left), pitch 0-30 deg, upper-coil gain mismatch 0-5 %").map_err(io)?;
    writeln!(
        out,
        "'*' marks an error past {LIMIT_PCT} %; '--' means the receiver withheld every estimate; 'w' counts withheld grid points"
    )
    .map_err(io)?;
    write!(out, "{:>7}", "depth m").map_err(io)?;
    for m in &methods {
        write!(out, " {:>26}", m).map_err(io)?;
    }
    writeln!(out).map_err(io)?;
    let table = depthcheck::table(&cases);
    for (h, per) in &table {
        write!(out, "{:>7.2}", h).map_err(io)?;
        for (i, (worst, rms, withheld, total)) in per.iter().enumerate() {
            if !methods.contains(&METHODS[i]) {
                continue;
            }
            let mark = |v: Option<f64>| match v {
                Some(v) => format!("{v:.2}{}", if v > LIMIT_PCT { "*" } else { "" }),
                None => "--".into(),
            };
            write!(out, " {:>26}", format!("{} / {} w{}/{}", mark(*worst), mark(*rms), withheld, total)).map_err(io)?;
        }
        writeln!(out).map_err(io)?;
    }
    folder(out_dir)?;
    let mut csv = String::from("method,depth_m,ahead_over_h,left_over_h,pitch_deg,mismatch,noisy,error_pct\n");
    for c in &cases {
        csv += &format!(
            "{},{},{},{},{},{},{},{}\n",
            c.method,
            c.depth_m,
            c.ahead,
            c.left,
            c.pitch_deg,
            c.mismatch,
            c.noisy,
            c.error_pct.map(|e| e.to_string()).unwrap_or_default()
        );
    }
    let csv_path = out_dir.join("depthcheck.csv");
    write_atomic(&csv_path, csv.as_bytes())?;
    let mut files = vec![csv_path];
    for m in &methods {
        // Worst |error| over offsets and mismatch, noise-free, per depth and pitch.
        let mut values = vec![vec![f64::NAN; PITCHES_DEG.len()]; DEPTHS_M.len()];
        let mut marked = Vec::new();
        for (iy, &h) in DEPTHS_M.iter().enumerate() {
            for (ix, &p) in PITCHES_DEG.iter().enumerate() {
                let w = cases
                    .iter()
                    .filter(|c| c.method == *m && !c.noisy && c.depth_m == h && c.pitch_deg == p)
                    .filter_map(|c| c.error_pct)
                    .map(f64::abs)
                    .fold(f64::NAN, f64::max);
                values[iy][ix] = w;
                if w > LIMIT_PCT {
                    marked.push((ix, iy));
                }
            }
        }
        let stem = out_dir.join(format!("depthcheck-{}", m.replace(' ', "-")));
        files.extend(heatmap(
            &stem,
            &Heatmap {
                title: format!("{m}: worst depth error, noise-free (grey: withheld)"),
                x_label: "sonde pitch (deg)".into(),
                y_label: "true depth (m)".into(),
                value_label: "|error| %".into(),
                x: (0.0, PITCHES_DEG.len() as f64),
                y: (0.0, DEPTHS_M.len() as f64),
                values,
                tracks: vec![],
                marked,
                marked_name: format!("error > {LIMIT_PCT} %"),
                cell_labels: Some((
                    PITCHES_DEG.iter().map(|p| format!("{p}")).collect(),
                    DEPTHS_M.iter().map(|d| format!("{d}")).collect(),
                )),
            },
        )?);
    }
    writeln!(out, "files:").map_err(io)?;
    for p in files {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(())
}
