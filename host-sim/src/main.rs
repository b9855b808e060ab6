//! `undertone`: the Undertone receiver on a PC.

use clap::{Parser, Subcommand};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use undertone_sim::error::{Result, SimError};
use undertone_sim::scenario::{HeadKind, Scenario};
use undertone_sim::units::Units;
use undertone_sim::walk::ShowOptions;
use undertone_sim::wav::WavFormat;

mod args;

#[derive(Parser)]
#[command(name = "undertone", version, about = "Simulate, replay and check the Undertone buried-beacon receiver", long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run the built-in demo: a walk along and across a buried sonde.
    #[command(allow_negative_numbers = true)]
    Demo {
        /// Output folder for plots.
        #[arg(long, short, default_value = "undertone-out/demo")]
        output: PathBuf,
        /// Noise seed (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
        /// Print one JSON object per readout and a last summary object (lengths in metres) instead of the report.
        #[arg(long)]
        json: bool,
        /// Also write what the board's screen shows: screens.gif and PNG stills.
        #[arg(long)]
        screens: bool,
        /// Lengths in metres, or depths in feet and inches and positions in feet.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
    },
    /// Run a scenario file.
    #[command(allow_negative_numbers = true)]
    Walk {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Output folder for plots.
        #[arg(long, short, default_value = "undertone-out/walk")]
        output: PathBuf,
        /// Noise seed (default: the scenario's).
        #[arg(long)]
        seed: Option<u64>,
        /// Print one JSON object per readout and a last summary object (lengths in metres) instead of the report.
        #[arg(long)]
        json: bool,
        /// Also write what the board's screen shows: screens.gif and PNG stills.
        #[arg(long)]
        screens: bool,
        /// Lengths in metres, or depths in feet and inches and positions in feet.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
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
    /// Run the receiver on a recording (1 to 8 channels): timeline, summary and plots.
    #[command(allow_negative_numbers = true)]
    Replay {
        /// WAV file (16/24/32-bit integer or 32-bit float).
        file: PathBuf,
        /// Beacon frequency, Hz (find it with 'undertone scan').
        #[arg(long, value_parser = args::above_zero)]
        freq: f64,
        /// Coil-head TOML file (default: the 4-coil reference head, channels lower-along,
        /// lower-across, lower-vertical, upper-along 0.40 m above).
        #[arg(long)]
        head: Option<PathBuf>,
        /// Detection bandwidth, Hz (default: the preset's).
        #[arg(long, value_parser = args::bandwidth)]
        bandwidth: Option<f64>,
        /// Height of the lower coil centre above the ground when recorded, m (default: the receiver's).
        #[arg(long, value_parser = args::finite)]
        coil_height: Option<f64>,
        /// Output folder for plots.
        #[arg(long, short, default_value = "undertone-out/replay")]
        output: PathBuf,
        /// Print one JSON object per readout and a last summary object (lengths in metres).
        #[arg(long)]
        json: bool,
        /// Lengths in metres, or depths in feet and inches.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
    },
    /// List the tones in a recording, strongest first, to find an unknown beacon before a replay.
    Scan {
        /// WAV file (16/24/32-bit integer or 32-bit float).
        file: PathBuf,
        /// Start of the stretch scanned, s.
        #[arg(long, default_value_t = 0.0, value_parser = args::not_negative)]
        start: f64,
        /// Length of the stretch scanned, s (longer finds weaker tones and takes longer).
        #[arg(long, default_value_t = 10.0, value_parser = args::above_zero)]
        seconds: f64,
        /// Print one JSON object per tone.
        #[arg(long)]
        json: bool,
    },
    /// Monte Carlo over noise seeds for each detection bandwidth, with 95 % confidence intervals;
    /// recommends a bandwidth only when the intervals decide it.
    Sweep {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Bandwidths to try, Hz, comma-separated.
        #[arg(long, value_delimiter = ',', required = true, value_parser = args::bandwidth)]
        bandwidths: Vec<f64>,
        /// Trials (noise seeds) per bandwidth; below 20 the 95 % intervals are too wide to decide much.
        #[arg(long, default_value_t = undertone_sim::sweep::DEFAULT_TRIALS, value_parser = args::trials)]
        trials: usize,
        /// Seed of the trials' noise seeds (default: the scenario's seed).
        #[arg(long)]
        seed: Option<u64>,
        /// Largest acceptable peak lag, m.
        #[arg(long, default_value_t = 0.2, value_parser = args::above_zero)]
        max_lag_m: f64,
        /// Output folder for the CSV and plots.
        #[arg(long, short, default_value = "undertone-out/sweep")]
        output: PathBuf,
        /// Lengths in metres or feet.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
    },
    /// Error of every depth method over depth, offset, pitch and gain mismatch.
    Depthcheck {
        /// Built-in head to read with.
        #[arg(long, value_enum, default_value = "reference4")]
        head: HeadKind,
        /// SNR of the strongest coil in the noisy case, dB.
        #[arg(long, default_value_t = 40.0, value_parser = args::depthcheck_snr)]
        snr_db: f64,
        /// Output folder for the CSV and heat maps.
        #[arg(long, short, default_value = "undertone-out/depthcheck")]
        output: PathBuf,
        /// Depths in metres or in feet and inches.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
    },
    /// Heat maps of the sonde's field over the ground with the tracks and the detection range drawn in.
    Map {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Output folder for the maps.
        #[arg(long, short, default_value = "undertone-out/map")]
        output: PathBuf,
        /// Lengths in metres or feet.
        #[arg(long, value_enum, default_value = "metric")]
        units: Units,
    },
    /// The receiver in closed loop: a simulated operator, from random starts, does only what
    /// the receiver tells them until it says "over" and shows a depth.
    ///
    /// The operator's procedure, each readout: a move of a set distance (the hint shows one:
    /// walk ahead/back, step left/right, a leg of a sweep): move it along the handle or sideways
    /// at 0.2 m/s keeping the heading, stop, and stand 0.8 s reading the screen; "wait": stand
    /// still; "turn in line": turn on the spot toward the field (30°/s) while asked; "walk
    /// along" without a distance: walk forward at 0.3 m/s, back after 3 m without an answer;
    /// "hold still": stand, and once a depth has been shown for 1 s mark the spot and read it.
    /// A start is located when the spot is within max(0.15 m, 0.1·depth) of the point over the
    /// sonde and the depth within 2σ and 5 % of the truth (300 s at most). Starts are uniform
    /// within the detection range with a random heading, where the best coil reads at least
    /// 20 dB.
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
        Command::Demo { output, seed, json, screens, units } => {
            undertone_sim::walk::walk(&Scenario::demo(), &output, ShowOptions { json, seed, units }, out).map(|_| ())?;
            if screens && !json {
                undertone_sim::screens::walk(&Scenario::demo(), &output, seed, out)?;
            }
            Ok(())
        }
        Command::Walk { scenario, output, seed, json, screens, units } => {
            let sc = Scenario::load(&scenario)?;
            undertone_sim::walk::walk(&sc, &output, ShowOptions { json, seed, units }, out).map(|_| ())?;
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
        Command::Replay { file, freq, head, bandwidth, coil_height, output, json, units } => {
            let opt = undertone_sim::replay::ReplayOptions {
                freq_hz: freq,
                head: head.as_deref(),
                bandwidth_hz: bandwidth,
                coil_height_m: coil_height,
            };
            undertone_sim::replay::command(&file, &opt, &output, ShowOptions { json, seed: None, units }, out).map(|_| ())
        }
        Command::Scan { file, start, seconds, json } => {
            undertone_sim::scan::command(&file, undertone_sim::scan::ScanOptions { start_s: start, seconds }, json, out)
        }
        Command::Sweep { scenario, bandwidths, trials, seed, max_lag_m, output, units } => {
            let sc = Scenario::load(&scenario)?;
            let spec = undertone_sim::sweep::SweepSpec {
                bandwidths: &bandwidths,
                trials,
                seed: seed.unwrap_or(sc.seed),
                max_lag_m,
                progress: std::io::stderr().is_terminal(),
            };
            undertone_sim::commands::sweep(&sc, &spec, &output, units, out)
        }
        Command::Depthcheck { head, snr_db, output, units } => undertone_sim::commands::depthcheck(head, snr_db, &output, units, out),
        Command::Map { scenario, output, units } => {
            let sc = Scenario::load(&scenario)?;
            let (files, range) = undertone_sim::map::map(&sc, &output)?;
            writeln!(
                out,
                "detection range: {} from the point over the sonde (the best coil reads at least {} dB SNR all round, by the field model and the scenario's sensor noise; mains and other tones left out)",
                units.dist(range),
                undertone_sim::range::RANGE_SNR_DB
            )
            .map_err(io)?;
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
