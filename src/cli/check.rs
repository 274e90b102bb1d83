//! `sluice check FILE`: validate a portfolio and print the first answer to
//! "which tests fit": each test's size and solo fit, each pool's supply
//! against demand. The report comes from [`crate::check`] and its text
//! from [`crate::render::reports::check`]; this file only reads the flags.

use super::{Error, TextOrJson};
use crate::check;
use clap::Args;
use std::path::PathBuf;

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice check portfolios/quickstart.yaml\n  \
    sluice check portfolios/demo.yaml --format json\n\n\
    Exit status: 0 when the file is valid (whether or not every test fits), \
    2 when it is not (every problem is listed on stderr).")]
pub struct CheckArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Output format
    #[arg(long, value_enum, default_value_t = TextOrJson::Text)]
    pub format: TextOrJson,
}

/// `sluice check`.
pub fn run(a: &CheckArgs) -> Result<Vec<u8>, Error> {
    let p = super::plan::load_portfolio(&a.file)?;
    let report = check::check(&p);
    match a.format {
        TextOrJson::Json => {
            // The text says it in place; JSON has no place for prose.
            for e in &report.experiments {
                if let Some(l) = e.looks.as_ref().filter(|l| !l.idle.is_empty()) {
                    let line = crate::render::common::look_advice(&e.id, l);
                    eprintln!("warning: {line}");
                }
            }
            super::json_bytes(&report)
        }
        TextOrJson::Text => {
            let width = crate::render::RenderOptions::for_stdout().effective_width();
            Ok(crate::render::reports::check::text(&report, width).into_bytes())
        }
    }
}
