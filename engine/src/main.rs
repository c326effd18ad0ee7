//! The `plumbline-engine` binary: fits inside DataFusion on this machine's
//! cores or on a Ballista cluster, and the cluster's own processes.

use clap::{Args, Parser, Subcommand};
use plumbline_engine::cluster::{self, ExecutorSettings, SchedulerSettings};
use plumbline_engine::{driver, DataSource, EngineError};
use plumbline_kernel::cli::FitArgs;
use plumbline_kernel::commands::fit::{
    check_fit_from_pieces, fit_options, model_spec, non_finite_rule, report_assembled, report_by_group,
};
use plumbline_kernel::commands::CommandError;
use std::process::ExitCode;

/// The allocator. The query engine reads every column chunk into a fresh
/// buffer; with the system allocator each large one is new memory from the
/// kernel, page-faulted in and zeroed, and freed memory is not reused as
/// well: at 2·10⁷ × 20 rows the system allocator took 5.5–5.75 s and
/// 905–953 MiB, mimalloc 5.05–5.24 s and 466–493 MiB (2 cores, same run).
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

/// Plumbline's fits on Apache DataFusion (every core) and Ballista (many
/// machines). Analytical aids, not appraisals.
#[derive(Debug, Parser)]
#[command(name = "plumbline-engine", version)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Fit a model to Parquet or CSV files (a file, a folder or a glob), reading
    /// only the model's columns; the same report and document as `plumbline fit`.
    /// Here `--batch-rows N` sets the rows per batch of the query engine
    /// (default 65,536).
    Fit(Box<EngineFitArgs>),
    /// Run a Ballista scheduler that knows Plumbline's round functions.
    Scheduler(SchedulerArgs),
    /// Run a Ballista executor that knows Plumbline's round functions.
    Executor(ExecutorArgs),
}

#[derive(Debug, Args)]
struct EngineFitArgs {
    /// The model and report flags of `plumbline fit`.
    #[command(flatten)]
    fit: FitArgs,
    /// Run on the Ballista scheduler at HOST:PORT instead of this machine.
    #[arg(long, value_name = "HOST:PORT")]
    scheduler: Option<String>,
    /// Partitions to split the files into (default: one per core).
    #[arg(long, value_name = "N")]
    partitions: Option<usize>,
}

#[derive(Debug, Args)]
struct SchedulerArgs {
    /// The address to listen on.
    #[arg(long, default_value = "127.0.0.1")]
    bind: String,
    /// The port for clients and executors.
    #[arg(long, default_value_t = 50050)]
    port: u16,
    /// Seconds without a heartbeat before an executor is taken as lost and
    /// its tasks are run again on the others.
    #[arg(long, default_value_t = 10)]
    executor_timeout: u64,
}

#[derive(Debug, Args)]
struct ExecutorArgs {
    /// The address to listen on (and be reached at).
    #[arg(long, default_value = "127.0.0.1")]
    bind: String,
    /// The port results are fetched from (Arrow Flight).
    #[arg(long, default_value_t = 50051)]
    port: u16,
    /// The port the scheduler reaches this executor on.
    #[arg(long, default_value_t = 50052)]
    grpc_port: u16,
    /// The scheduler, HOST:PORT.
    #[arg(long, default_value = "127.0.0.1:50050")]
    scheduler: String,
    /// Tasks to run at once (default: the cores).
    #[arg(long)]
    slots: Option<usize>,
    /// Where shuffle files go (default: a temporary folder).
    #[arg(long)]
    work_dir: Option<String>,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let runtime = match tokio::runtime::Builder::new_multi_thread().enable_all().build() {
        Ok(runtime) => runtime,
        Err(e) => return failed(&format!("cannot start the async runtime: {e}")),
    };
    let outcome = runtime.block_on(async {
        match cli.command {
            Command::Fit(args) => run_fit(&args).await,
            Command::Scheduler(args) => cluster::run_scheduler(SchedulerSettings {
                bind_host: args.bind,
                port: args.port,
                executor_timeout_seconds: args.executor_timeout,
            })
            .await
            .map(|()| String::new())
            .map_err(|e| e.to_string()),
            Command::Executor(args) => {
                let (host, port) = match split_address(&args.scheduler) {
                    Ok(pair) => pair,
                    Err(e) => return Err(e),
                };
                cluster::run_executor(ExecutorSettings {
                    bind_host: args.bind,
                    port: args.port,
                    grpc_port: args.grpc_port,
                    scheduler_host: host,
                    scheduler_port: port,
                    slots: args.slots.unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get())),
                    work_dir: args.work_dir,
                })
                .await
                .map(|()| String::new())
                .map_err(|e| e.to_string())
            }
        }
    });
    match outcome {
        Ok(text) => {
            print!("{text}");
            ExitCode::SUCCESS
        }
        Err(message) => failed(&message),
    }
}

fn failed(message: &str) -> ExitCode {
    eprintln!("error: {message}");
    ExitCode::FAILURE
}

/// `HOST:PORT` into its parts.
fn split_address(address: &str) -> Result<(String, u16), String> {
    address
        .rsplit_once(':')
        .and_then(|(host, port)| Some((host.to_string(), port.parse().ok()?)))
        .ok_or_else(|| format!("`{address}` is not HOST:PORT"))
}

/// `plumbline-engine fit`: the report, or the first refusal.
async fn run_fit(args: &EngineFitArgs) -> Result<String, String> {
    let text = |e: CommandError| e.to_string();
    let engine = |e: EngineError| e.to_string();
    let fit = &args.fit;
    check_fit_from_pieces(fit).map_err(text)?;
    if fit.local.is_some() || fit.variation_test.is_some() {
        return Err("a local fit needs every row at once; use `plumbline fit --local` on a file".into());
    }
    let spec = model_spec(fit).map_err(text)?;
    let options = fit_options(fit);
    let non_finite = non_finite_rule(&fit.input).map_err(text)?;
    let source = DataSource::open(&fit.data).map_err(engine)?;
    // `--batch-rows`: rows per batch of the query engine (each batch one
    // piece of every round's state).
    let batch_rows = fit.batch_rows.unwrap_or(driver::BATCH_ROWS);
    let context = match &args.scheduler {
        Some(address) => cluster::remote_context(address, args.partitions, batch_rows).await.map_err(engine)?,
        None => driver::local_context_with_batches(args.partitions, batch_rows),
    };
    match &fit.by {
        Some(column) => {
            let fitted =
                driver::fit_by(&context, &source, &spec, &options, non_finite, column).await.map_err(engine)?;
            report_by_group(fit, &fitted).map_err(text)
        }
        None => {
            let fitted = driver::fit(&context, &source, &spec, &options, non_finite).await.map_err(engine)?;
            report_assembled(fit, &fitted).map_err(text)
        }
    }
}
