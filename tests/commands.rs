//! `sluice completions SHELL` and `sluice man`: both come from the same
//! clap definitions as `--help`, so every command appears in each.

use crate::util::{cmd, sluice};

const COMMANDS: [&str; 5] = ["size", "check", "plan", "replan", "completions"];

#[test]
fn completions_name_every_command_in_every_shell() {
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let script = cmd(&["completions", shell]).stdout();
        for command in COMMANDS {
            assert!(script.contains(command), "{shell}: `{command}` missing");
        }
    }
}

#[test]
fn an_unknown_shell_exits_2() {
    let out = cmd(&["completions", "cmd.exe"]).assert_exit_code(2);
    assert!(out.stdout.is_empty());
}

#[test]
fn the_man_page_is_roff_and_lists_every_command() {
    let page = cmd(&["man"]).stdout();
    assert!(page.starts_with(".ie \\n(.g .ds Aq"), "{page}");
    assert!(page.contains(".TH sluice 1"), "{page}");
    for command in COMMANDS {
        assert!(
            page.contains(&format!("sluice\\-{command}(1)")),
            "`{command}` missing:\n{page}"
        );
    }
    assert_eq!(page.into_bytes(), sluice(&["man"]).stdout, "deterministic");
    // `--help` lists it, so it can be found.
    let help = cmd(&["--help"]).stdout();
    assert!(help.contains("  man  "), "{help}");
}
