//! Small text helpers shared by reports and headers.

/// A number with up to six decimals and no trailing zeros: `2`, `0.5`, `0.333333`.
pub fn compact(v: f64) -> String {
    if !v.is_finite() {
        return v.to_string();
    }
    let s = format!("{v:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        String::from("0")
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::compact;

    #[test]
    fn trims_trailing_zeros() {
        assert_eq!(compact(0.0), "0");
        assert_eq!(compact(2.0), "2");
        assert_eq!(compact(0.5), "0.5");
        assert_eq!(compact(24.0), "24");
        assert_eq!(compact(1.0 / 3.0), "0.333333");
        assert_eq!(compact(-0.0000001), "0");
        assert_eq!(compact(100.0), "100");
    }
}
