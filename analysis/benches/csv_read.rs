//! Time and peak memory of loading one CSV file with [`load_csv`], printed as
//! one JSON line for `csv_reader_vs_polars.py`, which runs polars' own CSV
//! reader on the same file in the same run and prints the ratios.
//!
//! Run: `cargo bench -p plumbline-analysis --bench csv_read -- FILE`. Prints figures;
//! asserts nothing.

use plumbline::prelude::*;
use std::time::Instant;

/// A line of `/proc/self/status` in bytes (`VmHWM` is the peak resident set).
fn status_bytes(field: &str) -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with(field))?;
    let kib: u64 = line.trim_start_matches(field).trim().trim_end_matches("kB").trim().parse().ok()?;
    Some(kib * 1024)
}

fn main() {
    let Some(path) = std::env::args().skip(1).find(|a| !a.starts_with("--")) else {
        eprintln!("usage: cargo bench -p plumbline-analysis --bench csv_read -- FILE.csv");
        std::process::exit(2);
    };
    let baseline = status_bytes("VmRSS:").unwrap_or(0);
    let started = Instant::now();
    let frame = match load_csv(&path, &CsvOptions::default()) {
        Ok(frame) => frame,
        Err(e) => {
            eprintln!("error: {e}");
            std::process::exit(1);
        }
    };
    let seconds = started.elapsed().as_secs_f64();
    let peak = status_bytes("VmHWM:").unwrap_or(0);
    let numeric_bytes: usize =
        frame.data().columns().iter().filter(|c| c.dtype().is_primitive_numeric()).map(|c| c.len() * 8).sum();
    println!(
        "{{\"reader\": \"plumbline\", \"rows\": {}, \"cols\": {}, \"seconds\": {seconds:.4}, \"peak_rss_bytes\": {peak}, \
         \"baseline_rss_bytes\": {baseline}, \"f64_column_bytes\": {numeric_bytes}}}",
        frame.height(),
        frame.width()
    );
}
