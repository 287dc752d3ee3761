//! The `copyloop` command: argument parsing only; every command calls into the library.

use clap::Parser;
use copyloop::cli::{self, Cli};

fn main() {
    let args = Cli::parse();
    if let Err(e) = cli::run(args) {
        eprintln!("{e}");
        std::process::exit(e.exit_code());
    }
}
