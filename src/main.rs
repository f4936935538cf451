//! slackmeter command-line entry point: parse, dispatch, map errors to exit codes.

use clap::Parser;
use slackmeter::cli::{self, Cli};

fn main() {
    let parsed = Cli::parse();
    let code = match cli::run(parsed) {
        Ok(code) => code,
        Err((code, report)) => {
            eprintln!("{report:?}");
            code
        }
    };
    std::process::exit(code);
}
