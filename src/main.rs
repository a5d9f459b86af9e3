//! The `pinflow` binary: hand the command line over to the library.

fn main() {
    std::process::exit(pinflow::cli::main_with(std::env::args_os()));
}
