//! The `kiln` command: parses arguments and hands over to [`kiln::cli::run`].
use std::process::ExitCode;

fn main() -> ExitCode {
    kiln::cli::main()
}
