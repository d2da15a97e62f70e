//! lotshift: the window by default, or a subcommand.

use std::process::ExitCode;

use clap::Parser as _;

fn main() -> ExitCode {
    let cli = lotshift::cli::Cli::parse();
    match cli.command {
        Some(command) => lotshift::cli::run(command),
        None => lotshift::gui::run(cli.files, cli.screenshot, cli.view),
    }
}
