//! Numbers as people read them: one place for every message, table and plot label.
//!
//! - [`short`]: four significant digits, for tables and plot ticks (`1235`, `0.001661`,
//!   `6.022e8`).
//! - [`plain`]: up to twelve significant digits with trailing zeros dropped, for values a user
//!   wrote or must copy back (messages, constants): f64 rounding noise such as
//!   24921.999999999996 reads 24922, and 1e300 reads `1e300`, not 301 digits.
//!
//! - [`round_trip`]: the shortest text that reads back as the same f64, in exponent notation
//!   outside [1e-4, 1e16), for messages that must show a value exactly (`3.0000000000000004
//!   is not a whole number`), never the 309 digits Rust's `{}` gives 1e-308.
//!
//! - [`csv`]: the value rounded to fifteen significant digits (the most an f64 always keeps,
//!   IEEE 754-2019 §3.6 \[M\]) in the shortest text that reads back as it, for files that
//!   programs load: 24921.999999999996 reads 24922, 0.1 + 0.2 reads 0.3.
//!
//! `short` and `plain` switch to exponent notation outside [1e-3, 1e6) (`short`) or [1e-4, 1e9) (`plain`),
//! and write NaN and infinities as `nan`, `inf` and `-inf`.

/// Four significant digits (see the module docs).
pub fn short(x: f64) -> String {
    sig(x, 4, 1e-3, 1e6)
}

/// Up to twelve significant digits (see the module docs).
pub fn plain(x: f64) -> String {
    sig(x, 12, 1e-4, 1e9)
}

/// The shortest text that reads back as `x` (see the module docs): Rust's `{}` and `{:e}`
/// both print the shortest round-trip digits (Steele & White / Ryū, common practice); this
/// picks the form, so no message spells out hundreds of zeros.
pub fn round_trip(x: f64) -> String {
    if x.is_nan() {
        return "nan".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "inf".into() } else { "-inf".into() };
    }
    if x == 0.0 || (1e-4..1e16).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// Fifteen significant digits in the shortest text that reads back (see the module docs);
/// exponent notation outside [1e-5, 1e15); `NaN`, `inf`, `-inf` as pandas and R read them.
pub fn csv(x: f64) -> String {
    if x.is_nan() {
        return "NaN".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "Inf".into() } else { "-Inf".into() };
    }
    if x == 0.0 {
        return "0".into();
    }
    let y: f64 = format!("{x:.14e}").parse().unwrap_or(x);
    if (1e-5..1e15).contains(&y.abs()) {
        format!("{y}")
    } else {
        format!("{y:e}")
    }
}

fn sig(x: f64, digits: usize, lo: f64, hi: f64) -> String {
    if x.is_nan() {
        return "nan".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "inf".into() } else { "-inf".into() };
    }
    if x == 0.0 {
        return "0".into();
    }
    let a = x.abs();
    if !(lo..hi).contains(&a) {
        let s = format!("{:.*e}", digits - 1, x);
        let (mantissa, exp) = s.split_once('e').unwrap_or((&s, "0"));
        return format!("{}e{exp}", trim(mantissa));
    }
    let decimals = (digits as i32 - 1 - a.log10().floor() as i32).max(0) as usize;
    let s = format!("{x:.decimals$}");
    // Rounding can carry into a new leading digit (9999.6 → 10000): still correct.
    trim(&s).to_string()
}

/// Drops trailing zeros after a decimal point, and the point itself.
fn trim(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_numbers() {
        assert_eq!(short(1234.5678), "1235");
        assert_eq!(short(0.5), "0.5");
        assert_eq!(short(2.0), "2");
        assert_eq!(short(1.660539e-3), "0.001661");
        assert_eq!(short(6.02214076e8), "6.022e8");
        assert_eq!(short(-2.5e-7), "-2.5e-7");
        assert_eq!(short(f64::NAN), "nan");
    }

    #[test]
    fn plain_numbers_hide_rounding_noise_and_huge_digit_strings() {
        assert_eq!(plain(24921.999999999996), "24922");
        assert_eq!(plain(0.1 + 0.2), "0.3");
        assert_eq!(plain(1e300), "1e300");
        assert_eq!(plain(1.79e308), "1.79e308");
        assert_eq!(plain(6.02214076e23), "6.02214076e23");
        assert_eq!(plain(602214076.0), "602214076");
        assert_eq!(plain(1.5e-9), "1.5e-9");
        assert_eq!(plain(f64::INFINITY), "inf");
    }

    #[test]
    fn round_trip_numbers_read_back_exactly_and_stay_short() {
        assert_eq!(round_trip(1e-308), "1e-308");
        assert_eq!(round_trip(1.79e308), "1.79e308");
        assert_eq!(round_trip(3.0000000000000004), "3.0000000000000004");
        assert_eq!(round_trip(0.5), "0.5");
        assert_eq!(round_trip(-0.0), "-0");
        assert_eq!(round_trip(5e-324), "5e-324");
        for x in [
            std::f64::consts::PI * 1e200,
            1.0 / 3.0,
            123456789012345680.0,
            5e-324,
        ] {
            let s = round_trip(x);
            assert_eq!(s.parse::<f64>().unwrap(), x, "{s}");
            assert!(s.len() <= 24, "{s}");
        }
    }

    #[test]
    fn csv_numbers_read_back_without_rounding_noise() {
        assert_eq!(csv(24921.999999999996), "24922");
        assert_eq!(csv(0.1 + 0.2), "0.3");
        assert_eq!(csv(30111.0), "30111");
        assert_eq!(csv(9.999766262520905), "9.99976626252091");
        assert_eq!(csv(1.5e-20), "1.5e-20");
        assert_eq!(csv(f64::NAN), "NaN");
        // Fifteen digits read back within half a unit in the fifteenth place.
        for x in [
            std::f64::consts::PI,
            6.02214076e23,
            1.0 / 3.0,
            2.0f64.sqrt() * 1e-9,
        ] {
            let y: f64 = csv(x).parse().unwrap();
            assert!(((y - x) / x).abs() <= 5e-15, "{x} -> {y}");
        }
    }
}
