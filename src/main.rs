//! The `tapgrid` binary: parses the command line and runs a subcommand.

use clap::Parser;

/// A test's spectra, records and tables are multi-megabyte buffers made and dropped on several
/// threads; the system allocator hands each back to the operating system and faults it in
/// afresh (page faults and cross-core TLB flushes, a fifth of `analyze`'s time), where mimalloc
/// keeps and reuses them.
#[global_allocator]
static ALLOC: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() {
    let cli = tapgrid::cli::Cli::parse();
    if let Err(e) = tapgrid::cli::run(cli) {
        eprintln!("tapgrid: error: {e:#}");
        std::process::exit(2);
    }
}
