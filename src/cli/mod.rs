//! Command handlers of the `tinct` binary, one file per subcommand: each takes its parsed
//! arguments, calls the library and prints. Errors carry their exit code.

pub mod bench;
pub mod bench_peer;
pub mod check;
pub mod compare;
pub mod converge;
pub mod example;
pub mod gci;
pub mod influence;
pub mod particles;
pub mod run;
pub mod sweep;
pub mod verify;

use tinct::ops::limiter::Limiter;

/// An error with its exit code (1 the run failed, 2 bad input).
pub struct Failure {
    /// Exit code.
    pub code: u8,
    /// The message printed after `tinct: `.
    pub message: String,
}

/// A bad-input failure (exit code 2).
pub fn bad_input(message: impl Into<String>) -> Failure {
    Failure {
        code: 2,
        message: message.into(),
    }
}

/// A failed-run failure (exit code 1).
pub fn failed(message: impl Into<String>) -> Failure {
    Failure {
        code: 1,
        message: message.into(),
    }
}

/// Parses a list of convection scheme names; `all` means every one.
pub fn parse_schemes(names: &[String]) -> Result<Vec<Limiter>, Failure> {
    if names.iter().any(|n| n == "all") {
        return Ok(Limiter::EVERY.to_vec());
    }
    names
        .iter()
        .map(|n| n.parse::<Limiter>().map_err(|e| bad_input(format!("--schemes: {e}"))))
        .collect()
}

/// Simulated time in words.
pub fn fmt_t(t: f64) -> String {
    tinct::output::format_time(t)
}
