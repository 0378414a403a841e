//! The `tapgrid` binary: parses the command line and runs a subcommand.

use clap::Parser;

fn main() {
    let cli = tapgrid::cli::Cli::parse();
    if let Err(e) = tapgrid::cli::run(cli) {
        eprintln!("tapgrid: error: {e:#}");
        std::process::exit(2);
    }
}
