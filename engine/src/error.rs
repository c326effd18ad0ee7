//! The engine's error type.

/// Everything that can go wrong in a fit run by a query engine.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum EngineError {
    /// The analysis refused the data or the model (the same refusals as a fit
    /// in memory or in batches).
    #[error(transparent)]
    Analysis(#[from] plumbline::Error),

    /// A partition refused its rows; the message is the analysis's refusal
    /// as the partition gave it.
    #[error("{0}")]
    Refused(String),

    /// The query engine failed (planning, reading files, a lost executor).
    #[error("the query engine failed: {0}. Nothing was reported; rerun the fit once the cause is fixed")]
    Engine(#[from] datafusion::error::DataFusionError),

    /// The data cannot be given to the engine as asked.
    #[error("{0}")]
    Data(String),

    /// A Ballista scheduler or executor could not start or be reached.
    #[error("the cluster: {0}")]
    Cluster(String),
}

/// Results of the engine.
pub type Result<T> = std::result::Result<T, EngineError>;
