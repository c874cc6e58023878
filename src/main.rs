//! The `causeway` command: parse, dispatch, print the error.

use clap::Parser;

fn main() {
    let cli = causeway::cli::Cli::parse();
    if let Err(err) = causeway::cli::run(cli) {
        eprintln!("causeway: error: {err}");
        std::process::exit(err.exit_code());
    }
}
