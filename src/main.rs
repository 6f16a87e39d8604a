use clap::Parser;
use sextant::cli::{Cli, execute};

fn main() {
    let cli = Cli::parse();
    match execute(cli) {
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
