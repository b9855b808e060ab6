//! `undertone`: the Undertone receiver on a PC.

use std::process::ExitCode;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args.first().map(String::as_str) {
        Some("demo") | None => match undertone_sim::detector_demo::run(&mut std::io::stdout()) {
            Ok(()) => ExitCode::SUCCESS,
            Err(e) => {
                eprintln!("undertone: {e}");
                ExitCode::FAILURE
            }
        },
        Some(other) => {
            eprintln!("undertone: unknown command '{other}' (try 'demo')");
            ExitCode::from(2)
        }
    }
}
