//! The connection file a front end writes before starting the kernel.

use serde::Deserialize;
use std::path::Path;

/// Why a connection file could not be used.
#[derive(Debug, thiserror::Error)]
pub enum ConnectionError {
    /// The file could not be read.
    #[error("cannot read connection file `{path}`: {reason}")]
    Unreadable { path: String, reason: String },
    /// The file is not the JSON the protocol defines.
    #[error("connection file `{path}` is not valid: {reason}")]
    Invalid { path: String, reason: String },
    /// A transport or signature scheme we do not speak.
    #[error("connection file `{path}`: {reason}")]
    Unsupported { path: String, reason: String },
}

/// Ports, address, key and schemes from a connection file.
#[derive(Debug, Clone, Deserialize)]
pub struct ConnectionFile {
    /// Transport, `tcp` (the only one we serve).
    pub transport: String,
    /// Address to bind.
    pub ip: String,
    /// Shell ROUTER port.
    pub shell_port: u16,
    /// IOPub PUB port.
    pub iopub_port: u16,
    /// Stdin ROUTER port.
    pub stdin_port: u16,
    /// Control ROUTER port.
    pub control_port: u16,
    /// Heartbeat REP port.
    pub hb_port: u16,
    /// HMAC key; empty means messages are not signed.
    #[serde(default)]
    pub key: String,
    /// `hmac-sha256` (or empty with an empty key).
    #[serde(default = "default_scheme")]
    pub signature_scheme: String,
}

fn default_scheme() -> String {
    "hmac-sha256".into()
}

impl ConnectionFile {
    /// Reads and checks a connection file.
    pub fn read(path: &Path) -> Result<Self, ConnectionError> {
        let shown = path.display().to_string();
        let text = std::fs::read_to_string(path)
            .map_err(|e| ConnectionError::Unreadable { path: shown.clone(), reason: e.to_string() })?;
        let file: ConnectionFile = serde_json::from_str(&text)
            .map_err(|e| ConnectionError::Invalid { path: shown.clone(), reason: e.to_string() })?;
        if file.transport != "tcp" {
            return Err(ConnectionError::Unsupported {
                path: shown,
                reason: format!("transport `{}` is not supported; use tcp", file.transport),
            });
        }
        if !file.key.is_empty() && file.signature_scheme != "hmac-sha256" {
            return Err(ConnectionError::Unsupported {
                path: shown,
                reason: format!("signature scheme `{}` is not supported; use hmac-sha256", file.signature_scheme),
            });
        }
        Ok(file)
    }

    /// The endpoint for one port, e.g. `tcp://127.0.0.1:5555`.
    pub fn endpoint(&self, port: u16) -> String {
        format!("{}://{}:{}", self.transport, self.ip, port)
    }
}
