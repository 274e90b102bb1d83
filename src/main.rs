//! The `sluice` binary: parses arguments and hands over to the library.

use std::process::ExitCode;

fn main() -> ExitCode {
    sluice::cli_main()
}
