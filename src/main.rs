//! slackmeter's entry point: the command line runs, its exit code ends the process.

fn main() {
    std::process::exit(slackmeter::cli::run());
}
