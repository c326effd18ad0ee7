//! One module per subcommand; each returns the text to print or a
//! [`CommandError`] to report on stderr.

pub mod accuracy;
pub mod appeal;
pub mod compare;
pub mod diff;
pub mod fit;
pub mod install;
pub mod kernel;
pub mod ratio;
pub mod run;
pub mod value;

/// Why a subcommand failed.
#[derive(Debug, thiserror::Error)]
pub enum CommandError {
    /// The analysis reported a problem with the data or model.
    #[error(transparent)]
    Analysis(#[from] plumbline::Error),
    /// A flag's value could not be understood.
    #[error("{0}")]
    Usage(String),
    /// The command was understood but failed while running: a file it writes,
    /// the async runtime, the evaluation engine.
    #[error("{0}")]
    Runtime(String),
    /// A notebook run stopped or could not start.
    #[error("{0}")]
    Run(String),
    /// A run's results could not be read for `plumbline diff`.
    #[error(transparent)]
    Results(#[from] crate::notebook::results::ResultsError),
}
