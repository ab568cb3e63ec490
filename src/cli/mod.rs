//! Command-line definitions (clap) and dispatch. Thin: parse, call the library, print.

/// Append a formatted line to a String buffer (output is written in one go by [`emit`]).
macro_rules! outln {
    ($o:ident) => {
        $o.push('\n')
    };
    ($o:ident, $($arg:tt)*) => {{
        use std::fmt::Write as _;
        let _ = writeln!($o, $($arg)*);
    }};
}

mod audit;
mod build;
mod fit;
mod info;
mod plot;
mod populations;
mod sample;
mod slab;
mod state;
mod voigt;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// Exit code for bad input (clap uses the same for usage errors).
pub const EXIT_BAD_INPUT: u8 = 2;
/// Exit code for a computation that failed.
pub const EXIT_FAILED: u8 = 1;

#[derive(Parser)]
#[command(
    name = "linegrid",
    version,
    about = "Calibration grids of spectral-line strength: Saha-Boltzmann state, line formation in a slab, HDF5 tables",
    long_about = None,
    propagate_version = true
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Solve one thermodynamic point: electron density, ionisation and excitation of every species
    State(state::StateArgs),
    /// List the physical constants used (CGS, with their CODATA edition)
    Constants(info::ConstantsArgs),
    /// List the curated atomic data: elements, abundances, species, ionisation energies, provenance
    Atoms(info::AtomsArgs),
    /// List the line catalogue (hydrogen and He II series, curated lines, user lines)
    Lines(info::LinesArgs),
    /// One slab: state, continuum opacity, and the strength of each selected line
    Slab(slab::SlabArgs),
    /// Curve of growth of one line: equivalent width against column, with the asymptotes
    Growth(slab::GrowthArgs),
    /// Build a grid file from a TOML spec (parallel, resumable, shardable)
    Build(build::BuildArgs),
    /// Describe a grid file: axes, lines, physics, provenance, completeness, status counts
    Describe(build::DescribeArgs),
    /// Merge shard files of one spec into a complete grid file
    Merge(build::MergeArgs),
    /// Write a Slurm job-array script (one shard per task) and a dependent merge job
    Shards(build::ShardsArgs),
    /// Evaluate the Voigt function H(a, v) for `a v` pairs from standard input or a file (CSV out)
    Voigt(voigt::VoigtArgs),
    /// Interpolate a grid at points: value and gradient (multilinear or cubic), CSV or JSON
    Sample(sample::SampleArgs),
    /// Audit interpolation against the direct solver at cell centres; where to refine
    Audit(audit::AuditArgs),
    /// Fit observed line strengths with the grid: every local minimum, chi2, uncertainties
    Fit(fit::FitArgs),
    /// Draw a figure (PNG or SVG): line strength from a grid, curve of growth, line profile, audit map, departure coefficients
    Plot(plot::PlotArgs),
}

/// A failure with the exit code it maps to.
pub struct Failure {
    /// Exit code (1 failed, 2 bad input).
    pub code: u8,
    /// The error.
    pub error: anyhow::Error,
}

impl Failure {
    fn bad_input(e: impl Into<anyhow::Error>) -> Failure {
        Failure {
            code: EXIT_BAD_INPUT,
            error: e.into(),
        }
    }
    fn failed(e: impl Into<anyhow::Error>) -> Failure {
        Failure {
            code: EXIT_FAILED,
            error: e.into(),
        }
    }
    fn from_lib(e: linegrid::Error) -> Failure {
        if e.is_bad_input() {
            Failure::bad_input(e)
        } else {
            Failure::failed(e)
        }
    }
}

/// Run the command line; returns the process exit code.
pub fn run() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_BAD_INPUT } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    let result = match cli.command {
        Command::State(a) => state::run(a),
        Command::Constants(a) => info::constants(a),
        Command::Atoms(a) => info::atoms(a),
        Command::Lines(a) => info::lines(a),
        Command::Slab(a) => slab::slab(a),
        Command::Growth(a) => slab::growth(a),
        Command::Build(a) => build::build(a),
        Command::Describe(a) => build::describe(a),
        Command::Merge(a) => build::merge(a),
        Command::Shards(a) => build::shards(a),
        Command::Voigt(a) => voigt::run(a),
        Command::Sample(a) => sample::run(a),
        Command::Audit(a) => audit::run(a),
        Command::Fit(a) => fit::run(a),
        Command::Plot(a) => plot::run(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            let mut msg = format!("linegrid: error: {}", f.error);
            for cause in f.error.chain().skip(1) {
                msg.push_str(&format!(": {cause}"));
            }
            eprintln!("{msg}");
            ExitCode::from(f.code)
        }
    }
}

/// Write text to stdout; a closed pipe (`| head`) is not an error.
fn emit(text: &str) -> Result<(), Failure> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(Failure::failed(e)),
        _ => Ok(()),
    }
}

/// Print a value as pretty JSON on stdout.
fn print_json(v: &serde_json::Value) -> Result<(), Failure> {
    let mut s = serde_json::to_string_pretty(v).map_err(Failure::failed)?;
    s.push('\n');
    emit(&s)
}
