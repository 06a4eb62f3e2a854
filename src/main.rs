//! The `lightfold` command line: parse, call the library, print, map errors to exit codes
//! (0 ok, 1 bad input, 2 internal failure). No physics lives here.

mod cli;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// Monte Carlo ray tracing of light trapping in textured, coated silicon wafers.
///
/// Results are engineering estimates; product ratings need certified measurement.
#[derive(Parser)]
#[command(name = "lightfold", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Validate a scenario file: summary of the stack, or every problem (exit code 1).
    Check(cli::check::CheckArgs),
    /// Coating calculator: R, T and absorptance per layer of a thin-film stack.
    Film(cli::film::FilmArgs),
    /// List the material library or show one material's n, k and α.
    Materials(cli::materials::MaterialsArgs),
    /// Trace one textured, coated interface: R, T, film absorptance, light-path obliqueness.
    Surface(cli::surface::SurfaceArgs),
    /// Run a scenario (or the embedded demo) and write a results folder with report.html.
    Run(cli::run::RunArgs),
    /// Run several scenarios and compare them side by side (table, plots, HTML).
    Compare(cli::compare::CompareArgs),
    /// Export a scenario's redistribution matrices (NPY + JSON sidecar) for other solvers.
    Matrices(cli::matrices::MatricesArgs),
    /// Vary numeric scenario keys over a grid (resumable, shardable over machines).
    Sweep(cli::sweep::SweepArgs),
    /// Gather the points of sweep shards into one folder and table.
    Merge(cli::sweep::MergeArgs),
    /// Lambertian (4n²) limit, exact Lambertian, single and double pass references for a wafer.
    Limit(cli::limit::LimitArgs),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match cli.command {
        Command::Check(args) => cli::check::run(args),
        Command::Film(args) => cli::film::run(args),
        Command::Materials(args) => cli::materials::run(args),
        Command::Surface(args) => cli::surface::run(args),
        Command::Run(args) => cli::run::run(args),
        Command::Compare(args) => cli::compare::run(args),
        Command::Matrices(args) => cli::matrices::run(args),
        Command::Sweep(args) => cli::sweep::run(args),
        Command::Merge(args) => cli::sweep::merge(args),
        Command::Limit(args) => cli::limit::run(args),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(failure) => {
            eprintln!("error: {failure}");
            ExitCode::from(failure.exit_code())
        }
    }
}
