//! The kernel crate's integration tests as one binary (each module one
//! concern): the command line, the documents it writes, the Jupyter protocol.

mod command_line;
mod documents;
mod protocol;
