//! One-dimensional root finding for `--fit`: find the param value at which the deterministic
//! level equals the observation.
//!
//! The search runs in log space (params are positive and span decades): first a bracket is
//! found by stepping outward from the current value by factors of `step`, then Brent's method
//! (Brent 1973, "Algorithms for Minimization without Derivatives", ch. 4 \[M\]) narrows it:
//! inverse quadratic interpolation or secant steps, falling back to bisection whenever they
//! would leave the bracket or converge too slowly.

/// Why no root was found.
#[derive(Clone, Debug, PartialEq)]
pub enum FitFailure {
    /// g keeps one sign over the whole searched range [lo, hi] (in the param's own units).
    NoSignChange { lo: f64, hi: f64 },
    /// g could not be evaluated at some point.
    Failed { at: f64, why: String },
}

impl FitFailure {
    /// The failure in words, with each param value written by `value` (in the file's unit).
    pub fn describe(&self, value: &dyn Fn(f64) -> String) -> String {
        match self {
            FitFailure::NoSignChange { lo, hi } => format!(
                "no value between {} and {} gives the observed level",
                value(*lo),
                value(*hi)
            ),
            FitFailure::Failed { at, why } => {
                format!(
                    "the steady state could not be found at {}: {why}",
                    value(*at)
                )
            }
        }
    }
}

/// Finds p > 0 with g(p) = 0, searching from `start` outward over at most `decades` decades
/// each way. `g` may fail (no steady state there); a failure ends the search.
pub fn root_in_log_space(
    g: &mut dyn FnMut(f64) -> Result<f64, String>,
    start: f64,
    decades: f64,
    rel_tol: f64,
) -> Result<f64, FitFailure> {
    let mut eval = |u: f64| -> Result<f64, FitFailure> {
        let p = u.exp();
        g(p).map_err(|why| FitFailure::Failed { at: p, why })
    };
    let u0 = start.ln();
    let f0 = eval(u0)?;
    if f0 == 0.0 {
        return Ok(start);
    }
    let step = std::f64::consts::LN_10 / 2.0;
    let steps = (decades * 2.0).round() as i32;
    let differs = |f: f64| f.signum() != f0.signum();
    let (mut lo, mut flo, mut hi, mut fhi) = (u0, f0, u0, f0);
    for k in 1..=steps {
        let uh = u0 + k as f64 * step;
        let fh = eval(uh)?;
        if differs(fh) {
            return brent(&mut eval, hi, fhi, uh, fh, rel_tol).map(f64::exp);
        }
        (hi, fhi) = (uh, fh);
        let ul = u0 - k as f64 * step;
        let fl = eval(ul)?;
        if differs(fl) {
            return brent(&mut eval, ul, fl, lo, flo, rel_tol).map(f64::exp);
        }
        (lo, flo) = (ul, fl);
    }
    Err(FitFailure::NoSignChange {
        lo: lo.exp(),
        hi: hi.exp(),
    })
}

fn brent(
    f: &mut dyn FnMut(f64) -> Result<f64, FitFailure>,
    mut a: f64,
    mut fa: f64,
    mut b: f64,
    mut fb: f64,
    rel_tol: f64,
) -> Result<f64, FitFailure> {
    if fa.abs() < fb.abs() {
        std::mem::swap(&mut a, &mut b);
        std::mem::swap(&mut fa, &mut fb);
    }
    let (mut c, mut fc) = (a, fa);
    let mut d = b - a;
    let mut e = d;
    for _ in 0..200 {
        if fb == 0.0 {
            return Ok(b);
        }
        if fb.signum() == fc.signum() {
            (c, fc) = (a, fa);
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            (a, fa) = (b, fb);
            (b, fb) = (c, fc);
            (c, fc) = (a, fa);
        }
        // In log space an absolute tolerance on u is a relative one on p.
        let tol = 0.5 * rel_tol + 2.0 * f64::EPSILON * b.abs();
        let m = 0.5 * (c - b);
        if m.abs() <= tol {
            return Ok(b);
        }
        if e.abs() >= tol && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        } else {
            d = m;
            e = m;
        }
        (a, fa) = (b, fb);
        b += if d.abs() > tol { d } else { tol * m.signum() };
        fb = f(b)?;
    }
    Ok(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Known roots of elementary functions (common practice): p² = 2e-6 at p = √2·1e-3.
    #[test]
    fn finds_known_roots() {
        let mut g = |p: f64| Ok(p * p - 2e-6);
        let r = root_in_log_space(&mut g, 1.0, 6.0, 1e-12).unwrap();
        assert!((r - 2f64.sqrt() * 1e-3).abs() < 1e-12);
        // Michaelis–Menten level S* = K·v/(V − v) solved for K at S* = 3, v = 1, V = 4: K = 9.
        let mut g = |k: f64| Ok(k * 1.0 / (4.0 - 1.0) - 3.0);
        let r = root_in_log_space(&mut g, 0.01, 6.0, 1e-12).unwrap();
        assert!((r - 9.0).abs() < 1e-9);
    }

    #[test]
    fn reports_when_no_value_can() {
        let mut g = |p: f64| Ok(1.0 + p);
        match root_in_log_space(&mut g, 1.0, 3.0, 1e-10) {
            Err(FitFailure::NoSignChange { lo, hi }) => {
                assert!((lo - 1e-3).abs() < 1e-12 && (hi - 1e3).abs() < 1e-9)
            }
            other => panic!("{other:?}"),
        }
        let mut g = |p: f64| {
            if p > 10.0 {
                Err("no steady state".into())
            } else {
                Ok(1.0)
            }
        };
        assert!(matches!(
            root_in_log_space(&mut g, 1.0, 3.0, 1e-10),
            Err(FitFailure::Failed { .. })
        ));
    }
}
