//! The `causeway` command: parse, dispatch, print the error.

use clap::error::ErrorKind;
use clap::Parser;

fn main() {
    let cli = match causeway::cli::Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => match e.kind() {
            ErrorKind::DisplayHelp
            | ErrorKind::DisplayVersion
            | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => e.exit(),
            // clap's own errors come with usage and tips after a blank line; the message before
            // it names the culprit, on one line here.
            _ => {
                let text = e.to_string();
                let message: Vec<&str> = text
                    .lines()
                    .take_while(|l| !l.trim().is_empty())
                    .map(str::trim)
                    .collect();
                eprintln!("causeway: {}", causeway::error::tidy(&message.join(" ")));
                std::process::exit(2);
            }
        },
    };
    if let Err(err) = causeway::cli::run(cli) {
        eprintln!(
            "causeway: error: {}",
            causeway::cli::with_option_names(&causeway::error::one_line(&err.to_string()))
        );
        std::process::exit(err.exit_code());
    }
}
