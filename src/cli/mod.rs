//! Command-line interface: the only module that knows clap, standard
//! output, progress bars and exit codes. Each command has one file that
//! turns its arguments into the library's plain option structs, calls an
//! engine and prints or writes the report. `main.rs` only calls [`run`].
//!
//! Exit codes: 0 success, 1 a run failed (numerics, I/O), 2 bad input
//! (model file, flags, parameter point).

mod common;
mod dims;
mod edges;
mod flow;
mod hunt;
mod scan;

use clap::{Parser, Subcommand};

use crate::error::{Error, InputError};

pub use common::{parse_assignment, FlowFlags, FormatArg, PointArgs};
pub use dims::DimsArgs;
pub use edges::EdgesArgs;
pub use flow::FlowArgs;
pub use hunt::HuntArgs;
pub use scan::{MergeArgs, ScanArgs};

/// Fixed-point data, RG flows and phase diagrams of coupled-wire and
/// Luttinger-liquid models.
#[derive(Debug, Parser)]
#[command(name = "pinflow", version = crate::output::provenance::version_text(), about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Exact and fixed-point data of every term of a model at one parameter point.
    Dims(DimsArgs),
    /// Second-order RG flow of every term at one parameter point: which term
    /// reaches strong coupling first, and at what scale.
    Flow(FlowArgs),
    /// Flow every point of a line or plane of parameters and draw the phase
    /// diagram: which term wins where, and how fast.
    Scan(ScanArgs),
    /// Join the shard files of a scan (`scan --shard k/n`) into its full output.
    Merge(MergeArgs),
    /// List every local operator with scaling dimension up to a bound (an
    /// exhaustive lattice search), or certify that there is none.
    Hunt(HuntArgs),
    /// What a pinned set of terms leaves: gapped pairs, whether the bulk is
    /// fully gapped, and the K matrix, charges and filling at each end.
    Edges(EdgesArgs),
    /// Print a shell completion script, e.g.
    /// `pinflow completions bash > ~/.local/share/bash-completion/completions/pinflow`.
    Completions {
        /// The shell.
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff), e.g. `pinflow man | man -l -`.
    Man,
}

/// Run a parsed command.
pub fn run(cli: Cli) -> Result<(), Error> {
    let model = match &cli.command {
        Command::Dims(a) => Some(a.point.model.clone()),
        Command::Flow(a) => Some(a.point.model.clone()),
        Command::Scan(a) => Some(a.point.model.clone()),
        Command::Hunt(a) => Some(a.point.model.clone()),
        Command::Edges(a) => Some(a.point.model.clone()),
        Command::Merge(_) | Command::Completions { .. } | Command::Man => None,
    };
    let result = match cli.command {
        Command::Dims(args) => dims::run(args),
        Command::Flow(args) => flow::run(args),
        Command::Scan(args) => scan::run_scan(args),
        Command::Merge(args) => scan::run_merge(args),
        Command::Hunt(args) => hunt::run(args),
        Command::Edges(args) => edges::run(args),
        Command::Completions { shell } => completions(shell),
        Command::Man => manual(),
    };
    // A point where V is not positive definite names the model file, like
    // every other input error.
    result.map_err(|e| match (e, model) {
        (Error::Unphysical(u), Some(m)) => {
            InputError::new(m.display().to_string(), "", u.to_string()).into()
        }
        (e, _) => e,
    })
}

/// `pinflow completions SHELL`: the completion script from the clap
/// definitions, on standard output.
fn completions(shell: clap_complete::Shell) -> Result<(), Error> {
    let mut cmd = <Cli as clap::CommandFactory>::command();
    let mut bytes = Vec::new();
    clap_complete::generate(shell, &mut cmd, "pinflow", &mut bytes);
    common::emit(None, &String::from_utf8_lossy(&bytes))
}

/// `pinflow man`: the manual page (roff) from the clap definitions, with a
/// section per subcommand, on standard output.
fn manual() -> Result<(), Error> {
    let cmd = <Cli as clap::CommandFactory>::command();
    let mut bytes = Vec::new();
    let fail = |e: std::io::Error| Error::io("standard output", e);
    clap_mangen::Man::new(cmd.clone())
        .render(&mut bytes)
        .map_err(fail)?;
    for sub in cmd.get_subcommands().filter(|c| c.get_name() != "help") {
        let title = format!("pinflow-{}", sub.get_name());
        clap_mangen::Man::new(sub.clone())
            .title(title)
            .render(&mut bytes)
            .map_err(fail)?;
    }
    common::emit(None, &String::from_utf8_lossy(&bytes))
}

/// The whole command line: parse `args` (the first is the program name),
/// run, print any error, and return the exit code (0, 1 or 2; clap's own
/// code for `--help`, `--version` and bad flags). The `pinflow` binary and
/// the Python package's `pinflow` command both run this.
pub fn main_with<I, T>(args: I) -> i32
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    let args: Vec<std::ffi::OsString> = args.into_iter().map(Into::into).collect();
    common::remember_arguments(&args);
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version go to stdout, usage errors to stderr.
            let _ = e.print();
            return e.exit_code();
        }
    };
    match run(cli) {
        Ok(()) => 0,
        Err(e) => {
            let (message, code) = report_error(&e);
            eprintln!("{message}");
            code
        }
    }
}

/// Turn an error into a user-facing message and exit code.
pub fn report_error(e: &Error) -> (String, i32) {
    (format!("error: {e}"), e.exit_code())
}
