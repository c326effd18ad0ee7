//! This kernel's cell history, for `history_request`.

/// Cells run in this kernel, in order, with their text output.
#[derive(Debug, Default)]
pub struct History {
    cells: Vec<(u64, String)>,
    outputs: std::collections::HashMap<u64, String>,
}

impl History {
    /// Records a cell under its execution count.
    pub fn push(&mut self, count: u64, code: &str) {
        self.cells.push((count, code.to_string()));
    }

    /// Records the plain-text result of cell `count`.
    pub fn set_output(&mut self, count: u64, text: &str) {
        self.outputs.insert(count, text.to_string());
    }

    /// The recorded output of cell `count` (empty when it had none).
    pub fn output(&self, count: u64) -> String {
        self.outputs.get(&count).cloned().unwrap_or_default()
    }

    /// The last `n` cells.
    pub fn tail(&self, n: usize) -> Vec<(u64, String)> {
        self.cells[self.cells.len().saturating_sub(n)..].to_vec()
    }

    /// Cells with counts in `[start, stop)` (`stop` 0 or negative means to the end).
    pub fn range(&self, start: i64, stop: i64) -> Vec<(u64, String)> {
        self.cells.iter().filter(|(c, _)| (*c as i64) >= start && (stop <= 0 || (*c as i64) < stop)).cloned().collect()
    }

    /// Cells matching a glob `pattern` (`*` any text, `?` one character), the last `n`, optionally unique.
    pub fn search(&self, pattern: &str, n: usize, unique: bool) -> Vec<(u64, String)> {
        let mut found: Vec<(u64, String)> =
            self.cells.iter().filter(|(_, code)| glob(pattern, code)).cloned().collect();
        if unique {
            let mut seen = std::collections::HashSet::new();
            found = found.into_iter().rev().filter(|(_, code)| seen.insert(code.clone())).collect();
            found.reverse();
        }
        let skip = found.len().saturating_sub(n.max(1));
        found.split_off(skip)
    }
}

/// Glob match with `*` and `?`.
fn glob(pattern: &str, text: &str) -> bool {
    let p: Vec<char> = pattern.chars().collect();
    let t: Vec<char> = text.chars().collect();
    let (mut pi, mut ti, mut star, mut mark) = (0, 0, None, 0);
    while ti < t.len() {
        if pi < p.len() && p[pi] == '*' {
            star = Some(pi);
            mark = ti;
            pi += 1;
        } else if pi < p.len() && (p[pi] == '?' || p[pi] == t[ti]) {
            pi += 1;
            ti += 1;
        } else if let Some(s) = star {
            pi = s + 1;
            mark += 1;
            ti = mark;
        } else {
            return false;
        }
    }
    while pi < p.len() && p[pi] == '*' {
        pi += 1;
    }
    pi == p.len()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn access_types() {
        let mut h = History::default();
        for (i, code) in ["let a = 1;", "a + 1", "fit(&f, &s)", "a + 2"].iter().enumerate() {
            h.push(i as u64 + 1, code);
        }
        assert_eq!(h.tail(2).len(), 2);
        assert_eq!(h.range(2, 4).iter().map(|c| c.0).collect::<Vec<_>>(), vec![2, 3]);
        assert_eq!(h.search("a + *", 10, false).len(), 2);
        assert_eq!(h.search("fit*", 10, false)[0].0, 3);
        // A `*` in the pattern is a wildcard even where the text has a literal `*`.
        h.push(5, "6 * 7");
        assert_eq!(h.search("6 *", 10, false).len(), 1);
    }
}
