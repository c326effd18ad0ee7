//! A Ballista scheduler and executors with the round functions registered,
//! and a client session on a scheduler.
//!
//! Ballista names aggregate functions in the plans it ships, so the scheduler
//! (which plans) and every executor (which decodes and runs the plans) must
//! know ours by name; the client registers them too, to build the plan. The
//! round plan travels as an ordinary constant, so no plan codec is needed.
//! Executors read the data's files themselves: every executor must see them
//! at the same path (a shared or copied folder).

use crate::aggregates::round_functions;
use crate::error::{EngineError, Result};
use ballista::prelude::{SessionConfigExt, SessionContextExt};
use ballista_core::registry::BallistaFunctionRegistry;
use ballista_executor::executor_process::{start_executor_process, ExecutorProcessConfig};
use ballista_scheduler::cluster::BallistaCluster;
use ballista_scheduler::config::SchedulerConfig;
use ballista_scheduler::scheduler_process::start_server;
use datafusion::execution::session_state::{SessionState, SessionStateBuilder};
use datafusion::execution::FunctionRegistry;
use datafusion::prelude::{SessionConfig, SessionContext};
use std::sync::Arc;

/// A session state with DataFusion's functions and ours.
fn state_with_functions(config: SessionConfig) -> datafusion::error::Result<SessionState> {
    // Registered on the built state: `with_aggregate_functions` on the
    // builder would replace the built-in list rather than add to it.
    let mut state = SessionStateBuilder::new().with_config(config).with_default_features().build();
    for function in round_functions() {
        state.register_udaf(Arc::new(function))?;
    }
    Ok(state)
}

/// Where a scheduler listens and how quickly it gives up on a silent executor.
#[derive(Debug, Clone)]
pub struct SchedulerSettings {
    /// The address to bind (loopback by default).
    pub bind_host: String,
    /// The port for clients and executors.
    pub port: u16,
    /// Seconds without a heartbeat after which an executor is taken as lost
    /// and its tasks are run again elsewhere.
    pub executor_timeout_seconds: u64,
}

/// Runs a scheduler until the process ends.
pub async fn run_scheduler(settings: SchedulerSettings) -> Result<()> {
    let config = SchedulerConfig {
        bind_host: settings.bind_host.clone(),
        external_host: settings.bind_host.clone(),
        bind_port: settings.port,
        executor_timeout_seconds: settings.executor_timeout_seconds,
        expire_dead_executor_interval_seconds: 1,
        override_session_builder: Some(Arc::new(state_with_functions)),
        ..Default::default()
    };
    let address = format!("{}:{}", settings.bind_host, settings.port).parse().map_err(|e| {
        EngineError::Cluster(format!("`{}:{}` is not an address: {e}", settings.bind_host, settings.port))
    })?;
    let cluster = BallistaCluster::new_from_config(&config).await.map_err(|e| EngineError::Cluster(e.to_string()))?;
    start_server(cluster, address, Arc::new(config)).await.map_err(|e| EngineError::Cluster(e.to_string()))
}

/// Where an executor listens and which scheduler it serves.
#[derive(Debug, Clone)]
pub struct ExecutorSettings {
    /// The address to bind (loopback by default).
    pub bind_host: String,
    /// The port other executors and clients fetch results from (Arrow Flight).
    pub port: u16,
    /// The port the scheduler reaches the executor on (gRPC).
    pub grpc_port: u16,
    /// The scheduler's host.
    pub scheduler_host: String,
    /// The scheduler's port.
    pub scheduler_port: u16,
    /// Tasks run at once (default: the cores).
    pub slots: usize,
    /// Where shuffle files go (default: a temporary folder).
    pub work_dir: Option<String>,
}

/// Runs an executor until the process ends.
pub async fn run_executor(settings: ExecutorSettings) -> Result<()> {
    let mut registry = BallistaFunctionRegistry::default();
    for function in round_functions() {
        registry.aggregate_functions.insert(function.name().to_string(), Arc::new(function));
    }
    let config = ExecutorProcessConfig {
        bind_host: settings.bind_host.clone(),
        external_host: Some(settings.bind_host.clone()),
        port: settings.port,
        grpc_port: settings.grpc_port,
        scheduler_host: settings.scheduler_host,
        scheduler_port: settings.scheduler_port,
        scheduler_connect_timeout_seconds: 20,
        vcores: settings.slots.max(1),
        work_dir: settings.work_dir,
        executor_heartbeat_interval_seconds: 1,
        override_function_registry: Some(Arc::new(registry)),
        ..Default::default()
    };
    start_executor_process(Arc::new(config)).await.map_err(|e| EngineError::Cluster(e.to_string()))
}

/// A client session on the scheduler at `address` (`HOST:PORT`), with the
/// round functions registered; `partitions` and `batch_rows` as for a local
/// session ([`crate::driver::session_config`]).
pub async fn remote_context(address: &str, partitions: Option<usize>, batch_rows: usize) -> Result<SessionContext> {
    let config = crate::driver::session_config(SessionConfig::new_with_ballista(), partitions, batch_rows);
    let state = state_with_functions(config)?;
    let url = format!("df://{address}");
    SessionContext::remote_with_state(&url, state).await.map_err(|e| EngineError::Cluster(format!("{address}: {e}")))
}
