use clap::Parser;
use sextant::cli::{Cli, execute};

fn main() {
    sextant::cleanup::install();
    let cli = Cli::parse();
    let result = execute(cli);
    // The progress line (if one was drawn) goes before anything is printed.
    sextant::progress::current().finish();
    match result {
        Ok(outcome) => {
            print!("{}", outcome.text);
            std::process::exit(outcome.code);
        }
        Err(e) => {
            eprintln!("error: {e}");
            std::process::exit(e.exit_code());
        }
    }
}
