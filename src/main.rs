//! The `pinflow` binary: parse the command line and hand over to the library.

use clap::Parser;

fn main() {
    let cli = pinflow::cli::Cli::parse();
    if let Err(e) = pinflow::cli::run(cli) {
        let (message, code) = pinflow::cli::report_error(&e);
        eprintln!("{message}");
        std::process::exit(code);
    }
}
