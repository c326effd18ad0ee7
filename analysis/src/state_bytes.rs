//! Byte forms of the states a fit from pieces passes between processes.
//!
//! A fit assembled in a query engine ([`crate::fit::streamed`] inside
//! DataFusion partitions or on Ballista executors) reduces each partition to
//! a few `p × p` numbers and ships them to another process to be merged. The
//! states are written here as little-endian bytes — every `f64` by its bits,
//! so a state read back is the state written, to the last bit — behind a
//! four-byte tag naming the state's kind and a version byte, so that a state
//! of another kind or version is refused, never misread.
//!
//! Written here rather than with a serialisation library: the forms are a
//! handful of numbers whose exactness is the point (text formats lose the
//! sign of zero and cannot carry ±∞), and a reader of untrusted bytes must
//! bound every length it is told before it allocates.

use crate::error::{Error, Result};

/// The version of every state form; bump it when a form changes.
pub const STATE_FORM_VERSION: u8 = 1;

/// Builds one state's bytes.
#[derive(Debug)]
pub struct StateWriter {
    bytes: Vec<u8>,
}

impl StateWriter {
    /// A state of kind `tag` (four ASCII bytes).
    pub fn new(tag: &[u8; 4]) -> Self {
        let mut bytes = Vec::with_capacity(256);
        bytes.extend_from_slice(tag);
        bytes.push(STATE_FORM_VERSION);
        Self { bytes }
    }

    /// Appends an unsigned count.
    pub fn count(&mut self, value: usize) -> &mut Self {
        self.bytes.extend_from_slice(&(value as u64).to_le_bytes());
        self
    }

    /// Appends a number by its bits.
    pub fn number(&mut self, value: f64) -> &mut Self {
        self.bytes.extend_from_slice(&value.to_bits().to_le_bytes());
        self
    }

    /// Appends a length, then the numbers.
    pub fn numbers(&mut self, values: &[f64]) -> &mut Self {
        self.count(values.len());
        values.iter().for_each(|&v| {
            self.number(v);
        });
        self
    }

    /// Appends a length, then the text's UTF-8 bytes.
    pub fn text(&mut self, value: &str) -> &mut Self {
        self.count(value.len());
        self.bytes.extend_from_slice(value.as_bytes());
        self
    }

    /// The bytes written.
    pub fn finish(&mut self) -> Vec<u8> {
        std::mem::take(&mut self.bytes)
    }
}

/// Reads one state's bytes, refusing anything short, long or of another kind.
#[derive(Debug)]
pub struct StateReader<'a> {
    rest: &'a [u8],
    kind: &'static str,
}

impl<'a> StateReader<'a> {
    /// Checks the tag and version; `kind` names the state in errors.
    pub fn new(bytes: &'a [u8], tag: &[u8; 4], kind: &'static str) -> Result<Self> {
        let damaged = |detail: String| Error::DamagedState { kind: kind.to_string(), detail };
        if bytes.len() < 5 || &bytes[..4] != tag {
            return Err(damaged("it does not start with the state's tag".into()));
        }
        if bytes[4] != STATE_FORM_VERSION {
            return Err(damaged(format!(
                "it is of form version {}, this build reads version {STATE_FORM_VERSION}; run every process of \
                 the cluster from the same build",
                bytes[4]
            )));
        }
        Ok(Self { rest: &bytes[5..], kind })
    }

    fn damaged(&self, detail: &str) -> Error {
        Error::DamagedState { kind: self.kind.to_string(), detail: detail.to_string() }
    }

    fn take(&mut self, len: usize) -> Result<&'a [u8]> {
        if self.rest.len() < len {
            return Err(self.damaged("it ends early"));
        }
        let (head, tail) = self.rest.split_at(len);
        self.rest = tail;
        Ok(head)
    }

    /// Reads an unsigned count.
    pub fn count(&mut self) -> Result<usize> {
        let bytes = self.take(8)?;
        let value = u64::from_le_bytes(bytes.try_into().map_err(|_| self.damaged("it ends early"))?);
        usize::try_from(value).map_err(|_| self.damaged("a count does not fit this machine"))
    }

    /// Reads a count that must not exceed what the remaining bytes can hold
    /// at `unit` bytes per item (so a damaged length cannot allocate).
    fn length(&mut self, unit: usize) -> Result<usize> {
        let len = self.count()?;
        if len.checked_mul(unit).is_none_or(|total| total > self.rest.len()) {
            return Err(self.damaged("a length exceeds the bytes that follow"));
        }
        Ok(len)
    }

    /// Reads a number.
    pub fn number(&mut self) -> Result<f64> {
        let bytes = self.take(8)?;
        Ok(f64::from_bits(u64::from_le_bytes(bytes.try_into().map_err(|_| self.damaged("it ends early"))?)))
    }

    /// Reads a length, then that many numbers.
    pub fn numbers(&mut self) -> Result<Vec<f64>> {
        let len = self.length(8)?;
        (0..len).map(|_| self.number()).collect()
    }

    /// Reads a length, then that many bytes of UTF-8 text.
    pub fn text(&mut self) -> Result<String> {
        let len = self.length(1)?;
        let bytes = self.take(len)?;
        String::from_utf8(bytes.to_vec()).map_err(|_| self.damaged("a name is not UTF-8"))
    }

    /// Checks that every byte was read.
    pub fn finish(self) -> Result<()> {
        if self.rest.is_empty() {
            Ok(())
        } else {
            Err(self.damaged("bytes follow its end"))
        }
    }
}
