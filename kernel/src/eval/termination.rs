//! Why the cell process ended, in words an analyst can act on.
//!
//! When the process that runs cells dies, the engine starts a new one and
//! reports `SubprocessTerminated` with the process's exit status at the end of
//! its text (`… Subprocess terminated with status: signal: 6 (SIGABRT)`).
//! Variables lived in that process and are gone; functions, types, `use`
//! lines and dependencies live in the engine and are kept.

use super::cell::CellError;

/// How the cell process ended.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Termination {
    /// We stopped it: an interrupt request or SIGINT.
    Interrupted,
    /// It aborted: `std::process::abort`, a failed assertion in native code,
    /// or the engine's handler after an invalid memory access.
    Aborted {
        /// The engine's crash handler reported an invalid memory access first.
        memory_fault: bool,
    },
    /// SIGSEGV itself ended it: the engine's crash handler could not run,
    /// which is what a stack overflow (unbounded recursion) leads to.
    StackOverflowOrMemoryFault,
    /// Killed by someone else, most often the out-of-memory killer.
    Killed,
    /// The cell called `std::process::exit` (or the process returned).
    Exited {
        /// The exit code, when known.
        code: Option<i32>,
    },
    /// Another signal.
    Signal(String),
}

impl Termination {
    /// Classifies an ended process from the engine's message. `interrupted`:
    /// we killed it on request; `aborted`: our abort handler's marker came.
    pub fn classify(reason: &str, interrupted: bool, aborted: bool) -> Self {
        if interrupted {
            return Self::Interrupted;
        }
        let status = reason.rsplit("terminated with status:").next().unwrap_or(reason).trim();
        if aborted || status.contains("SIGABRT") {
            return Self::Aborted { memory_fault: reason.contains("Segmentation fault.") };
        }
        if status.contains("SIGSEGV") {
            return Self::StackOverflowOrMemoryFault;
        }
        if status.contains("SIGKILL") {
            return Self::Killed;
        }
        if let Some(code) = status.strip_prefix("exit status:") {
            return Self::Exited { code: code.trim().parse().ok() };
        }
        Self::Signal(status.to_string())
    }

    /// The protocol's short error name.
    pub fn ename(&self) -> &'static str {
        match self {
            Self::Interrupted => "Interrupted",
            Self::Aborted { .. } => "CellProcessAborted",
            Self::StackOverflowOrMemoryFault => "CellProcessCrashed",
            Self::Killed => "CellProcessKilled",
            Self::Exited { .. } => "CellProcessExited",
            Self::Signal(_) => "CellProcessEnded",
        }
    }

    /// One sentence on what happened and what usually causes it.
    pub fn explanation(&self) -> String {
        match self {
            Self::Interrupted => "The cell was interrupted and the process that runs cells was restarted.".into(),
            Self::Aborted { memory_fault: true } => {
                "The cell made an invalid memory access (a segmentation fault, usually in `unsafe` or native code) \
                 and the process that runs cells was stopped."
                    .into()
            }
            Self::Aborted { memory_fault: false } => {
                "The cell aborted the process that runs cells (`std::process::abort`, a panic while panicking, \
                 or a failed check in native code)."
                    .into()
            }
            Self::StackOverflowOrMemoryFault => {
                "The process that runs cells crashed with a segmentation fault its handler could not report: \
                 almost always a stack overflow — recursion without an end, or a very large array on the stack."
                    .into()
            }
            Self::Killed => "The process that runs cells was killed from outside (SIGKILL); the usual cause is \
                             the system running out of memory. Work on fewer rows or columns, or free memory."
                .into(),
            Self::Exited { code } => format!(
                "The cell ended the process that runs cells (`std::process::exit`, exit status {}).",
                code.map_or_else(|| "unknown".to_string(), |c| c.to_string())
            ),
            Self::Signal(status) => format!("The process that runs cells ended ({status})."),
        }
    }

    /// The cell error: what happened, which variables were lost and which
    /// were kept, the last lines the process wrote, and what to do.
    pub fn to_error(&self, lost: &[String], kept: &[String], last_stderr: &[String]) -> CellError {
        let list = |names: &[String]| if names.is_empty() { "none".to_string() } else { names.join(", ") };
        let mut traceback = vec![self.explanation()];
        let last: Vec<&String> = last_stderr.iter().filter(|l| !l.trim().is_empty()).collect();
        if !last.is_empty() && !matches!(self, Self::Interrupted) {
            traceback.push("Its last lines on standard error:".into());
            traceback.extend(last.iter().rev().take(6).rev().map(|l| format!("    {l}")));
        }
        traceback.push(format!("Variables lost: {}.", list(lost)));
        traceback.push(format!("Variables kept: {}. Functions, types and `use` lines are kept.", list(kept)));
        if !lost.is_empty() {
            traceback.push("Rerun the cells that defined the variables you still need.".into());
        }
        let evalue = match self {
            Self::Interrupted => format!("the cell was interrupted; variables lost: {}", list(lost)),
            _ => format!("the cell process ended ({}); variables lost: {}", self.ename(), list(lost)),
        };
        CellError { ename: self.ename().into(), evalue, traceback }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Status texts as the engine writes them (std's `ExitStatus` Display on Linux).
    #[test]
    fn statuses_are_told_apart() {
        let t = |s: &str| Termination::classify(&format!("Subprocess terminated with status: {s}"), false, false);
        assert_eq!(t("signal: 6 (SIGABRT) (core dumped)"), Termination::Aborted { memory_fault: false });
        assert_eq!(t("signal: 11 (SIGSEGV) (core dumped)"), Termination::StackOverflowOrMemoryFault);
        assert_eq!(t("signal: 9 (SIGKILL)"), Termination::Killed);
        assert_eq!(t("exit status: 3"), Termination::Exited { code: Some(3) });
        assert_eq!(Termination::classify("signal: 9 (SIGKILL)", true, false), Termination::Interrupted);
        assert_eq!(
            Termination::classify(
                "Segmentation fault.\nSubprocess terminated with status: signal: 6 (SIGABRT)",
                false,
                true
            ),
            Termination::Aborted { memory_fault: true }
        );
    }

    #[test]
    fn the_error_names_lost_and_kept_variables() {
        let e = Termination::Killed.to_error(&["sales".into(), "model".into()], &[], &[]);
        assert_eq!(e.ename, "CellProcessKilled");
        assert!(e.traceback.iter().any(|l| l == "Variables lost: sales, model."), "{:?}", e.traceback);
        assert!(e.traceback.iter().any(|l| l.starts_with("Variables kept: none.")));
    }
}
