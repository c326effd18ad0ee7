//! `plumbline install`: the kernelspec that notebook front ends find, and the
//! warm-up of the evaluation engine's build cache.

use super::CommandError;
use crate::cli::InstallArgs;
use crate::eval::{EngineConfig, Session};
use std::path::PathBuf;

/// Directory name of our kernelspec.
pub const KERNEL_NAME: &str = "plumbline";

const LOGO_32: &[u8] = include_bytes!("../../assets/logo-32x32.png");
const LOGO_64: &[u8] = include_bytes!("../../assets/logo-64x64.png");
const LOGO_SVG: &[u8] = include_bytes!("../../assets/logo-svg.svg");

fn kernels_dir(args: &InstallArgs) -> Result<PathBuf, CommandError> {
    if let Some(prefix) = &args.prefix {
        return Ok(prefix.join("share").join("jupyter").join("kernels"));
    }
    if let Some(data) = std::env::var_os("JUPYTER_DATA_DIR") {
        return Ok(PathBuf::from(data).join("kernels"));
    }
    let home = std::env::var_os("HOME").ok_or_else(|| {
        CommandError::Usage("HOME is not set; pass --prefix DIR to choose where the kernelspec goes".into())
    })?;
    let base = if cfg!(target_os = "macos") {
        PathBuf::from(home).join("Library").join("Jupyter")
    } else {
        PathBuf::from(home).join(".local").join("share").join("jupyter")
    };
    Ok(base.join("kernels"))
}

/// Runs `plumbline install`.
pub fn run(args: &InstallArgs, config: EngineConfig) -> Result<String, CommandError> {
    let dir = kernels_dir(args)?.join(KERNEL_NAME);
    let io = |what: &str, e: std::io::Error| CommandError::Runtime(format!("{what} `{}`: {e}", dir.display()));
    if args.uninstall {
        if dir.exists() {
            std::fs::remove_dir_all(&dir).map_err(|e| io("cannot remove", e))?;
            return Ok(format!("removed the Plumbline kernelspec from {}\n", dir.display()));
        }
        return Ok(format!("no Plumbline kernelspec at {} — nothing to remove\n", dir.display()));
    }
    let exe = std::env::current_exe().map_err(|e| CommandError::Runtime(format!("cannot locate this program: {e}")))?;
    let spec = serde_json::json!({
        "argv": [exe.display().to_string(), "kernel", "--connection-file", "{connection_file}"],
        "display_name": "Plumbline (Rust)",
        "language": "rust",
        "interrupt_mode": "message",
        "metadata": { "plumbline_version": env!("CARGO_PKG_VERSION") },
    });
    std::fs::create_dir_all(&dir).map_err(|e| io("cannot create", e))?;
    let text = serde_json::to_string_pretty(&spec).map_err(|e| CommandError::Runtime(e.to_string()))?;
    std::fs::write(dir.join("kernel.json"), text + "\n").map_err(|e| io("cannot write kernel.json in", e))?;
    for (name, bytes) in [("logo-32x32.png", LOGO_32), ("logo-64x64.png", LOGO_64), ("logo-svg.svg", LOGO_SVG)] {
        std::fs::write(dir.join(name), bytes).map_err(|e| io("cannot write a logo in", e))?;
    }
    let mut out = format!("installed the Plumbline kernelspec in {}\n", dir.display());
    if !args.no_warm {
        eprintln!(
            "warming the evaluation engine in {} (the first time compiles plumbline and its dependencies; minutes)…",
            config.build_dir.display()
        );
        let (stray, _ignored) = tokio::sync::mpsc::unbounded_channel();
        let session = Session::start(config.clone(), stray, crate::eval::preparation::lines_on_stderr(true));
        let (_, outcome) = session.execute_to_end("plumbline_session_ready");
        if let Some(error) = outcome.error {
            return Err(CommandError::Runtime(format!("the engine warm-up failed: {}", error.traceback.join("\n"))));
        }
        out.push_str(&format!("engine cache ready in {} (delete it to rebuild)\n", config.build_dir.display()));
        if crate::standby::enabled() {
            crate::standby::start_one(&config.build_dir);
            out.push_str(&format!(
                "a standby kernel is preparing in the background for the first notebook \
                 (it ends after {} idle minutes; PLUMBLINE_STANDBY=off starts none)\n",
                crate::standby::idle_limit().as_secs_f64() / 60.0
            ));
        }
    }
    Ok(out)
}
