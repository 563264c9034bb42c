//! The `tinct` binary: parses arguments, calls the library through the handlers in `cli/`,
//! and maps errors to exit codes (0 success, 1 the run failed, 2 bad input).

mod cli;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

#[derive(Parser)]
#[command(name = "tinct", version, about = "2D transient scalar transport on structured grids")]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run a scenario and write frames, logs, fields and a summary to `<dir>/<name>/`.
    Run(cli::run::RunArgs),
    /// Follow the scenario's releases with random-walk particles (no numerical diffusion) and
    /// compare with the grid run at each receptor; files in `<dir>/<name>/particles/`.
    Particles(cli::particles::ParticlesArgs),
    /// Regime report without time marching: Peclet and Courant maps, stable steps, numerical
    /// diffusion, advice; writes `<dir>/<name>/check/`.
    Check(cli::check::CheckArgs),
    /// Print a ready-to-run example scenario.
    Example(cli::example::ExampleArgs),
    /// Throughput of the explicit step (million cell updates per second) on the shared
    /// benchmark problem, checked against its reference values first.
    Bench(cli::bench::BenchArgs),
    /// Run a scenario once per convection scheme and compare each with the exact solution or a
    /// refined reference; writes `<dir>/<name>/compare/`.
    Compare(cli::compare::CompareArgs),
    /// Run a scenario on refined grids and report observed orders, extrapolated values and the
    /// grid-convergence index (Celik et al. 2008); writes `<dir>/<name>/converge/`.
    Converge(cli::converge::ConvergeArgs),
    /// Grid-convergence index of three values from any code (Celik et al. 2008).
    Gci(cli::gci::GciArgs),
    /// Influence map of a receptor from one backward (adjoint) run: the dose at the receptor
    /// per unit mass released in each cell; ranks the `[[candidate]]` points; writes
    /// `<dir>/<name>/influence/<receptor>/`.
    Influence(cli::influence::InfluenceArgs),
    /// Run a sweep (an ensemble of one scenario with some keys varied): members on this machine
    /// then the gather, or scripts for a batch scheduler; writes `<dir>/<sweep name>/`.
    Sweep(cli::sweep::SweepArgs),
    /// Run the built-in verification cases, one row per case with its published source.
    Verify(cli::verify::VerifyArgs),
}

fn main() -> ExitCode {
    let result = match Cli::parse().command {
        Command::Run(a) => cli::run::main(a),
        Command::Particles(a) => cli::particles::main(a),
        Command::Check(a) => cli::check::main(a),
        Command::Example(a) => cli::example::main(a),
        Command::Bench(a) => cli::bench::main(a),
        Command::Compare(a) => cli::compare::main(a),
        Command::Converge(a) => cli::converge::main(a),
        Command::Gci(a) => cli::gci::main(a),
        Command::Influence(a) => cli::influence::main(a),
        Command::Sweep(a) => cli::sweep::main(a),
        Command::Verify(a) => cli::verify::main(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            eprintln!("tinct: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}
