//! Binary entry point: parse arguments, run, report `error: ...` and exit 2
//! (or, when a series run skipped spectra but wrote the rest, `warning:
//! ...` and exit 3).

mod cli;

use clap::Parser;
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let parsed = cli::args::Cli::parse();
    match cli::run(parsed) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // A closed pipe on stdout is not an error worth reporting.
            if let Some(io) = e.downcast_ref::<std::io::Error>()
                && io.kind() == std::io::ErrorKind::BrokenPipe
            {
                return ExitCode::SUCCESS;
            }
            if let Some(partial) = e.downcast_ref::<cli::track::PartialRun>() {
                let _ = writeln!(std::io::stderr(), "warning: {partial}");
                return ExitCode::from(3);
            }
            let mut msg = e.to_string();
            for cause in e.chain().skip(1) {
                let c = cause.to_string();
                if !msg.contains(&c) {
                    msg.push_str(": ");
                    msg.push_str(&c);
                }
            }
            let _ = writeln!(std::io::stderr(), "error: {msg}");
            ExitCode::from(2)
        }
    }
}
