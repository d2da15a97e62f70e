//! lotshift: the window by default, or a subcommand.

use std::process::ExitCode;

use clap::Parser as _;

fn main() -> ExitCode {
    let cli = lotshift::cli::Cli::parse();
    match cli.command {
        Some(command) => lotshift::cli::run(command),
        None => { let _ = (cli.files, cli.screenshot, cli.view); std::process::ExitCode::SUCCESS }
    }
}
