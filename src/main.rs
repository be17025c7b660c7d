//! The `cairn` binary: parse, run, print the error chain, map to an exit code.

use clap::Parser;

fn main() {
    let cli = cairn::cli::Cli::parse();
    match cairn::cli::run(cli) {
        Ok(outcome) => std::process::exit(outcome.exit_code()),
        Err(e) => {
            eprintln!("error: {e:#}");
            std::process::exit(2);
        }
    }
}
