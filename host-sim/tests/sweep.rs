//! The bandwidth sweep: the same output for a seed whatever the thread count,
//! intervals from published quantiles, and a recommendation only when the
//! intervals decide it.

use std::path::PathBuf;
use std::process::Command;
use undertone_sim::scenario::{MotionSpec, Scenario};
use undertone_sim::stats::{t_quantile, trials_to_clear_mean, trials_to_clear_rate, wilson, z_quantile, Interval, Welford};
use undertone_sim::sweep::{recommend, sweep, Figure, Recommendation, Standing, SweepRow, SweepSpec};

/// The demo scenario, shortened to 8 s at 16 kHz with 10× its noise: a walk
/// along the sonde's axis past it, back to the point over it, then 2 s still there.
fn short() -> Scenario {
    let mut sc = Scenario::demo();
    sc.name = "short sweep run".into();
    sc.receiver.sample_rate_hz = 16_000.0;
    sc.noise.density_t_per_rthz *= 10.0;
    sc.motion = vec![
        MotionSpec::Walk { from: [-0.8, 0.0], to: [0.8, 0.0], speed_m_s: 0.4, heading_deg: Some(0.0), wobble_deg: 0.0 },
        MotionSpec::Walk { from: [0.8, 0.0], to: [0.0, 0.0], speed_m_s: 0.4, heading_deg: Some(0.0), wobble_deg: 0.0 },
        MotionSpec::Still { at: [0.0, 0.0], heading_deg: 0.0, duration_s: 2.0 },
    ];
    sc.validate("short").unwrap();
    sc
}

fn spec(bw: &[f64], trials: usize) -> SweepSpec<'_> {
    SweepSpec { bandwidths: bw, trials, seed: 17, max_lag_m: 0.2, progress: false }
}

#[test]
fn sweep_is_the_same_with_one_and_two_threads() {
    let sc = short();
    let bw = [1.0, 4.0];
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        pool.install(|| sweep(&sc, &spec(&bw, 12)).unwrap())
    };
    let one = run(1);
    assert_eq!(one, run(2));
    assert_eq!(one.len(), 2);
    assert!(one.iter().all(|r| r.trials == 12 && r.lag_m.is_some()), "{one:?}");
    // Another seed: other noise, other figures.
    let pool = rayon::ThreadPoolBuilder::new().num_threads(2).build().unwrap();
    let other = pool.install(|| sweep(&sc, &SweepSpec { seed: 18, ..spec(&bw, 12) }).unwrap());
    assert_ne!(one, other);
}

#[test]
fn command_output_is_the_same_with_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let sc = dir.path().join("short.toml");
    std::fs::write(&sc, toml::to_string(&short()).unwrap()).unwrap();
    let run = |threads: &str| {
        let out: PathBuf = dir.path().join(format!("out-{threads}"));
        let o = Command::new(env!("CARGO_BIN_EXE_undertone"))
            .args(["sweep", sc.to_str().unwrap(), "--bandwidths", "1,4", "--trials", "10", "--seed", "5", "-o", out.to_str().unwrap()])
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let stderr = String::from_utf8_lossy(&o.stderr).to_string();
        assert!(stderr.contains(&format!("on {threads} threads")), "{stderr}");
        assert!(stderr.contains("warning: --trials 10 is below 20"), "{stderr}");
        let stdout = String::from_utf8_lossy(&o.stdout).replace(out.to_str().unwrap(), "OUT");
        (stdout, std::fs::read_to_string(out.join("sweep.csv")).unwrap())
    };
    let (a, b) = (run("1"), run("2"));
    assert_eq!(a, b);
    let (stdout, csv) = a;
    assert!(stdout.contains("95 % confidence interval") && stdout.contains("] "), "{stdout}");
    // Ten trials cannot bound the false-peak rate below 10 % even with none seen (Wilson upper end 27.8 %).
    assert!(!stdout.contains("recommended:") && stdout.contains("unsure (~35 trials)"), "{stdout}");
    assert_eq!(csv.lines().count(), 3);
    assert_eq!(csv.lines().next().unwrap().split(',').count(), csv.lines().nth(1).unwrap().split(',').count());
}

#[test]
fn intervals_use_the_published_quantiles() {
    // Student's t, two-sided 95 %: 2.262 (9 dof), 2.042 (30), 1.980 (120)
    // (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, Table 26.10).
    for (dof, t) in [(9, 2.262), (30, 2.042), (120, 1.980)] {
        assert!((t_quantile(dof) - t).abs() < 5e-4, "t({dof}) = {}", t_quantile(dof));
    }
    // The normal quantile 1.960 (ibid., Table 26.1).
    assert!((z_quantile() - 1.95996).abs() < 1e-5);
    // Ten values with mean 5 and sd 1: mean 5 ± 2.262/√10, sd in
    // [√(9/19.023), √(9/2.700)] (chi-square with 9 dof: 2.700 and 19.023, ibid. Table 26.8).
    let mut w = Welford::default();
    let xs = [5.0 - 1.5, 5.0 - 1.0, 5.0 - 0.5, 5.0, 5.0, 5.0, 5.0, 5.0 + 0.5, 5.0 + 1.0, 5.0 + 1.5];
    let s = (xs.iter().map(|x| (x - 5.0) * (x - 5.0)).sum::<f64>() / 9.0).sqrt();
    for x in xs {
        w.push(x);
    }
    let (m, ci) = w.mean_ci().unwrap();
    assert!((m - 5.0).abs() < 1e-12 && (ci.hi - 5.0 - 2.2622 * s / 10f64.sqrt()).abs() < 1e-3, "{ci:?}");
    let (sd, ci) = w.sd_ci().unwrap();
    assert!((sd - s).abs() < 1e-12);
    assert!((ci.lo / s - (9.0 / 19.023f64).sqrt()).abs() < 1e-3 && (ci.hi / s - (9.0 / 2.700f64).sqrt()).abs() < 1e-3, "{ci:?}");
    // Wilson (J. Am. Stat. Assoc. 22:209, 1927): each end p solves (p̂ − p)² = z²·p(1 − p)/n.
    for (k, n) in [(0, 20), (3, 20), (10, 20), (20, 20), (81, 263)] {
        let (p_hat, ci) = wilson(k, n).unwrap();
        let z = z_quantile();
        for p in [ci.lo, ci.hi] {
            let lhs = (p_hat - p).powi(2);
            let rhs = z * z * p * (1.0 - p) / n as f64;
            assert!((lhs - rhs).abs() < 1e-12, "k {k}, n {n}, end {p}");
        }
        assert!(ci.lo <= p_hat && p_hat <= ci.hi);
    }
}

#[test]
fn trials_needed_are_the_fewest_that_clear_the_limit() {
    // A mean of 0.25 with sd 0.1 against a limit of 0.2: t(n − 1)·0.1/√n < 0.05 first at
    // n = 18 (t(17) = 2.110 gives 0.0497; t(16) = 2.120 with n = 17 gives 0.0514; A&S Table 26.10).
    let n = trials_to_clear_mean(0.25, 0.1, 0.2, 2).unwrap();
    assert_eq!(n, 18);
    assert!(t_quantile(n - 2) * 0.1 / ((n - 1) as f64).sqrt() >= 0.05);
    // No false peak seen: the Wilson upper end z²/(n + z²) drops to 10 % at n = 35.
    assert_eq!(trials_to_clear_rate(0.0, 0.1, 2), Some(35));
    assert!(wilson(0, 35).unwrap().1.hi <= 0.1 && wilson(0, 34).unwrap().1.hi > 0.1);
    // A figure exactly on its limit can never be decided.
    assert_eq!(trials_to_clear_mean(0.2, 0.1, 0.2, 2), None);
    assert_eq!(trials_to_clear_rate(0.1, 0.1, 2), None);
}

fn row(bw: f64, standing: [Standing; 4]) -> SweepRow {
    let f = Figure { value: 0.0, ci: Some(Interval { lo: 0.0, hi: 0.0 }) };
    SweepRow {
        bandwidth_hz: bw,
        trials: 50,
        with_depth: 50,
        depth_rate: f,
        depth_bias_pct: Some(f),
        depth_scatter_pct: Some(f),
        settle_s: 1.0,
        lag_m: Some(f),
        false_peak_rate: f,
        standing,
    }
}

#[test]
fn recommends_only_when_the_intervals_decide() {
    use Standing::*;
    let meets = [Meets; 4];
    let fails = [Fails, Meets, Meets, Meets];
    let unsure = [Unsure(Some(240)), Meets, Unsure(Some(80)), Meets];
    // Narrower bandwidths all fail: the narrowest that meets everything.
    assert_eq!(recommend(&[row(2.4, meets), row(0.6, fails), row(1.2, meets)]), Recommendation::Bandwidth(1.2));
    // A narrower one might meet them too: undecided, with the larger of its trial counts.
    assert_eq!(recommend(&[row(0.6, fails), row(1.2, unsure), row(2.4, meets)]), Recommendation::Undecided(1.2, Some(240)));
    assert_eq!(recommend(&[row(1.2, [Unsure(None), Meets, Meets, Unsure(Some(9))])]), Recommendation::Undecided(1.2, None));
    // Everything fails.
    assert_eq!(recommend(&[row(0.6, fails), row(1.2, fails)]), Recommendation::None);
    // Failing one criterion fails the bandwidth even when others are unsure.
    assert_eq!(row(1.0, [Unsure(Some(5)), Fails, Meets, Meets]).verdict(), Fails);
}
