//! Compile errors in the cell's own coordinates.
//!
//! evcxr reports each rustc diagnostic with spans already mapped back to the
//! user's cell (1-based line and column); we render them ourselves — a
//! headline, then each span as `line L, col C` with the source line and a
//! marker under the span — instead of rustc's text, whose file and line
//! numbers point into the engine's generated crate.

/// Renders one diagnostic as traceback lines.
pub fn render(error: &evcxr::CompilationError, cell: &str) -> Vec<String> {
    let lines: Vec<&str> = cell.lines().collect();
    let mut out = Vec::new();
    let code = error.code().map(|c| format!("[{c}]")).unwrap_or_default();
    out.push(format!("{}{code}: {}", error.level(), error.message()));
    for spanned in error.spanned_messages() {
        let Some(span) = &spanned.span else {
            if !spanned.label.is_empty() {
                out.push(format!("  note: {}", spanned.label));
            }
            continue;
        };
        out.push(format!("  --> cell line {}, column {}", span.start_line, span.start_column));
        if let Some(source) = lines.get(span.start_line.saturating_sub(1)) {
            out.push(format!("   | {source}"));
            let width = if span.end_line == span.start_line {
                span.end_column.saturating_sub(span.start_column).max(1)
            } else {
                source.chars().count().saturating_sub(span.start_column.saturating_sub(1)).max(1)
            };
            let marker = if spanned.is_primary { '^' } else { '-' };
            out.push(format!(
                "   | {}{} {}",
                " ".repeat(span.start_column.saturating_sub(1)),
                marker.to_string().repeat(width),
                spanned.label
            ));
        }
    }
    for help in error.help() {
        out.push(format!("  help: {help}"));
    }
    out
}
