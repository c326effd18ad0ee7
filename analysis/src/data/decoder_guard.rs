//! A third-party decoder run on bytes from outside, with its panics turned
//! into refusals.
//!
//! The Parquet, Arrow IPC and workbook decoders we use (polars, calamine)
//! are meant to return errors on damaged files, but some damaged files make
//! them panic instead (the Parquet fuzz target found metadata that stops
//! polars' Thrift reader with `thrift bool field`). In a notebook that would
//! end the cell's process and lose every variable; a damaged file must end
//! in a message naming the file, as any other unreadable file does. So the
//! decoders run inside [`decode_guarded`], which catches a panic and hands
//! back its message.
//!
//! While a guarded decode runs, the process's panic hook is silenced (the
//! panic is reported as our error, not also printed as a crash); the hook in
//! force before the first of any overlapping guarded decodes is restored when
//! the last ends. A panic elsewhere in those moments is still caught or
//! propagated as usual, only not printed.

use polars::prelude::{DataFrame, PolarsError, PolarsResult};
use std::panic::{self, AssertUnwindSafe, PanicHookInfo};
use std::sync::Mutex;

type Hook = Box<dyn Fn(&PanicHookInfo<'_>) + Sync + Send + 'static>;

/// Guarded decodes running now, and the hook to restore after the last.
static GUARDS: Mutex<(usize, Option<Hook>)> = Mutex::new((0, None));

/// Runs `decode`; a panic inside it (on this thread or a worker thread it
/// joins) becomes `Err` with the panic's message.
pub(crate) fn decode_guarded<T>(decode: impl FnOnce() -> T) -> Result<T, String> {
    enter();
    let outcome = panic::catch_unwind(AssertUnwindSafe(decode));
    leave();
    outcome.map_err(|payload| {
        payload
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "the decoder stopped".into())
    })
}

/// [`decode_guarded`] for a polars decoder: a panic becomes the decoder's
/// own kind of error, saying the file is damaged.
pub(crate) fn polars_guarded<T>(decode: impl FnOnce() -> PolarsResult<T>) -> PolarsResult<T> {
    decode_guarded(decode).unwrap_or_else(|panic| {
        Err(PolarsError::ComputeError(format!("the file is damaged (the decoder stopped: {panic})").into()))
    })
}

/// Checks what a decoder built from a damaged file may have got wrong
/// without saying so: every column as long as the frame, and each column's
/// pieces adding up to its length with a validity mask as long as each piece.
/// (The Parquet fuzz target found a file whose dictionary-coded column
/// decoded to no values for four rows: the release build of the decoder
/// checks this only in debug builds, and the frame would have held too few
/// numbers for its rows.)
pub(crate) fn check_decoded(data: &DataFrame) -> PolarsResult<()> {
    let damaged = |name: &str, what: String| {
        Err(PolarsError::ComputeError(format!("the file is damaged: column `{name}` {what}").into()))
    };
    for column in data.columns() {
        let series = column.as_materialized_series();
        if series.len() != data.height() {
            return damaged(column.name(), format!("has {} values for {} rows", series.len(), data.height()));
        }
        let pieces: usize = series.chunks().iter().map(|chunk| chunk.len()).sum();
        if pieces != series.len() {
            return damaged(column.name(), format!("decoded to {pieces} values for {} rows", series.len()));
        }
        if series.chunks().iter().any(|chunk| chunk.validity().is_some_and(|mask| mask.len() != chunk.len())) {
            return damaged(column.name(), "has a missing-value mask of another length than its values".into());
        }
    }
    Ok(())
}

fn enter() {
    let mut guards = GUARDS.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    if guards.0 == 0 {
        guards.1 = Some(panic::take_hook());
        panic::set_hook(Box::new(|_| {}));
    }
    guards.0 += 1;
}

fn leave() {
    let mut guards = GUARDS.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    guards.0 -= 1;
    if guards.0 == 0 {
        if let Some(hook) = guards.1.take() {
            panic::set_hook(hook);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_becomes_its_message_and_the_hook_comes_back() {
        let outcome: Result<(), String> = decode_guarded(|| panic!("thrift bool field"));
        assert_eq!(outcome, Err("thrift bool field".to_string()));
        assert_eq!(decode_guarded(|| 7), Ok(7));
        assert_eq!(GUARDS.lock().map(|g| (g.0, g.1.is_none())).ok(), Some((0, true)));
    }
}
