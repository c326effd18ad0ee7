//! The `plumbline` binary.

use clap::Parser;
use plumbline_kernel::cli::{Cli, Command};
use plumbline_kernel::commands;
use std::process::ExitCode;

fn main() -> ExitCode {
    // The evaluation engine runs cells in a child copy of this same program;
    // in such a child, first put our relay on its output (it marks cells that
    // stopped at a `?`), then let the engine take over — it never returns there.
    plumbline_kernel::eval::relay_cell_process_output();
    evcxr::runtime_hook();
    let cli = Cli::parse();
    // Commands that start the engine put its settings into the environment
    // now, while this process is still single-threaded.
    if matches!(cli.command, Command::Kernel(_) | Command::Install(_) | Command::Run(_)) {
        let config = plumbline_kernel::eval::EngineConfig::from_environment();
        plumbline_kernel::eval::export_engine_environment(&config);
    }
    let outcome = match cli.command {
        Command::Kernel(args) => commands::kernel::run(&args),
        Command::Install(args) => commands::install::run(&args),
        Command::Fit(args) => commands::fit::run(&args),
        Command::Compare(args) => commands::compare::run(&args),
        Command::Ratio(args) => commands::ratio::run(&args),
        Command::Value(args) => commands::value::run(&args),
        Command::Run(args) => commands::run::run(&args),
        Command::Diff(args) => commands::diff::run(&args),
        Command::Accuracy(args) => commands::accuracy::run(&args),
    };
    match outcome {
        Ok(text) => {
            // A reader that closed the pipe early (`plumbline fit … | head`)
            // has all it wanted: stop quietly, as command-line tools do.
            use std::io::Write;
            let mut out = std::io::stdout().lock();
            match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
                Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
                    eprintln!("error: cannot write the output: {e}");
                    ExitCode::FAILURE
                }
                _ => ExitCode::SUCCESS,
            }
        }
        Err(message) => {
            eprintln!("error: {message}");
            ExitCode::FAILURE
        }
    }
}
