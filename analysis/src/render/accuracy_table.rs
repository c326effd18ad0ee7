//! The accuracy table: log relative errors against NIST StRD, one row per dataset.

use crate::accuracy::DatasetScore;

/// The LRE table as aligned text.
pub fn accuracy_table(scores: &[DatasetScore]) -> String {
    let mut out = String::from(
        "Log relative error against NIST StRD certified values (higher is better, 15 = every printed digit)\n\n",
    );
    out.push_str(&format!(
        "{:<9} {:<8} {:>6} {:>6} {:>6} {:>6} {:>6} {:>6} {:>6}\n",
        "dataset", "level", "coef", "SE", "res SD", "R²", "SSres", "SSreg", "F"
    ));
    for s in scores {
        out.push_str(&format!(
            "{:<9} {:<8} {:>6.1} {:>6.1} {:>6.1} {:>6.1} {:>6.1} {:>6.1} {:>6}\n",
            s.dataset,
            s.difficulty,
            s.coefficients,
            s.std_errors,
            s.residual_sd,
            s.r_squared,
            s.ss_residual,
            s.ss_regression,
            s.f_statistic.map_or("∞ ok".to_string(), |f| format!("{f:.1}"))
        ));
    }
    let worst = scores.iter().map(DatasetScore::headline_minimum).fold(f64::INFINITY, f64::min);
    out.push_str(&format!("\nminimum over coefficients, SEs, residual SD and R² on all datasets: {worst:.1}\n"));
    out
}
