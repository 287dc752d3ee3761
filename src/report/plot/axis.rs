//! Axes: the mapping from data to pixels (linear or log₁₀), round ticks and their labels.

use crate::numbers::short;

/// What an axis shows and how.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct AxisSpec {
    /// The axis title, with its unit (e.g. `time (min)`).
    pub label: String,
    /// Logarithmic (base 10); values ≤ 0 are not drawn on it.
    pub log: bool,
    /// The range starts at 0 when every value is ≥ 0 (counts, fluxes).
    pub from_zero: bool,
}

/// A mapping from the data range [lo, hi] to the pixel range [from, to] (`to < from` for a
/// y axis, which grows upwards).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Scale {
    pub lo: f64,
    pub hi: f64,
    pub log: bool,
    pub from: f64,
    pub to: f64,
}

impl Scale {
    /// The scale of `spec` over `values` (non-finite values, and values ≤ 0 on a log axis, are
    /// left out), padded by `pad` of its width on each side.
    pub fn fit(
        spec: &AxisSpec,
        values: impl Iterator<Item = f64>,
        pad: f64,
        from: f64,
        to: f64,
    ) -> Scale {
        let (lo, hi) = domain(values, spec.log, spec.from_zero, pad);
        Scale {
            lo,
            hi,
            log: spec.log,
            from,
            to,
        }
    }

    /// The pixel of `v`: `None` when `v` is not finite, or ≤ 0 on a log axis.
    pub fn px(&self, v: f64) -> Option<f64> {
        let (a, b, x) = if self.log {
            if v.is_nan() || v <= 0.0 {
                return None;
            }
            (self.lo.log10(), self.hi.log10(), v.log10())
        } else {
            (self.lo, self.hi, v)
        };
        let p = self.from + (x - a) / (b - a) * (self.to - self.from);
        p.is_finite().then_some(p)
    }

    /// The pixel of `v` held inside the scale's range (an interval's end beyond the axis, or
    /// ≤ 0 on a log axis, is drawn at the edge).
    pub fn px_clamped(&self, v: f64) -> Option<f64> {
        if v.is_nan() {
            return None;
        }
        let v = if self.log && v <= 0.0 {
            self.lo
        } else {
            v.clamp(self.lo, self.hi)
        };
        self.px(v)
    }

    /// Round tick values inside the range: on a log axis the powers of ten (every k-th when
    /// there are many), with 2× and 5× added when fewer than three show; otherwise
    /// 1, 2 or 5 times a power of ten apart.
    pub fn ticks(&self) -> Vec<f64> {
        if self.log {
            let inside = |v: &f64| *v >= self.lo * (1.0 - 1e-9) && *v <= self.hi * (1.0 + 1e-9);
            let a = self.lo.log10().floor() as i32;
            let b = self.hi.log10().ceil() as i32;
            let decades: Vec<f64> = (a..=b).map(|k| 10f64.powi(k)).filter(inside).collect();
            if decades.len() >= 3 {
                let stride = decades.len().div_ceil(8);
                return decades.into_iter().step_by(stride).collect();
            }
            let more: Vec<f64> = (a..=b)
                .flat_map(|k| [1.0, 2.0, 5.0].map(|m| m * 10f64.powi(k)))
                .filter(inside)
                .collect();
            if more.len() >= 2 {
                return more;
            }
        }
        nice_ticks(self.lo, self.hi, 5)
    }
}

/// The data range of `values` widened to a drawable one: padded by `pad` of its width (in
/// log₁₀ on a log axis), from 0 when asked and every value is ≥ 0, and opened up around a
/// single value. (0, 1) — or (1, 10) on a log axis — when there is no value.
pub fn domain(
    values: impl Iterator<Item = f64>,
    log: bool,
    from_zero: bool,
    pad: f64,
) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite() && (!log || *v > 0.0))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if !lo.is_finite() {
        return if log { (1.0, 10.0) } else { (0.0, 1.0) };
    }
    if log {
        let (a, b) = (lo.log10(), hi.log10());
        let w = if b > a { (b - a) * pad } else { 0.5 };
        return (10f64.powf(a - w), 10f64.powf(b + w));
    }
    if from_zero && lo >= 0.0 {
        return (0.0, if hi > 0.0 { hi * (1.0 + pad) } else { 1.0 });
    }
    if hi > lo {
        let w = (hi - lo) * pad;
        (lo - w, hi + w)
    } else {
        let w = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        (lo - w, hi + w)
    }
}

/// About `n` round ticks inside [lo, hi] (at most n + 2): multiples of the finest step of 1, 2
/// or 5 times a power of ten that gives no more (common practice). Ticks are computed as
/// k·step, so 0 is exactly 0.
pub fn nice_ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    let raw = (hi - lo) / n.max(1) as f64;
    if !(raw > 0.0 && raw.is_finite()) {
        return if lo.is_finite() { vec![lo] } else { Vec::new() };
    }
    let mag = 10f64.powf(raw.log10().floor());
    let count = |step: f64| ((hi / step + 1e-9).floor() - (lo / step - 1e-9).ceil()) as usize + 1;
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|&s| count(s) <= n + 2)
        .unwrap_or(10.0 * mag);
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A tick label: four significant digits at most ([`short`]), so that 0.30000000000000004
/// reads `0.3` and 1e6 reads `1e6`.
pub fn label(v: f64) -> String {
    short(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scale(lo: f64, hi: f64, log: bool) -> Scale {
        Scale {
            lo,
            hi,
            log,
            from: 0.0,
            to: 100.0,
        }
    }

    // Round ticks are multiples of 1, 2 or 5 × 10^k (common practice).
    #[test]
    fn linear_ticks_are_round() {
        assert_eq!(
            nice_ticks(0.0, 10.0, 5),
            vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
        let labels: Vec<String> = nice_ticks(-0.3, 0.32, 5)
            .iter()
            .map(|&v| label(v))
            .collect();
        assert_eq!(labels, ["-0.3", "-0.2", "-0.1", "0", "0.1", "0.2", "0.3"]);
        assert_eq!(
            nice_ticks(6.0, 136.0, 5),
            vec![20.0, 40.0, 60.0, 80.0, 100.0, 120.0]
        );
        // 3 × 0.1 is 0.30000000000000004 in binary floating point; its label reads 0.3.
        let t = nice_ticks(0.0, 0.35, 5);
        let labels: Vec<String> = t.iter().map(|&v| label(v)).collect();
        assert_eq!(labels, ["0", "0.1", "0.2", "0.3"]);
        assert_eq!(nice_ticks(2.0e6, 9.5e6, 5), vec![2e6, 4e6, 6e6, 8e6]);
        assert_eq!(label(2e6), "2e6");
    }

    #[test]
    fn log_ticks_are_decades_or_their_multiples() {
        assert_eq!(
            scale(1.0, 1000.0, true).ticks(),
            vec![1.0, 10.0, 100.0, 1000.0]
        );
        assert_eq!(scale(3.0, 40.0, true).ticks(), vec![5.0, 10.0, 20.0]);
        assert_eq!(
            scale(30.0, 2000.0, true).ticks(),
            vec![50.0, 100.0, 200.0, 500.0, 1000.0, 2000.0]
        );
        let many = scale(1e-12, 1e12, true).ticks();
        assert!(many.len() <= 9 && many.len() >= 5, "{many:?}");
        let narrow = scale(1.1, 1.3, true).ticks();
        assert!(narrow.len() >= 2 && narrow.iter().all(|&v| (1.1..=1.3).contains(&v)));
    }

    #[test]
    fn mapping_is_linear_in_the_axis_quantity() {
        let s = scale(10.0, 1000.0, true);
        assert!(
            (s.px(100.0).unwrap() - 50.0).abs() < 1e-9,
            "100 midway on log"
        );
        assert_eq!(s.px(0.0), None);
        assert_eq!(s.px(-1.0), None);
        assert_eq!(s.px_clamped(0.0), Some(0.0));
        let y = Scale {
            lo: 0.0,
            hi: 4.0,
            log: false,
            from: 400.0,
            to: 0.0,
        };
        assert_eq!(y.px(1.0), Some(300.0));
        assert_eq!(y.px(f64::NAN), None);
        assert_eq!(y.px_clamped(9.0), Some(0.0));
    }

    #[test]
    fn domains_are_padded_and_never_empty() {
        assert_eq!(domain([].into_iter(), false, false, 0.05), (0.0, 1.0));
        assert_eq!(
            domain([f64::NAN].into_iter(), true, false, 0.05),
            (1.0, 10.0)
        );
        let (lo, hi) = domain([5.0].into_iter(), false, false, 0.05);
        assert!(lo < 5.0 && hi > 5.0);
        let (lo, hi) = domain([2.0, 12.0].into_iter(), false, true, 0.05);
        assert!(lo == 0.0 && (hi - 12.6).abs() < 1e-12);
        let (lo, _) = domain([0.0, 10.0].into_iter(), false, true, 0.05);
        assert_eq!(lo, 0.0);
        let (lo, _) = domain([-1.0, 10.0].into_iter(), false, true, 0.05);
        assert!(lo < -1.0, "a negative value keeps its room below zero");
        let (lo, hi) = domain([10.0, 1000.0, -3.0].into_iter(), true, false, 0.0);
        assert!((lo - 10.0).abs() < 1e-9 && (hi - 1000.0).abs() < 1e-6);
    }
}
