//! Undertone host simulator: synthetic coil signals from the physics, run
//! through the same `undertone-dsp` pipeline the firmware runs.
//!
//! * [`scenario`]: what is buried and how the receiver moves (TOML).
//! * [`physics`], [`motion`], [`noise`], [`synth`]: the synthetic ADC stream.
//! * [`run`]: the receiver on that stream, readouts beside the truth.
//! * [`report`], [`plots`]: tables, summaries, cautions, PNG/SVG plots.
//! * [`wav`]: recordings in and out.
//! * [`sweep`], [`depthcheck`], [`map`]: the analysis commands; [`stats`]: their confidence intervals.
//! * [`screens`]: what the board's screen shows during a run (GIF and PNG stills).

pub mod calibrate;
pub mod commands;
pub mod depthcheck;
pub mod detector_demo;
pub mod error;
pub mod headfile;
pub mod locate;
pub mod map;
pub mod motion;
pub mod noise;
pub mod output;
pub mod physics;
pub mod plots;
pub mod progress;
pub mod range;
pub mod replay;
pub mod report;
pub mod run;
pub mod scan;
pub mod scenario;
pub mod score;
pub mod screens;
pub mod stats;
pub mod sweep;
pub mod synth;
pub mod units;
pub mod walk;
pub mod wav;
