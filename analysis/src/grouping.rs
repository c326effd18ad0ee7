//! Digit grouping of whole numbers (`1,234,567`), shared by chart ticks
//! ([`crate::plot`]) and reports ([`crate::render`]); it sits below both so
//! that a count reads the same on a chart axis and in a table.

/// `n` with a comma between each group of three digits, counted from the
/// right (`2988` → `2,988`). The comma is the grouping mark of the reports'
/// English text; no locale is consulted.
pub fn group_digits(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::group_digits;

    #[test]
    fn groups_of_three_from_the_right() {
        assert_eq!(group_digits(0), "0");
        assert_eq!(group_digits(999), "999");
        assert_eq!(group_digits(1000), "1,000");
        assert_eq!(group_digits(2988), "2,988");
        assert_eq!(group_digits(1_234_567), "1,234,567");
    }
}
