//! The command line: argument definitions (clap) and one function per
//! command. Commands turn library results into bytes for stdout; they hold
//! no statistics or scheduling logic of their own. One module per command;
//! [`error`] words every failure and picks its exit code.

mod board;
mod check;
mod detect;
mod error;
mod forecast;
mod plan;
mod replan;
mod size;

pub(crate) use error::Error;

use clap::{CommandFactory, Parser, Subcommand, ValueEnum};
use std::io::Write;
use std::process::ExitCode;

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
    /// What one test can detect with a given sample, or its power for an effect
    Detect(detect::DetectArgs),
    /// Validate a portfolio file and show which tests could fit the window
    Check(check::CheckArgs),
    /// Plan the portfolio: a start, share and end for every test that fits
    Plan(plan::PlanArgs),
    /// Plan again mid-quarter around the running tests, and show what moved
    Replan(replan::ReplanArgs),
    /// Open the planning board: a local page where a meeting changes the queue and watches it re-plan
    Board(board::BoardArgs),
    /// Show each pool's traffic model: fitted from its history, held-out error, a sparkline
    Forecast(forecast::ForecastArgs),
    /// Print a shell completion script, e.g. `sluice completions bash`
    #[command(after_help = "Examples:\n  \
        sluice completions bash > ~/.local/share/bash-completion/completions/sluice\n  \
        sluice completions zsh > ~/.zfunc/_sluice\n  \
        sluice completions fish > ~/.config/fish/completions/sluice.fish")]
    Completions {
        /// The shell to complete for
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff), e.g. `sluice man > sluice.1`
    Man,
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub enum TextOrJson {
    Text,
    Json,
}

/// A value as pretty JSON with a closing newline, for `--format json`.
pub fn json_bytes(value: &impl serde::Serialize) -> Result<Vec<u8>, Error> {
    let mut s = serde_json::to_string_pretty(value).map_err(|error| Error::Json { error })?;
    s.push('\n');
    Ok(s.into_bytes())
}

/// Entry point of the binary.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() {
                error::EXIT_INVALID
            } else {
                0
            };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli).and_then(|bytes| write_stdout(&bytes)) {
        Ok(()) => ExitCode::SUCCESS,
        // A closed stderr is not worth a panic.
        Err(e) => {
            let _ = writeln!(std::io::stderr(), "{e}");
            ExitCode::from(e.exit_code())
        }
    }
}

/// Writes the output; a closed pipe (e.g. `| head`) is not an error.
fn write_stdout(bytes: &[u8]) -> Result<(), Error> {
    let mut out = std::io::stdout().lock();
    match out.write_all(bytes).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(io_error) => Err(Error::Stdout { io_error }),
    }
}

/// Runs a parsed command and returns the bytes for stdout.
pub fn run(cli: Cli) -> Result<Vec<u8>, Error> {
    match cli.command {
        Command::Size(args) => size::run(&args),
        Command::Detect(args) => detect::run(&args),
        Command::Check(args) => check::run(&args),
        Command::Plan(args) => plan::run(&args),
        Command::Replan(args) => replan::run(&args),
        Command::Forecast(args) => forecast::run(&args),
        Command::Board(args) => board::run(&args),
        Command::Completions { shell } => Ok(completions(shell)),
        Command::Man => man(),
    }
}

/// The completion script for `shell`, from the same definitions as `--help`.
fn completions(shell: clap_complete::Shell) -> Vec<u8> {
    let mut bytes = Vec::new();
    clap_complete::generate(shell, &mut Cli::command(), "sluice", &mut bytes);
    bytes
}

/// The manual page in roff, from the same definitions as `--help`.
fn man() -> Result<Vec<u8>, Error> {
    let mut bytes = Vec::new();
    clap_mangen::Man::new(Cli::command())
        .render(&mut bytes)
        .map_err(|io_error| Error::Stdout { io_error })?;
    Ok(bytes)
}
