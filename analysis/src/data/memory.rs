//! How much memory one load or one design may take, so that a file larger
//! than memory or a design of a hundred thousand columns ends in a message
//! instead of the operating system killing the process (and, in a notebook,
//! the kernel with every variable in it) without a word.
//!
//! The budget is `PLUMBLINE_MEMORY_LIMIT` when set (bytes, or with a unit:
//! `800M`, `4G`, `4GiB`), else 80 % of the memory the system reports
//! available (`MemAvailable` in `/proc/meminfo`, Linux) when the budget is
//! asked for. Where neither is known the budget is unlimited, and says so.
//! The figures checked against it are estimates of the largest allocations
//! (stated at each use), not an accounting of every byte.

use crate::error::{Error, Result};

/// The environment variable that sets the budget.
pub const MEMORY_LIMIT_VARIABLE: &str = "PLUMBLINE_MEMORY_LIMIT";

/// Share of the available memory one load or design may take when no limit
/// is set: the rest is left for the fit that follows and for other programs.
const SHARE_OF_AVAILABLE: f64 = 0.8;

/// The most memory one load or one design may take.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MemoryBudget {
    bytes: Option<u64>,
    from_setting: bool,
}

impl MemoryBudget {
    /// The budget now: the setting, else 80 % of the available memory. A
    /// setting that is not a size is an error naming it.
    pub fn current() -> Result<MemoryBudget> {
        if let Ok(text) = std::env::var(MEMORY_LIMIT_VARIABLE) {
            let bytes = parse_size(&text).ok_or_else(|| Error::OutOfRange {
                what: format!("the environment variable {MEMORY_LIMIT_VARIABLE}"),
                requirement: "a size in bytes, or with a unit such as 800M or 4G".into(),
                value: text.clone(),
            })?;
            return Ok(MemoryBudget { bytes: Some(bytes), from_setting: true });
        }
        let available = available_memory().map(|b| (b as f64 * SHARE_OF_AVAILABLE) as u64);
        Ok(MemoryBudget { bytes: available, from_setting: false })
    }

    /// A budget of `bytes`, as if set by the user (for callers that hold
    /// their own limit, and for tests).
    pub fn of_bytes(bytes: u64) -> MemoryBudget {
        MemoryBudget { bytes: Some(bytes), from_setting: true }
    }

    /// The budget in bytes, `None` when unlimited.
    pub fn bytes(&self) -> Option<u64> {
        self.bytes
    }

    /// Refuses `needed` bytes beyond the budget. `what` says what would take
    /// them (e.g. "reading `sales.csv`"), `advice` how to do with less.
    pub fn check(&self, needed: u64, what: impl FnOnce() -> String, advice: &str) -> Result<()> {
        match self.bytes {
            Some(budget) if needed > budget => Err(Error::OverMemory {
                what: what(),
                needed,
                budget,
                budget_source: self.describe_source(),
                advice: advice.to_string(),
            }),
            _ => Ok(()),
        }
    }

    fn describe_source(&self) -> String {
        if self.from_setting {
            format!("set by {MEMORY_LIMIT_VARIABLE}")
        } else {
            format!("80 % of the memory available now; set {MEMORY_LIMIT_VARIABLE} to change it")
        }
    }
}

/// Bytes from `1234`, `800M`, `800MB`, `4G`, `4GiB` (units are powers of
/// 1024, as memory is counted; upper or lower case).
fn parse_size(text: &str) -> Option<u64> {
    let text = text.trim();
    let split = text.find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(text.len());
    let (number, unit) = text.split_at(split);
    let number: f64 = number.parse().ok().filter(|v: &f64| v.is_finite() && *v > 0.0)?;
    let scale: u64 = match unit.trim().to_ascii_uppercase().trim_end_matches("IB").trim_end_matches('B') {
        "" => 1,
        "K" => 1 << 10,
        "M" => 1 << 20,
        "G" => 1 << 30,
        "T" => 1 << 40,
        _ => return None,
    };
    Some((number * scale as f64) as u64)
}

/// `MemAvailable` of `/proc/meminfo` in bytes, where the system reports it.
fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_read_with_their_units() {
        assert_eq!(parse_size("1234"), Some(1234));
        assert_eq!(parse_size("800M"), Some(800 << 20));
        assert_eq!(parse_size("4GiB"), Some(4 << 30));
        assert_eq!(parse_size("4gb"), Some(4 << 30));
        assert_eq!(parse_size("1.5G"), Some(3 << 29));
        assert_eq!(parse_size("lots"), None);
        assert_eq!(parse_size("-4G"), None);
        assert_eq!(parse_size("4X"), None);
    }

    #[test]
    fn a_need_beyond_the_budget_is_refused_with_both_figures() {
        let message = MemoryBudget::of_bytes(100 << 20)
            .check(3 << 30, || "reading `big.csv`".into(), "read fewer columns")
            .expect_err("over budget")
            .to_string();
        assert!(message.contains("3.0 GB") && message.contains("100 MB") && message.contains("big.csv"), "{message}");
        assert!(MemoryBudget::of_bytes(100).check(100, String::new, "").is_ok());
    }
}
