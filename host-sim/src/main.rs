//! `undertone`: the Undertone receiver on a PC.

use clap::{Parser, Subcommand};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use undertone_sim::depthcheck::HeadChoice;
use undertone_sim::error::{Result, SimError};
use undertone_sim::scenario::Scenario;
use undertone_sim::wav::WavFormat;

#[derive(Parser)]
#[command(name = "undertone", version, about = "Simulate, replay and check the Undertone buried-beacon receiver", long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run the built-in demo: a walk along and across a buried sonde.
    Demo {
        /// Output folder for plots.
        #[arg(long, short, default_value = "undertone-out/demo")]
        output: PathBuf,
        /// Noise seed (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
        /// Print one JSON object per readout instead of the report.
        #[arg(long)]
        json: bool,
        /// Also write what the board's screen shows: screens.gif and PNG stills.
        #[arg(long)]
        screens: bool,
    },
    /// Run a scenario file.
    Walk {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Output folder for plots.
        #[arg(long, short, default_value = "undertone-out/walk")]
        output: PathBuf,
        /// Noise seed (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
        /// Print one JSON object per readout instead of the report.
        #[arg(long)]
        json: bool,
        /// Also write what the board's screen shows: screens.gif and PNG stills.
        #[arg(long)]
        screens: bool,
    },
    /// Write a scenario's synthetic multi-channel ADC stream as WAV.
    Synth {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// WAV file to write.
        #[arg(long, short = 'o')]
        output: PathBuf,
        /// Sample format.
        #[arg(long, value_enum, default_value = "i24")]
        format: WavFormat,
        /// Noise seed (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
    },
    /// Run the receiver on a recording (1 to 8 channels).
    Replay {
        /// WAV file (16/24/32-bit integer or 32-bit float).
        file: PathBuf,
        /// Beacon frequency, Hz.
        #[arg(long)]
        freq: f64,
        /// Coil-head TOML file (default: the 4-coil reference head, channels lower-along,
        /// lower-across, lower-vertical, upper-along 0.40 m above).
        #[arg(long)]
        head: Option<PathBuf>,
        /// Detection bandwidth, Hz (default: the preset's).
        #[arg(long)]
        bandwidth: Option<f64>,
        /// Print one JSON object per readout.
        #[arg(long)]
        json: bool,
    },
    /// Monte Carlo over noise seeds for each detection bandwidth, with 95 % confidence intervals;
    /// recommends a bandwidth only when the intervals decide it.
    Sweep {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Bandwidths to try, Hz, comma-separated.
        #[arg(long, value_delimiter = ',', required = true)]
        bandwidths: Vec<f64>,
        /// Trials (noise seeds) per bandwidth; below 20 the 95 % intervals are too wide to decide much.
        #[arg(long, default_value_t = undertone_sim::sweep::DEFAULT_TRIALS)]
        trials: usize,
        /// Seed of the trials' noise seeds (default: the scenario's seed).
        #[arg(long)]
        seed: Option<u64>,
        /// Largest acceptable peak lag, m.
        #[arg(long, default_value_t = 0.2)]
        max_lag_m: f64,
        /// Output folder for the CSV and plots.
        #[arg(long, short, default_value = "undertone-out/sweep")]
        output: PathBuf,
    },
    /// Error of every depth method over depth, offset, pitch and gain mismatch.
    Depthcheck {
        /// Built-in head to read with.
        #[arg(long, value_enum, default_value = "reference4")]
        head: HeadChoice,
        /// SNR of the strongest coil in the noisy case, dB.
        #[arg(long, default_value_t = 40.0)]
        snr_db: f64,
        /// Output folder for the CSV and heat maps.
        #[arg(long, short, default_value = "undertone-out/depthcheck")]
        output: PathBuf,
    },
    /// Heat maps of the sonde's field over the ground with the tracks drawn in.
    Map {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Output folder for the maps.
        #[arg(long, short, default_value = "undertone-out/map")]
        output: PathBuf,
    },
    /// The receiver in closed loop: a simulated operator, from random starts, does only what
    /// the receiver tells them until it says "over" and shows a depth.
    ///
    /// The operator's procedure, each readout: "wait": stand still; "turn in line": turn on the
    /// spot toward the field (30°/s) until the bearing reads within 5°; "walk along": walk forward
    /// along the handle at 0.3 m/s keeping the heading, back after 3 m without an answer;
    /// "walk ahead"/"walk back": walk that way at 0.3 m/s, 0.1 m/s within 0.3 m of the point
    /// shown; "sweep along": 0.3 m forward and back at 0.2 m/s; "step left"/"step right": step
    /// sideways the distance shown at 0.2 m/s, then sweep along; "hold still": stand, and once a
    /// depth has been shown for 1 s mark the spot and read it. A start is located when the spot
    /// is within max(0.15 m, 0.1·depth) of the point over the sonde and the depth within 2σ and
    /// 5 % of the truth (120 s at most). Starts are uniform within the detection range with a
    /// random heading, where the best coil reads at least 20 dB.
    Locate {
        /// Scenario TOML file (its sonde, receiver, noise and ground; its motion is not used).
        scenario: PathBuf,
        /// Number of starts.
        #[arg(long, default_value_t = 200, value_parser = clap::value_parser!(u32).range(1..=100_000))]
        starts: u32,
        /// Seed of the starts and their noise (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
        /// Print one JSON object per start and a last summary object.
        #[arg(long)]
        json: bool,
        /// Output folder for the tracks drawn over the field map.
        #[arg(long, short, default_value = "undertone-out/locate")]
        output: PathBuf,
        /// Instead, print every readout of one start as the operator saw it.
        #[arg(long)]
        trace: Option<usize>,
    },
    /// The detector alone: per-coil amplitude and phase of a synthetic tone against the truth.
    Detect,
}

fn io(e: std::io::Error) -> SimError {
    SimError::io(Path::new("<stdout>"), "write", e)
}

fn run(cmd: Command, out: &mut dyn Write) -> Result<()> {
    match cmd {
        Command::Demo { output, seed, json, screens } => {
            undertone_sim::walk::walk(&Scenario::demo(), &output, json, seed, out).map(|_| ())?;
            if screens && !json {
                undertone_sim::screens::walk(&Scenario::demo(), &output, seed, out)?;
            }
            Ok(())
        }
        Command::Walk { scenario, output, seed, json, screens } => {
            let sc = Scenario::load(&scenario)?;
            undertone_sim::walk::walk(&sc, &output, json, seed, out).map(|_| ())?;
            if screens && !json {
                undertone_sim::screens::walk(&sc, &output, seed, out)?;
            }
            Ok(())
        }
        Command::Synth { scenario, output, format, seed } => {
            let sc = Scenario::load(&scenario)?;
            let mut s = undertone_sim::synth::Synth::new(&sc, seed);
            let n = undertone_sim::wav::write(&output, &mut s, format)?;
            writeln!(out, "wrote {} ({} channels, {} frames, {:.0} Hz, {:?})", output.display(), s.coils, n, s.fs, format).map_err(io)
        }
        Command::Replay { file, freq, head, bandwidth, json } => {
            let rows = undertone_sim::replay::replay(
                &file,
                &undertone_sim::replay::ReplayOptions { freq_hz: freq, head: head.as_deref(), bandwidth_hz: bandwidth },
            )?;
            undertone_sim::replay::print(out, &rows, json)
        }
        Command::Sweep { scenario, bandwidths, trials, seed, max_lag_m, output } => {
            if trials == 0 || trials > 10_000 {
                return Err(SimError::Arg { name: "--trials".into(), msg: format!("{trials} is not allowed (allowed 1 to 10000)") });
            }
            if !(max_lag_m.is_finite() && max_lag_m > 0.0) {
                return Err(SimError::Arg { name: "--max-lag-m".into(), msg: format!("{max_lag_m} is not allowed (allowed above 0)") });
            }
            let sc = Scenario::load(&scenario)?;
            let spec = undertone_sim::sweep::SweepSpec {
                bandwidths: &bandwidths,
                trials,
                seed: seed.unwrap_or(sc.seed),
                max_lag_m,
                progress: std::io::stderr().is_terminal(),
            };
            undertone_sim::commands::sweep(&sc, &spec, &output, out)
        }
        Command::Depthcheck { head, snr_db, output } => {
            if !(snr_db.is_finite() && (10.0..=120.0).contains(&snr_db)) {
                return Err(SimError::Arg { name: "--snr-db".into(), msg: format!("{snr_db} is not allowed (allowed 10 to 120)") });
            }
            undertone_sim::commands::depthcheck(head, snr_db, &output, out)
        }
        Command::Map { scenario, output } => {
            let sc = Scenario::load(&scenario)?;
            let files = undertone_sim::map::map(&sc, &output)?;
            writeln!(out, "maps:").map_err(io)?;
            for f in files {
                writeln!(out, "  {}", f.display()).map_err(io)?;
            }
            Ok(())
        }
        Command::Locate { scenario, starts, seed, json, output, trace } => {
            let sc = Scenario::load(&scenario)?;
            if let Some(k) = trace {
                let r = undertone_sim::locate::trace(&sc, k, seed.unwrap_or(sc.seed), out)?;
                return writeln!(out, "{}", serde_json::to_string(&r).unwrap_or_default()).map_err(io);
            }
            undertone_sim::locate::command(&sc, starts as usize, seed.unwrap_or(sc.seed), json, &output, out)
        }
        Command::Detect => undertone_sim::detector_demo::run(out).map_err(io),
    }
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand)
            {
                let _ = e.print();
                return if e.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand { ExitCode::from(2) } else { ExitCode::SUCCESS };
            }
            // One line: clap's first line, without its usage block.
            let text = e.render().to_string();
            let first = text.lines().next().unwrap_or("error: bad arguments").trim_start_matches("error: ");
            eprintln!("undertone: {first} (see 'undertone --help')");
            return ExitCode::from(2);
        }
    };
    let mut stdout = std::io::stdout().lock();
    match run(cli.command, &mut stdout) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let _ = stdout.flush();
            eprintln!("undertone: {e}");
            ExitCode::FAILURE
        }
    }
}
