//! `sluice board FILE`: the planning board, a local page on which a
//! planning meeting changes the queue and watches the calendar re-plan.
//! The server and its safety rules live in [`crate::board`]; this file
//! loads the inputs, prints the address, opens the browser and stops
//! cleanly on Ctrl-C.

use super::plan::{load_portfolio, SolverArgs};
use super::Error;
use crate::board::{server, Base};
use crate::replan::progress;
use chrono::NaiveDate;
use clap::Args;
use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::Ordering;

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice board portfolios/demo.yaml\n  \
    sluice board portfolios/demo.yaml --port 8700 --no-open\n  \
    sluice board portfolios/demo.yaml --progress progress.yaml --today 2027-02-03\n\n\
    The board listens on 127.0.0.1 only and prints its address with a random \
    token; only that address opens it. Every change plans again; \"Save \
    scenario\" downloads the meeting's edits, which `sluice plan FILE \
    --scenario scenario.yaml` plans the same way. The portfolio file is never \
    written. Stop it with Ctrl-C.")]
pub struct BoardArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Where each test stands, to plan again mid-quarter (with --today)
    #[arg(long, value_name = "FILE", requires = "today")]
    pub progress: Option<PathBuf>,
    /// The day of the re-plan (with --progress): no new test starts before it
    #[arg(long, value_name = "YYYY-MM-DD", requires = "progress")]
    pub today: Option<NaiveDate>,
    /// The port on 127.0.0.1 (0 picks a free one)
    #[arg(long, default_value_t = 0)]
    pub port: u16,
    /// Print the address without opening a browser
    #[arg(long)]
    pub no_open: bool,
    #[command(flatten)]
    pub solver: SolverArgs,
}

/// Opens `url` in the desktop's browser; `false` when nothing could.
fn open_browser(url: &str) -> bool {
    let mut command = if cfg!(target_os = "macos") {
        std::process::Command::new("open")
    } else if cfg!(windows) {
        let mut c = std::process::Command::new("cmd");
        c.args(["/C", "start", ""]);
        c
    } else {
        std::process::Command::new("xdg-open")
    };
    command
        .arg(url)
        .stdin(std::process::Stdio::null())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .is_ok()
}

/// `sluice board`.
pub fn run(a: &BoardArgs) -> Result<Vec<u8>, Error> {
    let request = a.solver.request()?;
    let portfolio = load_portfolio(&a.file)?;
    let w = portfolio.window;
    let replan = match (&a.progress, a.today) {
        (Some(path), Some(today)) => {
            if !w.contains(today) {
                return Err(Error::TodayOutsideWindow {
                    today,
                    start: w.start,
                    end: w.end,
                });
            }
            let progress = progress::load_progress(path, &portfolio, today)?;
            for w in &progress.warnings {
                eprint!("{w}");
            }
            Some((progress, today))
        }
        _ => None,
    };
    let file = a.file.display().to_string();
    let base = Base::new(portfolio, file, replan, request)?;
    let board = server::Board::bind(base, a.port).map_err(|error| Error::Board { error })?;
    let url = board.url();
    let stop = board.stop_flag();
    let on_signal = stop.clone();
    // Without a handler Ctrl-C still ends the process; with one, cleanly.
    let _ = ctrlc::set_handler(move || on_signal.store(true, Ordering::SeqCst));
    {
        let mut out = std::io::stdout().lock();
        let _ = writeln!(out, "sluice board: {url}");
        let _ = writeln!(out, "(only this address opens it; stop with Ctrl-C)");
        let _ = out.flush();
    }
    if !a.no_open && !open_browser(&url) {
        eprintln!("note: no browser could be opened; open the address above");
    }
    board.run();
    eprintln!("sluice board: stopped");
    Ok(Vec::new())
}
