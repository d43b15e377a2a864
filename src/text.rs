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

/// A number as a user would type it back: the shortest text that reads as the same value, in
/// exponent form below 1e-4 and from 1e15 up (`2e-10`, not `0.0000000002`).
pub fn as_typed(v: f64) -> String {
    let a = v.abs();
    if v.is_finite() && a != 0.0 && !(1e-4..1e15).contains(&a) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

#[cfg(test)]
mod tests {
    use super::{as_typed, compact};

    #[test]
    fn numbers_read_back_as_typed() {
        assert_eq!(as_typed(2e-10), "2e-10");
        assert_eq!(as_typed(-5.5e-7), "-5.5e-7");
        assert_eq!(as_typed(450.0), "450");
        assert_eq!(as_typed(0.05), "0.05");
        assert_eq!(as_typed(0.0), "0");
        assert_eq!(as_typed(1.5e20), "1.5e20");
        assert_eq!(as_typed(f64::NAN), "NaN");
        for v in [2e-10, 1.0 / 3.0, 123456.789, 7e-5, 3e16] {
            assert_eq!(as_typed(v).parse::<f64>(), Ok(v));
        }
    }

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
