//! Is a cell complete? A Rust-aware scan of brackets, strings and comments,
//! for the protocol's `is_complete_request`.

/// The scan's verdict.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Completeness {
    /// Ready to run.
    Complete,
    /// More input expected; the indent for the next line.
    Incomplete(String),
    /// Cannot become valid by adding text (e.g. a stray closing bracket).
    Invalid,
}

/// Scans `code` for open brackets, unterminated strings and open block comments.
pub fn check(code: &str) -> Completeness {
    let chars: Vec<char> = code.chars().collect();
    let mut stack: Vec<char> = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let next = chars.get(i + 1).copied();
        match c {
            '/' if next == Some('/') => {
                while i < chars.len() && chars[i] != '\n' {
                    i += 1;
                }
                continue;
            }
            '/' if next == Some('*') => {
                let mut depth = 1;
                i += 2;
                while i < chars.len() && depth > 0 {
                    if chars[i] == '/' && chars.get(i + 1) == Some(&'*') {
                        depth += 1;
                        i += 2;
                    } else if chars[i] == '*' && chars.get(i + 1) == Some(&'/') {
                        depth -= 1;
                        i += 2;
                    } else {
                        i += 1;
                    }
                }
                if depth > 0 {
                    return Completeness::Incomplete(indent(stack.len()));
                }
                continue;
            }
            'r' if (next == Some('"') || next == Some('#')) && !is_ident_char(i.checked_sub(1).map(|j| chars[j])) => {
                // Raw string r"..." or r#"..."#.
                let mut j = i + 1;
                let mut hashes = 0;
                while chars.get(j) == Some(&'#') {
                    hashes += 1;
                    j += 1;
                }
                if chars.get(j) != Some(&'"') {
                    i += 1;
                    continue;
                }
                j += 1;
                loop {
                    if j >= chars.len() {
                        return Completeness::Incomplete(String::new());
                    }
                    if chars[j] == '"' && (0..hashes).all(|h| chars.get(j + 1 + h) == Some(&'#')) {
                        i = j + 1 + hashes;
                        break;
                    }
                    j += 1;
                }
                continue;
            }
            '"' => {
                let mut j = i + 1;
                loop {
                    match chars.get(j) {
                        None => return Completeness::Incomplete(String::new()),
                        Some('\\') => j += 2,
                        Some('"') => break,
                        Some(_) => j += 1,
                    }
                }
                i = j + 1;
                continue;
            }
            '\'' => {
                // A char literal ('x', '\n', '\u{1F600}') or a lifetime ('a).
                if next == Some('\\') {
                    let mut j = i + 2;
                    while j < chars.len() && chars[j] != '\'' {
                        j += 1;
                    }
                    i = j + 1;
                    continue;
                }
                if chars.get(i + 2) == Some(&'\'') {
                    i += 3;
                    continue;
                }
                i += 1;
                continue;
            }
            '(' | '[' | '{' => stack.push(c),
            ')' | ']' | '}' => {
                let open = match c {
                    ')' => '(',
                    ']' => '[',
                    _ => '{',
                };
                if stack.pop() != Some(open) {
                    return Completeness::Invalid;
                }
            }
            _ => {}
        }
        i += 1;
    }
    if stack.is_empty() {
        Completeness::Complete
    } else {
        Completeness::Incomplete(indent(stack.len()))
    }
}

fn is_ident_char(c: Option<char>) -> bool {
    c.is_some_and(|c| c.is_alphanumeric() || c == '_')
}

fn indent(depth: usize) -> String {
    "    ".repeat(depth)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdicts() {
        assert_eq!(check("let x = 1;"), Completeness::Complete);
        assert_eq!(check("fn f() {"), Completeness::Incomplete("    ".into()));
        assert_eq!(check("let v = vec![(1, 2"), Completeness::Incomplete("        ".into()));
        assert_eq!(check("let s = \"open"), Completeness::Incomplete(String::new()));
        assert_eq!(check("let s = \"}\";"), Completeness::Complete);
        assert_eq!(check("/* open"), Completeness::Incomplete(String::new()));
        assert_eq!(check("// { in a comment"), Completeness::Complete);
        assert_eq!(check("let c = '{';"), Completeness::Complete);
        assert_eq!(check("fn f<'a>(x: &'a str) -> &'a str { x }"), Completeness::Complete);
        assert_eq!(check("let r = r#\"a \" { b\"#;"), Completeness::Complete);
        assert_eq!(check("let x = 1; }"), Completeness::Invalid);
        assert_eq!(check("let x = (1];"), Completeness::Invalid);
    }
}
