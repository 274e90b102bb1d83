//! `sluice forecast FILE`: each pool's traffic model: the level, weekday
//! pattern, trend and spread fitted from its history (or the typed
//! forecast), the error on four held-out weeks, and a sparkline of the
//! last weeks of history and the first weeks of forecast. The facts come
//! from [`crate::forecast::report`], their words from
//! [`crate::render::reports::forecast`]; this file only reads the flags.

use super::{Error, TextOrJson};
use crate::forecast::report;
use clap::Args;
use std::path::PathBuf;

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice forecast portfolios/demo.yaml\n  \
    sluice forecast portfolios/demo.yaml --pool product --format json\n  \
    sluice forecast portfolios/demo.yaml --backtest\n\n\
    A pool with `history: FILE.csv` shows the model fitted from it; \
    docs/portfolio.md describes the file and the fit.")]
pub struct ForecastArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Show only this pool
    #[arg(long, value_name = "ID")]
    pub pool: Option<String>,
    /// Also show how the fit forecast the history itself, from weekly
    /// origins over its last year: the error 1, 4 and 13 weeks ahead and
    /// how often the P10-P90 range held the real total
    #[arg(long)]
    pub backtest: bool,
    /// Output format
    #[arg(long, value_enum, default_value_t = TextOrJson::Text)]
    pub format: TextOrJson,
}

/// `sluice forecast`.
pub fn run(a: &ForecastArgs) -> Result<Vec<u8>, Error> {
    let p = super::plan::load_portfolio(&a.file)?;
    let pool = match &a.pool {
        Some(id) => Some(p.pool_index(id).ok_or_else(|| Error::UnknownPool {
            id: id.clone(),
            defined: p.pools.iter().map(|p| p.id.clone()).collect(),
        })?),
        None => None,
    };
    let r = report::report(&p, pool, a.backtest);
    match a.format {
        TextOrJson::Json => super::json_bytes(&r),
        TextOrJson::Text => Ok(crate::render::reports::forecast::text(&r).into_bytes()),
    }
}
