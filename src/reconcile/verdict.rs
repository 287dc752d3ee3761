//! Verdicts that answer the user's question: does a prediction agree with the ensemble to a
//! practical tolerance, and if not, what explains the difference?
//!
//! With the ensemble's mean flux m̂ and its Student-t 95 % interval [lo, hi], the relative
//! difference of the prediction P is d = (m̂ − P)/P, with interval [(lo − P)/P, (hi − P)/P].
//! Against a tolerance τ (e.g. 0.05):
//!
//! - `agrees` when the interval of d lies inside [−τ, τ];
//! - `differs` when it lies wholly outside;
//! - `undecided` when it straddles ±τ; the replicates that would decide it follow from the
//!   interval's half-width h shrinking as 1/√n: n·(h/δ)², with δ the distance from d to the
//!   nearer of ±τ (common practice for planning a sample size).
//!
//! Beside it, `significant` is the plain statistical test: P lies outside the ensemble's interval
//! (widened by P's own numerical error). A tiny difference can be significant and still agree.
//!
//! Causes carry their expected relative error, so the user sees whether a cause explains the
//! difference; one is named only when the difference matters (the prediction is significantly
//! off, or the verdict is not `agrees`) and its expected size is at least a quarter of the
//! observed difference |d|.

use super::Estimate;
use schemars::JsonSchema;
use serde::Serialize;

/// A named cause is shown when its expected size is at least this share of the difference.
pub const COMPARABLE: f64 = 0.25;

/// Agreement of one prediction with the ensemble, to a tolerance.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    Agrees,
    Differs,
    Undecided,
}

impl Verdict {
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Agrees => "agrees",
            Verdict::Differs => "differs",
            Verdict::Undecided => "undecided",
        }
    }
}

/// What can make a deterministic form miss the ensemble's flux.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum CauseKind {
    /// The Langmuir form counts all ligand as free (sQSSA); bound ligand depletes it. Expected
    /// error: the total-QSSA form's relative difference from the Langmuir form.
    LigandDepletion,
    /// Fluctuations of a low-copy ligand shift the mean of a saturating flux (Jensen's
    /// inequality). Expected error: the second-order term f''(L)·Var(L)/(2f(L)) of the
    /// Langmuir occupancy f(L) = L/(K + L), with the ensemble's variance of the free ligand.
    LowCopyNumber,
    /// The two halves of the measurement window disagree (the ensemble was not stationary).
    /// Expected error: their relative difference.
    NotStationary,
    /// The interval is wider than asked for with `--precision`. Expected error: the interval's
    /// relative half-width.
    TooFewReplicates,
}

/// A cause with its expected size (relative, in the sign convention of d = (m̂ − P)/P).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Cause {
    pub cause: CauseKind,
    pub expected_relative_error: f64,
}

/// One prediction judged against the ensemble.
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Judgement {
    pub verdict: Verdict,
    pub relative_difference: f64,
    pub relative_difference_ci95: [f64; 2],
    /// The prediction lies outside the ensemble's 95 % interval.
    pub significant: bool,
    /// Replicates that would decide an `undecided` verdict (null once decided).
    pub replicates_to_decide: Option<u64>,
    pub causes: Vec<Cause>,
}

/// Judges `prediction` (with absolute numerical error `numerical`) against `ensemble` at
/// relative `tolerance`, naming those of `candidates` that are comparable to the difference.
pub fn judge(
    ensemble: &Estimate,
    prediction: f64,
    numerical: f64,
    tolerance: f64,
    candidates: &[Cause],
) -> Judgement {
    let significant = !ensemble.contains(prediction, numerical);
    let (d, ci) = if prediction != 0.0 {
        let rel = |x: f64| (x - prediction) / prediction;
        let (a, b) = (rel(ensemble.ci95[0]), rel(ensemble.ci95[1]));
        (rel(ensemble.mean), [a.min(b), a.max(b)])
    } else if ensemble.mean == 0.0 && ensemble.ci95 == [0.0, 0.0] {
        (0.0, [0.0, 0.0])
    } else {
        (f64::INFINITY, [f64::NEG_INFINITY, f64::INFINITY])
    };
    let verdict = if ci[0] >= -tolerance && ci[1] <= tolerance {
        Verdict::Agrees
    } else if ci[0] > tolerance || ci[1] < -tolerance {
        Verdict::Differs
    } else {
        Verdict::Undecided
    };
    let replicates_to_decide = (verdict == Verdict::Undecided)
        .then(|| {
            let h = (ci[1] - ci[0]) / 2.0;
            let delta = (d - tolerance).abs().min((d + tolerance).abs());
            let n = ensemble.n as f64 * (h / delta).powi(2);
            (n.is_finite() && n < u64::MAX as f64).then(|| n.ceil() as u64)
        })
        .flatten();
    let matters = significant || verdict != Verdict::Agrees;
    let reference = if d.is_finite() { d.abs() } else { tolerance };
    let causes = candidates
        .iter()
        .filter(|c| {
            matters
                && c.expected_relative_error.is_finite()
                && c.expected_relative_error.abs() >= COMPARABLE * reference
        })
        .copied()
        .collect();
    Judgement {
        verdict,
        relative_difference: d,
        relative_difference_ci95: ci,
        significant,
        replicates_to_decide,
        causes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn est(mean: f64, half: f64, n: u64) -> Estimate {
        Estimate {
            mean,
            stderr: half / 1.96,
            ci95: [mean - half, mean + half],
            n,
        }
    }

    #[test]
    fn three_verdicts_against_a_five_percent_tolerance() {
        // 1 % off, ±0.5 %: agrees, and significant.
        let j = judge(&est(101.0, 0.5, 1000), 100.0, 0.0, 0.05, &[]);
        assert_eq!(j.verdict, Verdict::Agrees);
        assert!(j.significant);
        assert!((j.relative_difference - 0.01).abs() < 1e-12);
        // 10 % off, ±1 %: differs.
        let j = judge(&est(110.0, 1.0, 1000), 100.0, 0.0, 0.05, &[]);
        assert_eq!(j.verdict, Verdict::Differs);
        assert_eq!(j.replicates_to_decide, None);
        // 4 % off, ±3 %: undecided; halving the half-width to 1 % needs 4× the replicates
        // (δ = 1 %, h = 3 % → n·9).
        let j = judge(&est(104.0, 3.0, 100), 100.0, 0.0, 0.05, &[]);
        assert_eq!(j.verdict, Verdict::Undecided);
        assert_eq!(j.replicates_to_decide, Some(900));
    }

    #[test]
    fn causes_are_named_only_when_comparable() {
        let qssa = Cause {
            cause: CauseKind::LigandDepletion,
            expected_relative_error: 0.0099,
        };
        let tiny = Cause {
            cause: CauseKind::LowCopyNumber,
            expected_relative_error: 1e-4,
        };
        // A significant 1 % difference: the 0.99 % cause explains it, the 0.01 % one does not.
        let j = judge(&est(101.0, 0.2, 10_000), 100.0, 0.0, 0.05, &[qssa, tiny]);
        assert_eq!(j.causes, vec![qssa]);
        // Agreement that is not significant names nothing.
        let j = judge(&est(100.1, 0.5, 100), 100.0, 0.0, 0.05, &[qssa]);
        assert!(j.causes.is_empty());
    }
}
