//! The `hodos` command: a thin shell over the library.
//!
//! `hodos build` writes an artifact, `hodos info` describes one, `hodos eta`
//! answers one trip from one, `hodos eval` measures the answers against
//! completed trips, and `hodos demo` (also plain `hodos`) builds the
//! fictional demo city and shows a sample answer. Each verb is a file of
//! [`cli`].

mod cli;

use clap::Parser;
use cli::Command;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "hodos",
    version,
    about = "Travel times over customizable contraction hierarchies"
)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let command = cli.command.unwrap_or(Command::Demo {
        port: 8080,
        once: false,
    });
    match command.run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}
