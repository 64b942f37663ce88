//! The rounding rules of `spec/hashing-and-composition.md` 2.5 and 4.5:
//! printed errors are rounded **up**, lengths and budgets **down** (a budget
//! is an upper limit, an error a guarantee).
//!
//! Lengths are integers and are floored where they are computed; this module
//! rounds real numbers for display, to a number of significant digits.

/// Relative slack that absorbs the floating-point noise of a budget
/// computation before it is rounded down (so that `1e-9 - 2e-10` prints as
/// `8.000e-10`, its exact value, and not `7.999e-10`). It is far below the
/// four printed digits. Errors rounded up get no slack.
const BUDGET_SLACK: f64 = 1e-9;

/// `x` rounded **up** to `digits` significant digits (`digits >= 1`), as the
/// decimal string Rust prints with `{:.Ne}` (e.g. `9.748e-13`).
///
/// The result, read back as a number, is never below `x`
/// (`spec/hashing-and-composition.md` 2.5: printed errors are rounded up).
pub fn up(x: f64, digits: usize) -> String {
    round(x, digits, true)
}

/// `x` rounded **down** to `digits` significant digits, for budgets and
/// other upper limits (`spec/hashing-and-composition.md` 4.5), after a
/// relative slack of `1e-9` that absorbs floating-point noise.
pub fn down(x: f64, digits: usize) -> String {
    round(x * (1.0 + BUDGET_SLACK), digits, false)
}

/// [`up`] with four significant digits, the precision of the spec's tables.
pub fn up4(x: f64) -> String {
    up(x, 4)
}

/// [`down`] with four significant digits.
pub fn down4(x: f64) -> String {
    down(x, 4)
}

/// The value of [`up`] as a number (never below `x`).
pub fn up_value(x: f64, digits: usize) -> f64 {
    up(x, digits).parse().unwrap_or(x)
}

fn round(x: f64, digits: usize, upward: bool) -> String {
    let digits = digits.max(1);
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return format!("{:.*e}", digits - 1, 0.0);
    }
    let nearest = format!("{:.*e}", digits - 1, x);
    let back: f64 = nearest.parse().unwrap_or(x);
    let wrong_side = if upward { back < x } else { back > x };
    if !wrong_side {
        return nearest;
    }
    step(&nearest, upward)
}

/// Moves the last printed digit of `s` (format `d.ddde[-]N`) one unit up
/// (away from zero for positive numbers) or down.
fn step(s: &str, upward: bool) -> String {
    let (mant, exp) = s.split_once('e').unwrap_or((s, "0"));
    let negative = mant.starts_with('-');
    let mant = mant.trim_start_matches('-');
    let mut exp: i32 = exp.parse().unwrap_or(0);
    let frac_digits = mant.split_once('.').map(|(_, f)| f.len()).unwrap_or(0);
    let digits: String = mant.chars().filter(|c| *c != '.').collect();
    let mut v: u64 = digits.parse().unwrap_or(0);
    // For a negative number "up" means towards zero in magnitude.
    let grow = upward != negative;
    let ten = 10u64.pow(frac_digits as u32);
    if grow {
        v += 1;
        if v == 10 * ten {
            v = ten;
            exp += 1;
        }
    } else {
        v -= 1;
        if v < ten {
            // 1.000 -> 0.9999: one digit lower.
            v = 10 * ten - 1;
            exp -= 1;
        }
    }
    let s = v.to_string();
    let (head, tail) = s.split_at(1);
    let sign = if negative { "-" } else { "" };
    if tail.is_empty() {
        format!("{sign}{head}e{exp}")
    } else {
        format!("{sign}{head}.{tail}e{exp}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Values from the check tables of spec/hashing-and-composition.md
    // (Tables 1, 5 and 7), printed to four digits.
    #[test]
    fn rounding_matches_the_spec_tables() {
        // Table 1: eps_ext(838860.8, 838781) = 2^-39.9 = 9.7478...e-13.
        assert_eq!(up4(2f64.powf(-39.9)), "9.748e-13");
        // Table 7: 1e-6 - 2e-10, rounded down.
        assert_eq!(down4(1e-6 - 2e-10), "9.998e-7");
        // Table 5: 1e-9 - 2e-10 = 8e-10 exactly in real arithmetic.
        assert_eq!(down4(1e-6 / 1000.0 - 2e-10), "8.000e-10");
        // Table 3: an error of exactly 0.25 stays 0.25.
        assert_eq!(up4(0.25), "2.500e-1");
    }

    #[test]
    fn up_never_below_and_down_never_above() {
        for &x in &[1.23456e-7, 9.99999e-3, 0.123449, 7.0001e-21, 2.0097e-10] {
            let u: f64 = up4(x).parse().unwrap();
            let d: f64 = round(x, 4, false).parse().unwrap();
            assert!(u >= x, "{x} up {u}");
            assert!(d <= x, "{x} down {d}");
        }
        assert_eq!(up4(9.99951e-3), "1.000e-2");
        assert_eq!(round(1.00001, 4, false), "1.000e0");
        assert_eq!(step("1.000e0", false), "9.999e-1");
    }
}
