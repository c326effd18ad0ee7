//! The `plumbline` binary.

use clap::Parser;
use plumbline_kernel::cli::{Cli, Command};
use plumbline_kernel::commands;
use plumbline_kernel::eval::EngineConfig;
use std::process::ExitCode;

fn main() -> ExitCode {
    // The evaluation engine runs cells in a child copy of this same program;
    // in such a child, first put our relay on its output (it marks cells that
    // stopped at a `?`), then let the engine take over — it never returns there.
    plumbline_kernel::eval::relay_cell_process_output();
    evcxr::runtime_hook();
    let cli = Cli::parse();
    // The engine's settings are read here, once, and passed down.
    let config = EngineConfig::from_environment();
    // A kernel first offers its notebook to a standby kernel prepared ahead;
    // if one takes it, this process only accompanies it.
    if let Command::Kernel(args) = &cli.command {
        if let Some(outcome) = commands::kernel::hand_over_to_standby(args, &config.build_dir) {
            return finish(outcome);
        }
    }
    let launch_environment = plumbline_kernel::standby::environment_now();
    // Commands that start the engine claim a work folder of their own and put
    // the engine's settings into the environment now, while this process is
    // still single-threaded.
    let config = if matches!(cli.command, Command::Kernel(_) | Command::Install(_) | Command::Run(_)) {
        let config = match plumbline_kernel::eval::work_slots::claim_for_process(&config.build_dir) {
            Ok(slot) => config.in_slot(slot),
            Err(e) => {
                eprintln!("error: {e}");
                return ExitCode::FAILURE;
            }
        };
        plumbline_kernel::eval::export_engine_environment(&config);
        config
    } else {
        config
    };
    let outcome = match cli.command {
        Command::Kernel(args) => commands::kernel::run(&args, config, launch_environment),
        Command::Install(args) => commands::install::run(&args, config),
        Command::Fit(args) => commands::fit::run(&args),
        Command::Compare(args) => commands::compare::run(&args),
        Command::Ratio(args) => commands::ratio::run(&args),
        Command::Value(args) => commands::value::run(&args),
        Command::Appeal(args) => commands::appeal::run(&args),
        Command::Run(args) => commands::run::run(&args, config),
        Command::Diff(args) => commands::diff::run(&args),
        Command::Accuracy(args) => commands::accuracy::run(&args),
    };
    finish(outcome)
}

/// Prints a command's output (or its error) and gives the exit code.
fn finish(outcome: Result<String, commands::CommandError>) -> ExitCode {
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
