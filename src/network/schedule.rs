//! What happens to a network at given times or when a condition becomes true: scheduled doses
//! and triggered events, as the compiler leaves them for every engine.
//!
//! - A [`Dose`] adds a fixed amount to a species at the times of a [`TimeSeq`] (a bolus, the
//!   pharmacologist's instantaneous input); an infusion is not here: it is a zero-order
//!   reaction whose law is switched on over a window of time.
//! - An [`Event`] has SBML's general form (SBML Level 3 Version 2 core, §4.12 \[M\]): a trigger
//!   that fires on its transition from false to true, an optional delay, an optional priority,
//!   persistence, the trigger's value before t = 0, and assignments applied together, their
//!   values taken at trigger time or at execution. A `.crn` `when` line is the special case
//!   without delay or priority, values at trigger time, and an initial value that keeps a
//!   condition already true at t = 0 from firing unless the line says `at start`.
//!
//! Programs here read species as counts scaled to their reading (see
//! [`super::expr::Resolved`]); a value assigned to a species is turned into a count with
//! [`Assignment::to_count`].

use super::expr::Law;
use crate::error::Span;

/// Times start, start + period, …: `count` of them (1 without a period).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimeSeq {
    pub start: f64,
    pub period: Option<f64>,
    pub count: u64,
}

impl TimeSeq {
    /// The k-th time (k < count).
    pub fn time(&self, k: u64) -> f64 {
        match self.period {
            Some(p) => self.start + k as f64 * p,
            None => self.start,
        }
    }

    /// Index of the first time at or after `t` (count if none).
    pub fn first_at_or_after(&self, t: f64) -> u64 {
        if t <= self.start {
            return 0;
        }
        match self.period {
            None => 1,
            Some(p) => {
                let mut k = ((t - self.start) / p).floor().max(0.0) as u64;
                while k < self.count && self.time(k) < t {
                    k += 1;
                }
                k.min(self.count)
            }
        }
    }

    /// The last time (the start when count is 0 or 1).
    pub fn last(&self) -> f64 {
        self.time(self.count.saturating_sub(1))
    }
}

/// A scheduled bolus: `count` molecules (and `amount` in the network's amount unit) added to
/// `species` at each time of `times`.
#[derive(Clone, Debug, PartialEq)]
pub struct Dose {
    pub species: usize,
    /// Molecules per dose (rounded to whole molecules).
    pub count: i64,
    /// The same in the network's amount unit, real-valued (what the ODE engine adds).
    pub amount: f64,
    pub times: TimeSeq,
    pub span: Span,
}

/// A zero-order input over a window of time (`infuse`): reaction `reaction` makes `species`
/// at `rate` molecules per second for `from` ≤ t < `to`.
#[derive(Clone, Debug, PartialEq)]
pub struct Infusion {
    pub reaction: usize,
    pub species: usize,
    pub rate: f64,
    pub from: f64,
    pub to: f64,
    pub span: Span,
}

/// What an event assignment writes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Target {
    Species(usize),
    /// A param (it then varies).
    Param(usize),
}

/// `target = value` or `target += value`.
#[derive(Clone, Debug, PartialEq)]
pub struct Assignment {
    pub target: Target,
    /// `+=` rather than `=`.
    pub add: bool,
    pub value: Law,
    /// For a species target, counts per unit of `value` (Ω_c for a concentration,
    /// count_per_amount for an amount); 1 for a param.
    pub to_count: f64,
    pub span: Span,
}

/// A triggered event (SBML's form; see the module docs).
#[derive(Clone, Debug, PartialEq)]
pub struct Event {
    /// Its name in reports: the SBML id, or `when_<line>` for a `.crn` line.
    pub label: String,
    /// A truth-valued program (non-zero is true).
    pub trigger: Law,
    /// The trigger's value just before t = 0 (SBML `initialValue`): with `true`, a
    /// condition already true at t = 0 does not fire then.
    pub initial_value: bool,
    /// Whether a pending (delayed) execution survives its trigger turning false.
    pub persistent: bool,
    /// Time from trigger to execution (seconds), evaluated at trigger time.
    pub delay: Option<Law>,
    /// Events executing at one instant run in decreasing priority (ties in declaration
    /// order).
    pub priority: Option<Law>,
    /// Assignment values computed when the trigger fires (else when the event executes).
    pub values_at_trigger: bool,
    pub assignments: Vec<Assignment>,
    pub span: Span,
}

impl Event {
    /// Whether the trigger reads species (so it must be checked after every reaction event).
    pub fn reads_state(&self) -> bool {
        !self.trigger.species.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sequences() {
        let s = TimeSeq {
            start: 3600.0,
            period: Some(86400.0),
            count: 7,
        };
        assert_eq!(s.time(6), 3600.0 + 6.0 * 86400.0);
        assert_eq!(s.first_at_or_after(0.0), 0);
        assert_eq!(s.first_at_or_after(3600.0), 0);
        assert_eq!(s.first_at_or_after(3601.0), 1);
        assert_eq!(s.first_at_or_after(1e9), 7);
        assert_eq!(s.last(), s.time(6));
        let one = TimeSeq {
            start: 5.0,
            period: None,
            count: 1,
        };
        assert_eq!(
            (one.first_at_or_after(5.0), one.first_at_or_after(6.0)),
            (0, 1)
        );
    }
}
