//! The `spurhound` command: parses arguments, runs the library, prints, exits
//! 0 (within every limit, or no limit), 1 (a limit is exceeded) or 2 (bad input or usage).

mod cli;

fn main() -> std::process::ExitCode {
    cli::run()
}
