//! The `pinflow` binary: hand the command line over to the library.
//!
//! The allocator is mimalloc: a scan allocates per flow and per figure, and
//! glibc's allocator cost about 8 % of a scan's CPU (fresh pages for every
//! large buffer); the library itself does not choose an allocator.

#[global_allocator]
static GLOBAL: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() {
    std::process::exit(pinflow::cli::main_with(std::env::args_os()));
}
