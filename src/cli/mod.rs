//! The command line: argument definitions (clap) and one function per
//! command. Commands turn library results into bytes for stdout; they hold
//! no statistics or scheduling logic of their own. One module per command.

mod check;
mod plan;
mod replan;
mod size;

pub use check::CheckArgs;
pub use plan::PlanArgs;
pub use replan::ReplanArgs;
pub use size::SizeArgs;

use clap::{Parser, Subcommand, ValueEnum};
use std::io::Write;
use std::process::ExitCode;

/// Exit code for input the user can fix (bad flags, invalid files).
pub const EXIT_INVALID: u8 = 2;
/// Exit code for any other failure.
pub const EXIT_FAILURE: u8 = 1;

#[derive(Parser, Debug)]
#[command(
    name = "sluice",
    version,
    about = "Plan a queue of A/B tests onto finite traffic",
    long_about = "Plan a queue of A/B tests onto finite traffic.\n\n\
        sluice sizes each test with the published statistics and lays out a \
        calendar: the share of traffic each test gets, when it starts, when \
        its result arrives, and which tests do not fit and why. Plans are \
        estimates: they assume independent randomisation units, a fixed \
        horizon and the traffic forecast you give."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Size one test: units per arm, power, and (with --daily) days to run
    Size(size::SizeArgs),
    /// Validate a portfolio file and show which tests could fit the window
    Check(check::CheckArgs),
    /// Plan the portfolio: a start, share and end for every test that fits
    Plan(plan::PlanArgs),
    /// Plan again mid-quarter around the running tests, and show what moved
    Replan(replan::ReplanArgs),
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub enum TextOrJson {
    Text,
    Json,
}

/// A failure that ends a command, with the exit code it deserves.
#[derive(Debug)]
pub struct Failure {
    pub code: u8,
    pub message: String,
}

impl Failure {
    pub fn invalid(message: impl Into<String>) -> Failure {
        Failure {
            code: EXIT_INVALID,
            message: message.into(),
        }
    }
}

/// A value as pretty JSON with a closing newline, for `--format json`.
pub fn json_bytes(value: &impl serde::Serialize) -> Result<Vec<u8>, Failure> {
    let mut s = serde_json::to_string_pretty(value).map_err(|e| Failure {
        code: EXIT_FAILURE,
        message: format!("cannot write JSON: {e}"),
    })?;
    s.push('\n');
    Ok(s.into_bytes())
}

/// Entry point of the binary.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_INVALID } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(bytes) => write_stdout(&bytes),
        // Messages that are already rendered diagnostics (one or more
        // `error: ...` blocks, as from a portfolio that fails to load)
        // print as they are. A closed stderr is not worth a panic.
        Err(f) if f.message.starts_with("error: ") => {
            let _ = write!(std::io::stderr(), "{}", f.message);
            ExitCode::from(f.code)
        }
        Err(f) => {
            let _ = writeln!(std::io::stderr(), "error: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}

/// Writes the output; a closed pipe (e.g. `| head`) is not an error.
fn write_stdout(bytes: &[u8]) -> ExitCode {
    let mut out = std::io::stdout().lock();
    match out.write_all(bytes).and_then(|_| out.flush()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: cannot write the output: {e}");
            ExitCode::from(EXIT_FAILURE)
        }
    }
}

/// Runs a parsed command and returns the bytes for stdout.
pub fn run(cli: Cli) -> Result<Vec<u8>, Failure> {
    match cli.command {
        Command::Size(args) => size::run(&args),
        Command::Check(args) => check::run(&args),
        Command::Plan(args) => plan::run(&args),
        Command::Replan(args) => replan::run(&args),
    }
}
