//! Printing and plotting for `sweep` and `depthcheck`.

use crate::depthcheck::{self, DEPTHS_M, LIMIT_PCT, METHODS, PITCHES_DEG};
use crate::error::{Result, SimError};
use crate::output::{folder, write_atomic};
use crate::plots::{figure, heatmap, Figure as Plot, Heatmap, Panel, Series, Style};
use crate::report::{CAUTIONS, CAUTION_LINE};
use crate::scenario::{HeadKind, Scenario};
use crate::sweep::{
    recommend, sweep as run_sweep, Figure, Recommendation, Standing, SweepRow, SweepSpec, CRITERIA, DEFAULT_TRIALS, FEW_TRIALS,
    MAX_DEPTH_BIAS_PCT, MAX_FALSE_PEAK_RATE, MIN_DEPTH_RATE,
};
use crate::units::Units;
use plotters::style::RGBColor;
use std::io::Write;
use std::path::Path;

fn io(e: std::io::Error) -> SimError {
    SimError::io(Path::new("<stdout>"), "write", e)
}

fn fig(f: Option<Figure>, p: usize, sign: bool) -> String {
    let v = |x: f64| if sign { format!("{x:+.p$}") } else { format!("{x:.p$}") };
    match f {
        Some(Figure { value, ci: Some(ci) }) => format!("{} [{}, {}]", v(value), v(ci.lo), v(ci.hi)),
        Some(Figure { value, ci: None }) => format!("{} [--]", v(value)),
        None => "--".into(),
    }
}

fn pct(f: Figure) -> String {
    match f.ci {
        Some(ci) => format!("{:.0} [{:.0}, {:.0}]", 100.0 * f.value, 100.0 * ci.lo, 100.0 * ci.hi),
        None => format!("{:.0}", 100.0 * f.value),
    }
}

fn standing(s: Standing) -> String {
    match s {
        Standing::Meets => "meets".into(),
        Standing::Fails => "fails".into(),
        Standing::Unsure(Some(n)) => format!("unsure (~{n} trials)"),
        Standing::Unsure(None) => "unsure".into(),
    }
}

/// `sweep`: the table with 95 % intervals, each bandwidth's standing, the
/// recommendation (or why there is none yet), the CSV and the plots.
/// `out` carries the report; warnings go to stderr.
pub fn sweep(sc: &Scenario, spec: &SweepSpec, out_dir: &Path, units: Units, out: &mut dyn Write) -> Result<()> {
    folder(out_dir)?;
    if spec.trials < FEW_TRIALS {
        eprintln!(
            "undertone: warning: --trials {} is below {FEW_TRIALS}: the 95 % intervals will be too wide to decide much (default {DEFAULT_TRIALS})",
            spec.trials
        );
    }
    let started = std::time::Instant::now();
    let rows = run_sweep(sc, spec)?;
    eprintln!(
        "undertone: sweep of {} runs took {:.1} s on {} threads",
        rows.len() * spec.trials,
        started.elapsed().as_secs_f64(),
        rayon::current_num_threads()
    );
    let max_lag_m = spec.max_lag_m;
    writeln!(out, "Bandwidth sweep: {} ({} trials per bandwidth, noise seeds from seed {})", sc.name, spec.trials, spec.seed)
        .map_err(io)?;
    writeln!(out, "Each figure: estimate [95 % confidence interval] over the trials.").map_err(io)?;
    writeln!(
        out,
        "{:>8} {:>16} {:>24} {:>22} {:>8} {:>27} {:>16}",
        "bw Hz",
        "depth found %",
        "depth bias %",
        "depth scatter %",
        "settle s",
        format!("peak lag {}", units.unit()),
        "false peaks %"
    )
    .map_err(io)?;
    let mut csv = String::from(
        "bandwidth_hz,trials,with_depth,depth_found_lo,depth_found_hi,depth_bias_pct,depth_bias_lo,depth_bias_hi,\
         depth_scatter_pct,depth_scatter_lo,depth_scatter_hi,settle_s,lag_m,lag_lo,lag_hi,false_peak_rate,false_peak_lo,false_peak_hi,verdict\n",
    );
    let c = |f: Option<Figure>| {
        let (v, lo, hi) = match f {
            Some(f) => (Some(f.value), f.ci.map(|c| c.lo), f.ci.map(|c| c.hi)),
            None => (None, None, None),
        };
        format!("{},{},{}", f_opt(v, 6), f_opt(lo, 6), f_opt(hi, 6))
    };
    for r in &rows {
        writeln!(
            out,
            "{:>8.3} {:>16} {:>24} {:>22} {:>8.2} {:>27} {:>16}",
            r.bandwidth_hz,
            pct(r.depth_rate),
            fig(r.depth_bias_pct, 2, true),
            fig(r.depth_scatter_pct, 2, false),
            r.settle_s,
            fig(
                r.lag_m.map(|f| Figure {
                    value: units.value(f.value),
                    ci: f.ci.map(|c| crate::stats::Interval { lo: units.value(c.lo), hi: units.value(c.hi) })
                }),
                3,
                true
            ),
            pct(r.false_peak_rate),
        )
        .map_err(io)?;
        let ci = r.depth_rate.ci;
        csv += &format!(
            "{},{},{},{},{},{},{},{},{},{},{}\n",
            r.bandwidth_hz,
            r.trials,
            r.with_depth,
            f_opt(ci.map(|c| c.lo), 6),
            f_opt(ci.map(|c| c.hi), 6),
            c(r.depth_bias_pct),
            c(r.depth_scatter_pct),
            f_opt(Some(r.settle_s), 6),
            c(r.lag_m),
            c(Some(r.false_peak_rate)),
            match r.verdict() {
                Standing::Meets => "meets",
                Standing::Fails => "fails",
                Standing::Unsure(_) => "unsure",
            },
        );
    }
    writeln!(
        out,
        "\nCriteria: |peak lag| within {}, false peaks in at most {:.0} % of trials, a depth in at least {:.0} % of them, depth bias within ±{} %.",
        units.dist(max_lag_m),
        100.0 * MAX_FALSE_PEAK_RATE,
        100.0 * MIN_DEPTH_RATE,
        MAX_DEPTH_BIAS_PCT
    )
    .map_err(io)?;
    writeln!(out, "A bandwidth meets a criterion when the whole interval is inside the limit, fails when it is wholly outside.")
        .map_err(io)?;
    write!(out, "{:>8}", "bw Hz").map_err(io)?;
    for name in CRITERIA {
        write!(out, " {:>20}", name).map_err(io)?;
    }
    writeln!(out, " {:>20}", "overall").map_err(io)?;
    for r in &rows {
        write!(out, "{:>8.3}", r.bandwidth_hz).map_err(io)?;
        for s in r.standing {
            write!(out, " {:>20}", standing(s)).map_err(io)?;
        }
        writeln!(out, " {:>20}", standing(r.verdict())).map_err(io)?;
    }
    let few = if spec.trials < FEW_TRIALS {
        format!(
            " (from only {} trials per bandwidth: below {FEW_TRIALS} the intervals are wide and rest on few runs; confirm with --trials {DEFAULT_TRIALS})",
            spec.trials
        )
    } else {
        String::new()
    };
    match recommend(&rows) {
        Recommendation::Bandwidth(b) => writeln!(
            out,
            "recommended: {b} Hz, the narrowest bandwidth whose intervals meet every criterion, every narrower one failing at least one{few}"
        )
        .map_err(io)?,
        Recommendation::None => {
            writeln!(out, "no bandwidth meets the criteria (every one fails at least one); try other bandwidths or a slower walk{few}")
                .map_err(io)?
        }
        Recommendation::Undecided(b, n) => {
            let need = match n {
                Some(n) => format!("about {n} trials per bandwidth (--trials {n}) would decide it, if the figures stay as measured"),
                None => "its figures sit too close to a limit for any practical number of trials to decide".into(),
            };
            writeln!(out, "no bandwidth recommended yet: the intervals of {b} Hz, the narrowest one not failing, straddle a limit; {need}")
                .map_err(io)?
        }
    }
    let csv_path = out_dir.join("sweep.csv");
    write_atomic(&csv_path, csv.as_bytes())?;
    let pts = |g: &dyn Fn(&SweepRow) -> Option<f64>| rows.iter().filter_map(|r| g(r).map(|v| (r.bandwidth_hz, v))).collect::<Vec<_>>();
    let lo = |f: Option<Figure>| f.and_then(|f| f.ci).map(|c| c.lo);
    let hi = |f: Option<Figure>| f.and_then(|f| f.ci).map(|c| c.hi);
    let val = |f: Option<Figure>| f.map(|f| f.value);
    // Each figure as dots with its 95 % interval as the bar (half its width as "σ"), joined by a thin line.
    let series = |name: &str, g: &dyn Fn(&SweepRow) -> Option<Figure>, scale: f64, color: RGBColor| {
        let bars: Vec<(f64, f64, f64)> = rows
            .iter()
            .filter_map(|r| {
                let f = g(r)?;
                let half = lo(Some(f)).zip(hi(Some(f))).map(|(a, b)| 0.5 * (b - a)).unwrap_or(0.0);
                Some((r.bandwidth_hz, scale * (lo(Some(f)).unwrap_or(f.value) + half), scale * half))
            })
            .collect();
        [
            Series { style: Style::Line, ..Series::line(format!("{name}: estimate"), pts(&|r| val(g(r)).map(|v| scale * v)), color) },
            Series::bars(format!("{name}: 95 % interval"), bars, color),
        ]
    };
    let mut files = vec![csv_path];
    let mut depth_series =
        series("bias (mean of trials)", &|r| r.depth_bias_pct, 1.0, RGBColor(214, 39, 40)).into_iter().collect::<Vec<_>>();
    depth_series.extend(series("scatter (sd of trials)", &|r| r.depth_scatter_pct, 1.0, RGBColor(31, 119, 180)));
    let bias_lines = [1.0, -1.0].map(|sign| Series {
        style: Style::Dashed,
        ..Series::line(
            format!("bias limit ±{MAX_DEPTH_BIAS_PCT} %"),
            rows.iter().map(|r| (r.bandwidth_hz, sign * MAX_DEPTH_BIAS_PCT)).collect(),
            RGBColor(120, 120, 120),
        )
    });
    depth_series.extend(bias_lines);
    files.extend(figure(
        &out_dir.join("sweep-depth"),
        &Plot {
            title: format!("{}: depth error against bandwidth ({} trials each)", sc.name, spec.trials),
            panels: vec![Panel::new("depth error over the trials", "detection bandwidth (Hz)", "depth error (%)", depth_series)],
            caption: Some(CAUTION_LINE.into()),
        },
    )?);
    let mut lag_series = series("peak lag", &|r| r.lag_m, units.value(1.0), RGBColor(44, 160, 44)).into_iter().collect::<Vec<_>>();
    lag_series.extend([1.0, -1.0].map(|sign| Series {
        style: Style::Dashed,
        ..Series::line(
            format!("lag limit ±{}", units.dist(max_lag_m)),
            rows.iter().map(|r| (r.bandwidth_hz, sign * units.value(max_lag_m))).collect(),
            RGBColor(120, 120, 120),
        )
    }));
    let settle = vec![Series::line("99 % settling time", pts(&|r| Some(r.settle_s)), RGBColor(148, 103, 189))];
    files.extend(figure(
        &out_dir.join("sweep-lag"),
        &Plot {
            title: format!("{}: peak lag and settling against bandwidth ({} trials each)", sc.name, spec.trials),
            panels: vec![
                Panel::new(
                    "where the receiver is when its strongest readout shows, past the point over the sonde",
                    "detection bandwidth (Hz)",
                    format!("peak lag ({})", units.unit()),
                    lag_series,
                ),
                Panel::new("the detector's 99 % settling time", "detection bandwidth (Hz)", "settling (s)", settle),
            ],
            caption: Some(CAUTION_LINE.into()),
        },
    )?);
    writeln!(out, "files:").map_err(io)?;
    for p in files {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(())
}

fn f_opt(v: Option<f64>, p: usize) -> String {
    v.map(|v| format!("{v:.p$}")).unwrap_or_default()
}

/// `depthcheck`.
pub fn depthcheck(head: HeadKind, snr_db: f64, out_dir: &Path, units: Units, out: &mut dyn Write) -> Result<()> {
    folder(out_dir)?;
    let cases = depthcheck::run(head, snr_db)?;
    let methods: Vec<&str> = METHODS.iter().cloned().filter(|m| cases.iter().any(|c| c.method == *m)).collect();
    writeln!(
        out,
        "Depth check (head {}): depth error of each method, % of the true depth, over offsets from the point over the sonde",
        head.name()
    )
    .map_err(io)?;
    writeln!(out, "(none, 0.05 h ahead, 0.1 h left), sonde pitch 0 to 30 deg and upper-coil gain mismatch 0 to 5 %.").map_err(io)?;
    writeln!(
        out,
        "Each cell: worst |error| noise-free / RMS error at {snr_db} dB SNR, and 'w' withheld of the grid points; '*' marks an error past {LIMIT_PCT} %, '--' every estimate withheld."
    )
    .map_err(io)?;
    write!(out, "{:>10}", "true depth").map_err(io)?;
    for m in &methods {
        write!(out, " {:>28}", m).map_err(io)?;
    }
    writeln!(out).map_err(io)?;
    let table = depthcheck::table(&cases);
    for (h, per) in &table {
        write!(out, "{:>10}", units.depth(*h)).map_err(io)?;
        for (i, (worst, rms, withheld, total)) in per.iter().enumerate() {
            if !methods.contains(&METHODS[i]) {
                continue;
            }
            let mark = |v: Option<f64>| match v {
                Some(v) => format!("{v:.2} %{}", if v > LIMIT_PCT { "*" } else { " " }),
                None => "--".into(),
            };
            write!(out, " {:>28}", format!("{} / {} w{}/{}", mark(*worst), mark(*rms), withheld, total)).map_err(io)?;
        }
        writeln!(out).map_err(io)?;
    }
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
                y_label: format!("true depth ({})", if units == Units::Metric { "m" } else { "ft and in" }),
                value_label: "|error| %".into(),
                x: (0.0, PITCHES_DEG.len() as f64),
                y: (0.0, DEPTHS_M.len() as f64),
                values,
                tracks: vec![],
                marks: vec![],
                marked,
                marked_name: format!("error > {LIMIT_PCT} %"),
                cell_labels: Some((
                    PITCHES_DEG.iter().map(|p| format!("{p}")).collect(),
                    DEPTHS_M.iter().map(|d| if units == Units::Metric { format!("{d}") } else { units.depth(*d) }).collect(),
                )),
                caption: Some(CAUTION_LINE.into()),
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
