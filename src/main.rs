//! lotshift: the window by default, or a subcommand.

use std::process::ExitCode;

use clap::Parser as _;

fn main() -> ExitCode {
    let cli = lotshift::cli::Cli::parse();
    match cli.command {
        Some(command) => lotshift::cli::run(command),
        #[cfg(feature = "gui")]
        None => lotshift::gui::run_with_spec(
            cli.files,
            cli.screenshot,
            cli.view,
            cli.spec,
            cli.protocol,
        ),
        #[cfg(not(feature = "gui"))]
        None => {
            let _ = (cli.files, cli.screenshot, cli.view, cli.spec, cli.protocol);
            eprintln!(
                "lotshift: this build has no window (built without the \"gui\" feature); see lotshift --help"
            );
            std::process::ExitCode::from(lotshift::cli::EXIT_BAD_INPUT)
        }
    }
}
