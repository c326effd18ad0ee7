//! Speed of the fitting core on a large design, as a ratio to a bare faer QR
//! least-squares solve of the same matrix measured in the same run.
//!
//! Run: `cargo bench -p plumbline-analysis --bench fit_large` (add `-- ROWS COLS` to
//! change the default 1,000,000 × 50). Prints figures; asserts nothing.
//!
//! For a numpy comparison on the same data, the bench writes nothing by
//! default; run it with `PLUMBLINE_BENCH_NPY=/tmp/design.npy` to save the
//! design (row-major f64 with the target in the last column, as a raw `.npy`
//! file), then in Python:
//!
//! ```text
//! import numpy as np, time
//! a = np.load("/tmp/design.npy"); X, y = a[:, :-1], a[:, -1]
//! t = time.perf_counter(); np.linalg.lstsq(X, y, rcond=None); print(time.perf_counter() - t)
//! ```

use faer::linalg::solvers::SolveLstsq;
use faer::Mat;
use plumbline::polars::prelude::{Column, DataFrame};
use plumbline::prelude::*;
use std::time::Instant;

/// A small deterministic generator (SplitMix64, Steele, Lea & Flood 2014) so the
/// bench needs no extra dependency and gives the same matrix every run.
struct SplitMix(u64);
impl SplitMix {
    fn next_f64(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).filter(|a| !a.starts_with("--")).collect();
    let rows: usize = args.first().and_then(|s| s.parse().ok()).unwrap_or(1_000_000);
    let cols: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(50);
    let repeats = 3;

    let mut rng = SplitMix(20261202);
    let x: Vec<Vec<f64>> = (0..cols - 1).map(|_| (0..rows).map(|_| rng.next_f64() * 10.0 - 5.0).collect()).collect();
    let y: Vec<f64> = (0..rows)
        .map(|i| 1.0 + x.iter().enumerate().map(|(j, c)| c[i] * (j as f64 * 0.01 + 0.1)).sum::<f64>() + rng.next_f64())
        .collect();

    if let Ok(path) = std::env::var("PLUMBLINE_BENCH_NPY") {
        write_npy(&path, &x, &y);
        println!("wrote the design to {path}");
    }

    // Reference: bare faer column-pivoted QR least squares on the same matrix (with intercept column).
    let mut bare = Vec::new();
    for _ in 0..repeats {
        let start = Instant::now();
        let a = Mat::<f64>::from_fn(rows, cols, |i, j| if j == 0 { 1.0 } else { x[j - 1][i] });
        let b = Mat::<f64>::from_fn(rows, 1, |i, _| y[i]);
        let solution = a.col_piv_qr().solve_lstsq(&b);
        std::hint::black_box(solution);
        bare.push(start.elapsed().as_secs_f64());
    }

    let mut columns = vec![Column::new("y".into(), y.clone())];
    for (j, c) in x.iter().enumerate() {
        columns.push(Column::new(format!("x{j}").into(), c.clone()));
    }
    let frame = Frame::from_dataframe(DataFrame::new(rows, columns).expect("frame"), "(bench)");
    let mut spec = ModelSpec::new("y");
    for j in 0..cols - 1 {
        spec = spec.numeric(format!("x{j}"));
    }
    let mut ours = Vec::new();
    let mut method = String::new();
    for _ in 0..repeats {
        let start = Instant::now();
        let model = fit(&frame, &spec).expect("fit");
        let table = model.coefficients(0.95).expect("table");
        std::hint::black_box(table);
        ours.push(start.elapsed().as_secs_f64());
        method = format!("{:?}", model.solution().method());
    }

    // The fitting core alone: the solver on an already built design.
    let design = plumbline::model::build_design(&frame, &spec, &[]).expect("design");
    let tolerance = plumbline::fit::default_rank_tolerance(rows, cols);
    let mut core = Vec::new();
    let mut design_times = Vec::new();
    for _ in 0..repeats {
        let start = Instant::now();
        std::hint::black_box(plumbline::model::build_design(&frame, &spec, &[]).expect("design"));
        design_times.push(start.elapsed().as_secs_f64());
        let start = Instant::now();
        let solution =
            plumbline::fit::solver::solve(design.columns(), design.target(), None, Precision::Auto, tolerance);
        std::hint::black_box(solution);
        core.push(start.elapsed().as_secs_f64());
    }

    let (b, o, c, d) = (median(bare), median(ours), median(core), median(design_times));
    println!("design: {rows} rows × {cols} columns (intercept included), median of {repeats} runs");
    println!("bare faer col-piv QR solve           {b:>8.3} s");
    println!("plumbline design matrix from frame   {d:>8.3} s");
    println!("plumbline fitting core (solver)      {c:>8.3} s   solver: {method}");
    println!("plumbline fit (design + solve + SEs) {o:>8.3} s");
    println!("ratio fitting core / bare faer       {:>8.2}   (target <= 1.0)", c / b);
    println!("ratio plumbline fit / bare faer      {:>8.2}", o / b);
}

/// Writes a row-major `.npy` (format 1.0) of `[x | y]`.
fn write_npy(path: &str, x: &[Vec<f64>], y: &[f64]) {
    use std::io::Write;
    let rows = y.len();
    let cols = x.len() + 1;
    let mut header = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({rows}, {cols}), }}");
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).expect("create npy"));
    out.write_all(b"\x93NUMPY\x01\x00").expect("write");
    out.write_all(&(header.len() as u16).to_le_bytes()).expect("write");
    out.write_all(header.as_bytes()).expect("write");
    for i in 0..rows {
        for c in x {
            out.write_all(&c[i].to_le_bytes()).expect("write");
        }
        out.write_all(&y[i].to_le_bytes()).expect("write");
    }
}
