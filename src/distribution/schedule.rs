//! Time forcing inside one projection: doses, rates that step in time (infusions, step laws)
//! and `when` events that reset species.
//!
//! - Between breakpoints every propensity is constant, so the chain is the autonomous one of
//!   that interval: one generator per *phase* (an interval between two edges of the step laws),
//!   evaluated just after the interval's start (conditions at a breakpoint hold at t⁺).
//! - A dose at t is a jump of the whole distribution: P(t) is pushed forward by the map
//!   x ↦ x + dose (then settled, below); the transient solve restarts from the result.
//! - An event whose trigger reads species fires on a rising edge. Every state the projection
//!   keeps has every trigger false, so a transition (or a dose) into a state x′ where a trigger
//!   holds is a rising edge: the events that rose execute at once (declaration order, values at
//!   trigger or at execution as the event says), and the transition leads to the result. This
//!   is exact only when the result has every trigger false again — otherwise the chain would
//!   sit in a state whose next firing depends on the trigger's past (its memory), which the
//!   states alone do not carry; such a network is refused, as are delays, priorities among
//!   several events, events that set params, and triggers or values that read time.
//!
//! The conservation laws kept are those that no dose and no assignment changes.

use super::FspError;
use crate::network::expr::TimeUse;
use crate::network::schedule::Target;
use crate::network::{Kinetics, Network};

/// Most phases (intervals of constant rates) a solve accepts: each holds its own rates.
pub const MAX_PHASES: usize = 64;

/// One interval of constant dynamics: from `start` to the next segment's start.
#[derive(Clone, Debug, PartialEq)]
pub struct Segment {
    pub start: f64,
    /// Index into [`Forcing::phase_times`].
    pub phase: usize,
    /// Doses (indices into `Network::doses`) applied at `start`, in declaration order.
    pub doses: Vec<usize>,
}

/// The time structure of a network over [0, t_end].
#[derive(Clone, Debug)]
pub struct Forcing {
    /// The time at which each phase's propensities are evaluated.
    pub phase_times: Vec<f64>,
    pub segments: Vec<Segment>,
    params: Vec<f64>,
    events: bool,
}

fn refuse(net: &Network, line: u32, what: &str) -> FspError {
    FspError::NotAutonomous(format!(
        "{}:{line}: {what}; the finite state projection cannot follow it exactly (estimate with `copyloop simulate`)",
        net.file
    ))
}

impl Forcing {
    /// The phases and segments of `net` up to `t_end`, or why it cannot be solved exactly.
    pub fn new(net: &Network, t_end: f64) -> Result<Forcing, FspError> {
        let params = net.initial_params();
        for r in &net.reactions {
            if r.time_use() == TimeUse::Smooth {
                return Err(refuse(
                    net,
                    r.span.line,
                    &format!(
                        "step `{}` varies smoothly in time (no interval of constant rates)",
                        r.label
                    ),
                ));
            }
        }
        for e in &net.events {
            let line = e.span.line;
            if e.delay.is_some() {
                return Err(refuse(
                    net,
                    line,
                    &format!("event `{}` has a delay", e.label),
                ));
            }
            if e.priority.is_some() && net.events.len() > 1 {
                return Err(refuse(
                    net,
                    line,
                    &format!("event `{}` has a priority", e.label),
                ));
            }
            if e.trigger.time != TimeUse::None {
                return Err(refuse(
                    net,
                    line,
                    &format!("the trigger of event `{}` reads time", e.label),
                ));
            }
            for a in &e.assignments {
                if let Target::Param(_) = a.target {
                    return Err(refuse(
                        net,
                        a.span.line,
                        &format!(
                            "event `{}` sets a param (the rates would depend on the past)",
                            e.label
                        ),
                    ));
                }
                if a.value.time != TimeUse::None {
                    return Err(refuse(
                        net,
                        a.span.line,
                        &format!("a value event `{}` assigns reads time", e.label),
                    ));
                }
            }
        }
        // Edges of the step laws in (0, t_end).
        let mut edges: Vec<f64> = Vec::new();
        for r in &net.reactions {
            if let Kinetics::Law { law, .. } = &r.kinetics {
                if law.time == TimeUse::Steps {
                    let mut t = law.next_edge(0.0, &params);
                    while t < t_end {
                        edges.push(t);
                        if edges.len() > MAX_PHASES {
                            return Err(refuse(
                                net,
                                r.span.line,
                                &format!(
                                    "step `{}` changes its rate more than {MAX_PHASES} times before the last time",
                                    r.label
                                ),
                            ));
                        }
                        t = law.next_edge(t, &params);
                    }
                }
            }
        }
        edges.sort_by(f64::total_cmp);
        edges.dedup();
        let mut phase_starts = vec![0.0];
        phase_starts.extend(edges.iter().copied().filter(|&t| t > 0.0));
        let phase_times: Vec<f64> = phase_starts
            .iter()
            .map(|&t| crate::network::expr::just_after(t))
            .collect();
        // Segment starts: phase starts and dose times in [0, t_end].
        let mut starts: Vec<f64> = phase_starts.clone();
        for d in &net.doses {
            for k in 0..d.times.count {
                let t = d.times.time(k);
                if t <= t_end {
                    starts.push(t);
                }
            }
        }
        starts.sort_by(f64::total_cmp);
        starts.dedup();
        let segments = starts
            .iter()
            .map(|&start| Segment {
                start,
                phase: phase_starts.partition_point(|&p| p <= start) - 1,
                doses: (0..net.doses.len())
                    .filter(|&i| {
                        let ts = &net.doses[i].times;
                        (0..ts.count).any(|k| ts.time(k) == start)
                    })
                    .collect(),
            })
            .collect();
        Ok(Forcing {
            phase_times,
            segments,
            params,
            events: !net.events.is_empty(),
        })
    }

    /// The autonomous case: one phase, one segment, no jumps.
    pub fn none(net: &Network) -> Forcing {
        Forcing {
            phase_times: vec![0.0],
            segments: vec![Segment {
                start: 0.0,
                phase: 0,
                doses: Vec::new(),
            }],
            params: net.initial_params(),
            events: false,
        }
    }

    pub fn params(&self) -> &[f64] {
        &self.params
    }

    /// The species that a dose or an assignment sets (the conservation laws through them no
    /// longer hold).
    pub fn touched(net: &Network) -> Vec<usize> {
        let mut v: Vec<usize> = net.doses.iter().map(|d| d.species).collect();
        for e in &net.events {
            for a in &e.assignments {
                if let Target::Species(i) = a.target {
                    v.push(i);
                }
            }
        }
        v.sort_unstable();
        v.dedup();
        v
    }

    /// The start state: the initial counts, settled if a trigger holds at t = 0 and its event
    /// fires then (its initial value false).
    pub fn start(&self, net: &Network) -> Result<Vec<i64>, FspError> {
        let mut x = net.initial_state();
        if !self.events {
            return Ok(x);
        }
        for e in &net.events {
            if e.initial_value && self.holds(&e.trigger, &x) {
                return Err(refuse(
                    net,
                    e.span.line,
                    &format!(
                        "the trigger of event `{}` holds at the start without firing (its next firing depends on its memory)",
                        e.label
                    ),
                ));
            }
        }
        self.settle(net, &mut x)?;
        Ok(x)
    }

    fn holds(&self, law: &crate::network::expr::Law, x: &[i64]) -> bool {
        law.eval::<f64>(|i| x[i] as f64, &self.params, 0.0) != 0.0
    }

    /// Executes the events whose triggers hold at `x` (reached from a state where none held):
    /// all at once in declaration order, a non-persistent one only while its trigger still
    /// holds; refuses if a trigger still holds afterwards.
    pub fn settle(&self, net: &Network, x: &mut [i64]) -> Result<(), FspError> {
        if !self.events {
            return Ok(());
        }
        let rose: Vec<usize> = (0..net.events.len())
            .filter(|&e| self.holds(&net.events[e].trigger, x))
            .collect();
        if rose.is_empty() {
            return Ok(());
        }
        let at_trigger: Vec<Vec<f64>> = rose
            .iter()
            .map(|&e| {
                net.events[e]
                    .assignments
                    .iter()
                    .map(|a| a.value.eval::<f64>(|i| x[i] as f64, &self.params, 0.0))
                    .collect()
            })
            .collect();
        for (n, &e) in rose.iter().enumerate() {
            let ev = &net.events[e];
            if n > 0 && !ev.persistent && !self.holds(&ev.trigger, x) {
                continue;
            }
            let values: Vec<f64> = if ev.values_at_trigger {
                at_trigger[n].clone()
            } else {
                ev.assignments
                    .iter()
                    .map(|a| a.value.eval::<f64>(|i| x[i] as f64, &self.params, 0.0))
                    .collect()
            };
            for (a, v) in ev.assignments.iter().zip(values) {
                let Target::Species(i) = a.target else {
                    unreachable!("param targets are refused in Forcing::new")
                };
                let new = if a.add {
                    x[i] as f64 + v * a.to_count
                } else {
                    v * a.to_count
                }
                .round();
                if !(new >= 0.0 && new < crate::network::MAX_COUNT as f64) {
                    return Err(FspError::NotAutonomous(format!(
                        "{}:{}: event `{}` would set `{}` to {new}",
                        net.file, a.span.line, ev.label, net.species[i].name
                    )));
                }
                x[i] = new as i64;
            }
        }
        if let Some(e) = net.events.iter().find(|e| self.holds(&e.trigger, x)) {
            return Err(refuse(
                net,
                e.span.line,
                &format!(
                    "the trigger of event `{}` still holds after the events at {} execute (the next firing depends on the trigger's memory)",
                    e.label,
                    super::space::state_text(net, x)
                ),
            ));
        }
        Ok(())
    }
}
