//! Values derived from a fit, computed at most once.
//!
//! A notebook shows a fit several times (its card, its warnings, a review
//! sheet, flagged rows), and each display reads the same derived results:
//! the weighted rows, collinearity, influence, the assumption tests. A
//! [`Derived`] keeps each the first time it is computed, keyed by its type,
//! and is shared (through an `Arc`) by the fit's clones — including
//! [`super::Fit::with_covariance`], since none of these depends on the
//! covariance estimator. Keying by type keeps this layer free of the types of
//! the layers above it, which define (private, newtype) keys of their own.

use std::any::{Any, TypeId};
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// A type-keyed store of values derived from one fit.
#[derive(Default)]
pub struct Derived {
    slots: Mutex<HashMap<TypeId, Arc<dyn Any + Send + Sync>>>,
}

impl std::fmt::Debug for Derived {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let held = self.slots.lock().map(|s| s.len()).unwrap_or(0);
        write!(f, "Derived({held} values held)")
    }
}

impl Derived {
    /// The value of type `T`, computing it with `compute` the first time.
    ///
    /// The lock is not held while `compute` runs, so a computation may itself
    /// read other derived values; if two threads compute the same value at
    /// once, the first stored wins and both return it.
    pub fn get_or_compute<T: Any + Send + Sync>(&self, compute: impl FnOnce() -> T) -> Arc<T> {
        let key = TypeId::of::<T>();
        if let Some(found) = self.lookup::<T>(key) {
            return found;
        }
        let value: Arc<dyn Any + Send + Sync> = Arc::new(compute());
        let mut slots = self.slots.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
        let stored = slots.entry(key).or_insert(value).clone();
        drop(slots);
        // The entry under `key` always holds a `T`: only this function inserts.
        stored.downcast::<T>().unwrap_or_else(|_| unreachable!("derived value stored under another type's key"))
    }

    fn lookup<T: Any + Send + Sync>(&self, key: TypeId) -> Option<Arc<T>> {
        let slots = self.slots.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
        slots.get(&key).cloned().and_then(|v| v.downcast::<T>().ok())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn computes_once_per_type_and_allows_nested_reads() {
        let derived = Derived::default();
        let mut calls = 0;
        let first = derived.get_or_compute(|| {
            calls += 1;
            // A nested read of another type while computing this one.
            *derived.get_or_compute(|| 2u32) as u64 * 21
        });
        let again = derived.get_or_compute(|| 0u64);
        assert_eq!((*first, *again, calls), (42, 42, 1));
    }
}
