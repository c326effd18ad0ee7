//! The hand-over messages: one JSON line from the launcher, one back.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::PathBuf;

/// Version of the hand-over messages; both sides must agree.
pub const HANDOVER_VERSION: u32 = 1;

/// The program file a process runs, as far as a hand-over must match it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ProgramIdentity {
    /// Absolute path of the executable.
    pub executable: PathBuf,
    /// Its size in bytes.
    pub length: u64,
    /// Its modification time, nanoseconds since the Unix epoch.
    pub modified_ns: u128,
    /// The crate version it was built from.
    pub version: String,
}

impl ProgramIdentity {
    /// This process's program, read now.
    pub fn current() -> std::io::Result<Self> {
        let executable = std::env::current_exe()?;
        let metadata = std::fs::metadata(&executable)?;
        let modified_ns =
            metadata.modified()?.duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos()).unwrap_or_default();
        Ok(Self { executable, length: metadata.len(), modified_ns, version: env!("CARGO_PKG_VERSION").to_string() })
    }
}

/// What a launcher sends a standby.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct HandoverRequest {
    /// [`HANDOVER_VERSION`] of the launcher.
    pub version: u32,
    /// The launcher's program.
    pub program: ProgramIdentity,
    /// The connection file the front end gave the launcher (absolute).
    pub connection_file: PathBuf,
    /// The launcher's working directory, where cells should run.
    pub working_directory: PathBuf,
    /// The launcher's environment.
    pub environment: BTreeMap<String, String>,
}

/// What a standby answers.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "outcome", rename_all = "snake_case")]
pub enum HandoverReply {
    /// The standby serves the connection file from now on.
    Taken {
        /// The standby's process id.
        pid: u32,
    },
    /// The standby does not fit this launcher.
    Declined {
        /// Why, for the launcher's log.
        reason: String,
    },
}

/// A message as the one line it travels as (JSON, then a newline).
pub fn message_line<T: Serialize>(message: &T) -> std::io::Result<Vec<u8>> {
    let mut line = serde_json::to_vec(message).map_err(std::io::Error::other)?;
    line.push(b'\n');
    Ok(line)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_over_messages_read_back_through_their_types() {
        let taken = HandoverReply::Taken { pid: 7 };
        let line = message_line(&taken).expect("json");
        assert_eq!(line, b"{\"outcome\":\"taken\",\"pid\":7}\n");
        assert_eq!(serde_json::from_slice::<HandoverReply>(&line).expect("read back"), taken);
    }
}
