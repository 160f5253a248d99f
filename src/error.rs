//! Errors written for the person at the SQL prompt.
//!
//! The maths layers return these; the `sql` layer prefixes the function name
//! (`life_fit: ...`). Messages name the offending value so that a wrong row
//! can be found without a debugger.

use thiserror::Error;

/// Everything that can go wrong between a row arriving and an answer leaving.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum LifeError {
    /// An argument has the wrong type or lies outside its domain.
    #[error("{arg} {expected}, got {got}")]
    BadArgument {
        /// Which argument (`age`, `p`, `cost_planned`, ...).
        arg: &'static str,
        /// What the argument must be, e.g. `must be a finite number >= 0`.
        expected: &'static str,
        /// The value that arrived, rendered for the user.
        got: String,
    },
    /// The data cannot pin down the model (no failures, shape unidentified, ...).
    #[error("{0}")]
    NotEstimable(String),
    /// A model value that is not one this extension wrote or can read.
    #[error("model {0}")]
    BadModel(String),
    /// Fit options that are malformed or unknown.
    #[error("options {0}")]
    BadOptions(String),
    /// A timestamp that cannot be read or denotes no real instant.
    #[error("{0}")]
    BadTimestamp(String),
    /// A numerical solver did not reach the required precision.
    #[error("{0}")]
    NoConvergence(String),
}

impl LifeError {
    /// Shorthand for [`LifeError::BadArgument`].
    pub fn bad(arg: &'static str, expected: &'static str, got: impl ToString) -> Self {
        LifeError::BadArgument {
            arg,
            expected,
            got: got.to_string(),
        }
    }
}

/// Result type of the maths layers.
pub type LifeResult<T> = Result<T, LifeError>;

/// Renders a number the way a user typed it: integers without a fraction,
/// non-finite values by name.
pub fn show_number(x: f64) -> String {
    if x.is_nan() {
        "NaN".to_string()
    } else if x.is_infinite() {
        if x > 0.0 { "Inf" } else { "-Inf" }.to_string()
    } else if x != 0.0 && !(1e-6..1e16).contains(&x.abs()) {
        // Shortest round-trip digits with an exponent: 1e300 rather than
        // three hundred digits in a message.
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}
