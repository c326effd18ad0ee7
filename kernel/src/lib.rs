//! The `plumbline` command line, as a library so that end-to-end tests can
//! drive the same code the binary runs.
//!
//! | module | responsibility |
//! |---|---|
//! | [`cli`] | argument definitions (clap) |
//! | [`commands::fit`] | `plumbline fit`: fit a model to a data file, print text or JSON |
//! | [`commands::accuracy`] | `plumbline accuracy`: the NIST StRD log-relative-error table |

pub mod cli;
pub mod commands;
