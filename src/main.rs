use clap::Parser;
use sextant::cli::{Cli, execute};
use sextant::error::terminal_safe;

fn main() {
    sextant::cleanup::install();
    let cli = Cli::parse();
    let result = execute(cli);
    // The progress line (if one was drawn) goes before anything is printed.
    sextant::progress::current().finish();
    match result {
        Ok(outcome) => {
            // Column names, cells and recipe text reach the terminal only
            // through `terminal_safe`, here, so no message can forget it.
            print!("{}", terminal_safe(&outcome.text));
            std::process::exit(outcome.code);
        }
        Err(e) => {
            eprintln!("error: {}", terminal_safe(&e.to_string()));
            std::process::exit(e.exit_code());
        }
    }
}
