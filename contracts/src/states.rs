//! Contract of the states a fit from pieces passes between processes: the
//! factor (round one), the residual sums (round two) and the coding
//! learner, as DataFusion partitions and Ballista executors send them
//! (`plumbline::state_bytes`).
//!
//! Input: byte 0 picks the state (0 factor, 1 residual sums, 2 coding, mod 3),
//! bytes 1–2 the length of a first state (little-endian), and the rest is
//! that state then a second one. Any state is refused as damaged
//! (`Error::DamagedState`), or it is accepted, and then writing it out and
//! reading that back gives the same bytes again. Two accepted states either
//! merge — without a panic, into a state that writes and reads back the
//! same — or the merge is refused as damaged (another kind or shape), never
//! carried out on pieces that do not match.

use plumbline::fit::streamed::{FactorAggregate, ResidualAggregate};
use plumbline::model::design::RecipeLearner;
use plumbline::model::{ModelSpec, Term};
use plumbline::Error;

/// The model the coding states are read for: a number, a log, a category
/// and a date trend (every kind of learned coding).
fn spec() -> ModelSpec {
    ModelSpec::new("price")
        .term(Term::numeric("area").log())
        .numeric("age")
        .term(Term::category("district"))
        .term(Term::months_since("sale_date", "2024-01-01"))
}

/// A state kind's reader and writer.
trait State: Sized {
    fn read(bytes: &[u8]) -> plumbline::Result<Self>;
    fn write(&self) -> Vec<u8>;
    /// Merges `other` in, or refuses as [`Self::read`] would.
    fn merged(self, other: &Self) -> plumbline::Result<Self>;
}

impl State for FactorAggregate {
    fn read(bytes: &[u8]) -> plumbline::Result<Self> {
        FactorAggregate::from_bytes(bytes)
    }
    fn write(&self) -> Vec<u8> {
        self.to_bytes()
    }
    fn merged(self, other: &Self) -> plumbline::Result<Self> {
        self.check_mergeable(other)?;
        Ok(self.merge(other))
    }
}

impl State for ResidualAggregate {
    fn read(bytes: &[u8]) -> plumbline::Result<Self> {
        ResidualAggregate::from_bytes(bytes)
    }
    fn write(&self) -> Vec<u8> {
        self.to_bytes()
    }
    fn merged(self, other: &Self) -> plumbline::Result<Self> {
        self.check_mergeable(other)?;
        Ok(self.merge(other))
    }
}

impl State for RecipeLearner {
    fn read(bytes: &[u8]) -> plumbline::Result<Self> {
        RecipeLearner::from_bytes(bytes, &spec())
    }
    fn write(&self) -> Vec<u8> {
        self.to_bytes()
    }
    fn merged(mut self, other: &Self) -> plumbline::Result<Self> {
        self.merge(other);
        Ok(self)
    }
}

/// The contract (see the module docs).
pub fn round_states(data: &[u8]) {
    let Some((&kind, rest)) = data.split_first() else { return };
    let Some((length, rest)) = rest.split_first_chunk::<2>() else { return };
    let length = usize::from(u16::from_le_bytes(*length)).min(rest.len());
    let (first, second) = rest.split_at(length);
    match kind % 3 {
        0 => check::<FactorAggregate>(first, second),
        1 => check::<ResidualAggregate>(first, second),
        _ => check::<RecipeLearner>(first, second),
    }
}

fn check<S: State>(first: &[u8], second: &[u8]) {
    let (Some(a), Some(b)) = (accepted::<S>(first), accepted::<S>(second)) else { return };
    match a.merged(&b) {
        Ok(merged) => {
            accepted::<S>(&merged.write());
        }
        Err(error) => damaged(&error, "a merge"),
    }
}

/// Reads `bytes`; a state accepted must write and read back to the same bytes.
fn accepted<S: State>(bytes: &[u8]) -> Option<S> {
    match S::read(bytes) {
        Ok(state) => {
            let written = state.write();
            let again = S::read(&written).unwrap_or_else(|e| panic!("a state written out is refused on reading: {e}"));
            assert_eq!(again.write(), written, "a state written out and read back writes other bytes");
            Some(state)
        }
        Err(error) => {
            damaged(&error, "a state");
            None
        }
    }
}

fn damaged(error: &Error, what: &str) {
    assert!(
        matches!(error, Error::DamagedState { .. }),
        "{what} was refused with another error than a damaged state: {error:?}"
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The committed seeds (fuzz/seed_corpus.py) are real states: each one
    /// is accepted, so the replay exercises merging, not only refusals.
    #[test]
    fn the_seed_states_are_accepted() {
        let folder = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz/corpus/round_states");
        let mut seeds = 0;
        for entry in std::fs::read_dir(&folder).expect("the round_states corpus") {
            let path = entry.expect("entry").path();
            if !path.file_name().is_some_and(|n| n.to_string_lossy().starts_with("seed-")) {
                continue;
            }
            let data = std::fs::read(&path).expect("seed");
            let length = usize::from(u16::from_le_bytes([data[1], data[2]]));
            let (first, second) = data[3..].split_at(length);
            let read = |bytes: &[u8]| match data[0] % 3 {
                0 => FactorAggregate::from_bytes(bytes).map(|_| ()),
                1 => ResidualAggregate::from_bytes(bytes).map(|_| ()),
                _ => RecipeLearner::from_bytes(bytes, &spec()).map(|_| ()),
            };
            for state in [first, second] {
                read(state).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            }
            seeds += 1;
        }
        assert!(seeds >= 8, "{seeds} seeds");
    }

    /// Pieces of different widths are refused, not merged.
    #[test]
    fn factors_of_different_widths_do_not_merge() {
        let error = FactorAggregate::new(3).check_mergeable(&FactorAggregate::new(4)).expect_err("refused");
        assert!(matches!(error, Error::DamagedState { .. }));
        let error = FactorAggregate::new(3).check_mergeable(&FactorAggregate::new_extended(3)).expect_err("refused");
        assert!(matches!(error, Error::DamagedState { .. }));
    }
}
