//! `undertone`: the Undertone receiver on a PC.

use clap::{Parser, Subcommand};
use std::io::Write;
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
    /// Monte Carlo over noise seeds for each detection bandwidth.
    Sweep {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Bandwidths to try, Hz, comma-separated.
        #[arg(long, value_delimiter = ',', required = true)]
        bandwidths: Vec<f64>,
        /// Trials (noise seeds) per bandwidth.
        #[arg(long, default_value_t = 8)]
        trials: usize,
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
        Command::Sweep { scenario, bandwidths, trials, max_lag_m, output } => {
            if trials == 0 || trials > 10_000 {
                return Err(SimError::Arg { name: "--trials".into(), msg: format!("{trials} is not allowed (allowed 1 to 10000)") });
            }
            let sc = Scenario::load(&scenario)?;
            undertone_sim::commands::sweep(&sc, &bandwidths, trials, max_lag_m, &output, out)
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
