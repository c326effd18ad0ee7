//! The `plumbline` command line, as a library so that end-to-end tests can
//! drive the same code the binary runs.
//!
//! | module | responsibility |
//! |---|---|
//! | [`cli`] | argument definitions (clap) |
//! | [`commands::fit`] | `plumbline fit`: fit a model to a data file, print text or JSON |
//! | [`commands::accuracy`] | `plumbline accuracy`: the NIST StRD log-relative-error table |
//! | [`commands::compare`], [`commands::ratio`] | model comparison; ratio studies |
//! | [`commands::kernel`], [`commands::install`] | the notebook kernel and its kernelspec |
//! | [`commands::run`], [`commands::diff`] | headless study runs; the drift report between runs |
//! | [`notebook`] | notebook documents, the inputs cell, the runner, the HTML report, run results |
//! | [`wire`] | connection file, framing, HMAC signing |
//! | [`server`] | the five sockets and every request |
//! | [`eval`] | the evcxr session with `plumbline` preloaded |
//! | [`standby`] | standby kernels: an engine prepared ahead for the next kernel |

pub mod cli;
pub mod commands;
pub mod eval;
pub mod notebook;
pub mod server;
pub mod standby;
pub mod wire;
