//! `plumbline kernel --connection-file F`: what the kernelspec starts.

use super::CommandError;
use crate::cli::KernelArgs;
use crate::wire::ConnectionFile;

/// Serves the notebook protocol until shutdown.
pub fn run(args: &KernelArgs) -> Result<String, CommandError> {
    let connection = ConnectionFile::read(&args.connection_file).map_err(|e| CommandError::Usage(e.to_string()))?;
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CommandError::Runtime(format!("cannot start the async runtime: {e}")))?;
    let served = runtime.block_on(crate::server::serve(connection));
    // Tasks still blocked on sockets or on the engine thread end with the process.
    runtime.shutdown_background();
    served.map_err(|e| CommandError::Runtime(e.to_string()))?;
    Ok(String::new())
}
