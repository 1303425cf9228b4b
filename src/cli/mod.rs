//! The command-line program: argument parsing and one file per subcommand.

pub mod args;
pub mod demo;
pub mod invert;
pub mod kk;
pub mod model;
pub mod output;
pub mod simulate;
pub mod track;
pub mod transient;

use anyhow::Result;
use args::{Cli, Command};

/// Runs the parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Invert(a) => invert::run(&a),
        Command::Transient(a) => transient::run(&a),
        Command::Kk(a) => kk::run(&a),
        Command::Track(a) => track::run(&a),
        Command::Simulate(a) => simulate::run(&a),
        Command::Model(a) => model::run(&a),
        Command::Demo(a) => demo::run(&a),
    }
}
