//! Renders a saved plan (JSON, as `sluice plan --format json` writes it) in
//! any output format, without running the scheduler. Used by
//! tests/render_html.sh and handy for looking at a renderer by hand:
//!
//!     cargo run --example render_plan -- tests/fixtures/plan-small.json html report.html
//!     cargo run --example render_plan -- tests/fixtures/plan-small.json text - 72
//!
//! Arguments: PLAN.json FORMAT [OUT|-] [WIDTH]. Text written to a terminal
//! follows the terminal's width and colour unless WIDTH is given.

use sluice::render::{render, Format, RenderOptions};
use std::process::ExitCode;

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(message) => {
            eprintln!("error: {message}");
            ExitCode::from(2)
        }
    }
}

fn run() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [plan_path, format, rest @ ..] = args.as_slice() else {
        return Err("usage: render_plan PLAN.json FORMAT [OUT|-] [WIDTH]".to_string());
    };
    let text = std::fs::read_to_string(plan_path)
        .map_err(|e| format!("cannot read `{plan_path}`: {e}"))?;
    let plan = serde_json::from_str(&text).map_err(|e| format!("`{plan_path}`: {e}"))?;
    let format: Format = format.parse().map_err(|e| format!("{e}"))?;
    let out = rest.first().map(String::as_str).unwrap_or("-");
    let mut opts = if out == "-" {
        RenderOptions::for_stdout()
    } else {
        RenderOptions::for_file()
    };
    if let Some(w) = rest.get(1) {
        let w: u16 = w
            .parse()
            .map_err(|_| format!("width `{w}` is not a number"))?;
        opts.width = Some(w);
    }
    let bytes = render(&plan, format, &opts).map_err(|e| e.to_string())?;
    if out == "-" {
        use std::io::Write;
        std::io::stdout()
            .write_all(&bytes)
            .map_err(|e| format!("cannot write to standard output: {e}"))
    } else {
        std::fs::write(out, &bytes).map_err(|e| format!("cannot write `{out}`: {e}"))
    }
}
