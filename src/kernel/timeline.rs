//! What happens to one trajectory at given times and when conditions turn true: doses, edges of
//! piecewise-constant laws, and events, for every engine (the stochastic kernels hold integer
//! counts, the ODE engine real ones; both reach the state through [`EventState`]).
//!
//! A run asks [`Timeline::next`] for its next breakpoint (the earliest dose, edge of a reaction
//! law or of a trigger, or pending delayed execution) and calls [`Timeline::breakpoint`] there;
//! between breakpoints the propensities depend on the state alone (or smoothly on time), so
//! nothing else needs doing. Where a trigger reads species, the run calls
//! [`Timeline::changed`] after every change of the state (cheap: it only compares the
//! triggers' values with their memory) and [`Timeline::settle`] when it says so.
//!
//! Event semantics (SBML Level 3 Version 2 core §4.12, §3.4.8 \[M\]; the `.crn` `when` is the
//! special case without delay or priority):
//! - a trigger fires on a transition from false to true; before t = 0 it holds its
//!   `initial_value`; conditions are evaluated just after a breakpoint (time t⁺), so a
//!   comparison `time > T` fires at T;
//! - the execution is at t + delay (the delay evaluated at trigger time); assignment values
//!   are computed at trigger time when `values_at_trigger`, else at execution; a
//!   non-persistent pending execution is dropped when its trigger turns false first;
//! - events executing at one instant run one at a time in decreasing priority (ties in
//!   declaration order); after each, every trigger is evaluated again, so one event can
//!   trigger another at the same instant (at most [`MAX_CASCADE`] executions per instant);
//! - doses due at an instant are applied before the events of that instant.

use crate::error::{Error, Result};
use crate::network::expr::{just_after, Edge};
use crate::network::{Dose, Event, Network, Target};
use crate::numbers::round_trip;

/// Event executions allowed at one instant before the run is stopped as a runaway cascade.
pub const MAX_CASCADE: usize = 10_000;

/// How the timeline reads and writes a trajectory's state.
pub trait EventState {
    /// The count of species `i` (real-valued in the ODE engine).
    fn count(&self, i: usize) -> f64;
    /// Sets the count of species `i` at time `t` (the kernels round it to a whole number and
    /// refuse a negative or too large one).
    fn set_count(&mut self, t: f64, i: usize, count: f64) -> std::result::Result<(), String>;
    /// Molecules a dose adds (the ODE engine adds the unrounded amount).
    fn dose_count(&self, d: &Dose) -> f64 {
        d.count as f64
    }
    /// The params hold `p` from time `t` on (at the start and after every change).
    fn params_changed(&mut self, _t: f64, _p: &[f64]) {}
}

/// What a breakpoint or a settlement changed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Changed {
    /// Some count changed (propensities must be recomputed).
    pub state: bool,
    /// Some param changed (propensities and edges must be recomputed).
    pub params: bool,
}

impl Changed {
    pub fn any(self) -> bool {
        self.state || self.params
    }
}

/// The time inputs of a network, as the runs read them (built once per network).
#[derive(Clone, Debug)]
pub struct Inputs {
    file: String,
    doses: Vec<Dose>,
    events: Vec<Event>,
    /// Edges of reaction laws (pulses, infusion windows, time comparisons).
    law_edges: Vec<Edge>,
    params0: Vec<f64>,
    /// Events whose trigger reads species.
    state_triggers: Vec<usize>,
    species: Vec<String>,
}

impl Inputs {
    pub fn new(net: &Network) -> Inputs {
        let law_edges = net
            .reactions
            .iter()
            .filter_map(|r| match &r.kinetics {
                crate::network::Kinetics::Law { law, .. } => Some(law.edges.iter().cloned()),
                _ => None,
            })
            .flatten()
            .collect();
        Inputs {
            file: net.file.clone(),
            doses: net.doses.clone(),
            events: net.events.clone(),
            law_edges,
            params0: net.initial_params(),
            state_triggers: (0..net.events.len())
                .filter(|&e| {
                    let ev = &net.events[e];
                    ev.reads_state() || ev.trigger.time == crate::network::TimeUse::Smooth
                })
                .collect(),
            species: net.species.iter().map(|s| s.name.clone()).collect(),
        }
    }

    /// Nothing happens at given times and there are no events: runs need no timeline.
    pub fn is_empty(&self) -> bool {
        self.doses.is_empty() && self.events.is_empty() && self.law_edges.is_empty()
    }

    /// Whether some trigger reads species or varies smoothly with time (runs check it after
    /// every change; the ODE engine after every step).
    pub fn has_state_triggers(&self) -> bool {
        !self.state_triggers.is_empty()
    }

    /// The first event whose trigger varies smoothly with time (it can turn true between two
    /// reaction events, which a stochastic run cannot see).
    pub fn smooth_trigger(&self) -> Option<&Event> {
        self.events
            .iter()
            .find(|e| e.trigger.time == crate::network::TimeUse::Smooth)
    }

    /// The params' initial values.
    pub fn initial_params(&self) -> &[f64] {
        &self.params0
    }

    pub fn events(&self) -> &[Event] {
        &self.events
    }
}

/// A pending execution of an event.
#[derive(Clone, Debug)]
struct Pending {
    time: f64,
    event: usize,
    /// Values computed at trigger time, one per assignment.
    values: Option<Vec<f64>>,
    /// Order of triggering, for ties.
    seq: u64,
}

/// The running timeline of one trajectory.
#[derive(Clone, Debug)]
pub struct Timeline<'i> {
    inputs: &'i Inputs,
    params: Vec<f64>,
    /// Per dose, the index of its next time.
    dose_next: Vec<u64>,
    /// Per event, the trigger's value as last seen.
    memory: Vec<bool>,
    pending: Vec<Pending>,
    seq: u64,
    /// The next breakpoint after the current time.
    next: f64,
    /// Scratch for assignment values.
    values: Vec<f64>,
}

impl<'i> Timeline<'i> {
    pub fn new(inputs: &'i Inputs) -> Timeline<'i> {
        Timeline {
            inputs,
            params: inputs.params0.clone(),
            dose_next: vec![0; inputs.doses.len()],
            memory: inputs.events.iter().map(|e| e.initial_value).collect(),
            pending: Vec::new(),
            seq: 0,
            next: f64::INFINITY,
            values: Vec::new(),
        }
    }

    /// The params' current values.
    #[inline(always)]
    pub fn params(&self) -> &[f64] {
        &self.params
    }

    /// The next breakpoint (∞ when none is left).
    #[inline(always)]
    pub fn next(&self) -> f64 {
        self.next
    }

    /// Starts a run at t = 0: initial params, doses due at 0, triggers against their initial
    /// values (`at start` events fire here).
    pub fn start<S: EventState>(&mut self, st: &mut S) -> Result<Changed> {
        self.params.clear();
        self.params.extend_from_slice(&self.inputs.params0);
        self.dose_next.iter_mut().for_each(|k| *k = 0);
        for (m, e) in self.memory.iter_mut().zip(&self.inputs.events) {
            *m = e.initial_value;
        }
        self.pending.clear();
        self.seq = 0;
        st.params_changed(0.0, &self.params);
        self.breakpoint(0.0, st)
    }

    /// Does everything due at breakpoint `t`: doses, pending executions, triggers whose value
    /// changed (evaluated at t⁺), and finds the next breakpoint.
    pub fn breakpoint<S: EventState>(&mut self, t: f64, st: &mut S) -> Result<Changed> {
        let mut changed = Changed::default();
        let inputs = self.inputs;
        for (di, d) in inputs.doses.iter().enumerate() {
            while self.dose_next[di] < d.times.count && d.times.time(self.dose_next[di]) <= t {
                let now = st.count(d.species);
                let add = st.dose_count(d);
                st.set_count(t, d.species, now + add)
                    .map_err(|m| self.error_at(d.span.line, &format!("a dose: {m}"), t))?;
                changed.state |= add != 0.0;
                self.dose_next[di] += 1;
            }
        }
        let more = self.settle_at(t, just_after(t), st)?;
        changed.state |= more.state;
        changed.params |= more.params;
        self.find_next(t);
        Ok(changed)
    }

    /// Whether some species-reading trigger has a value other than its memory, with counts
    /// from `count` at time `t` (between breakpoints).
    #[inline]
    pub fn changed(&self, t: f64, count: impl Fn(usize) -> f64) -> bool {
        self.inputs.state_triggers.iter().any(|&e| {
            let v = self.inputs.events[e]
                .trigger
                .eval::<f64>(&count, &self.params, t)
                != 0.0;
            v != self.memory[e]
        })
    }

    /// Handles triggers that changed at time `t` between breakpoints (after [`Timeline::changed`]
    /// said so), and finds the next breakpoint anew (a delayed execution may have been added).
    pub fn settle<S: EventState>(&mut self, t: f64, st: &mut S) -> Result<Changed> {
        let c = self.settle_at(t, t, st)?;
        self.find_next(t);
        Ok(c)
    }

    /// Evaluates triggers at clock value `eval_t`, executes what is due at `t`, repeats
    /// until nothing more happens at `t`.
    fn settle_at<S: EventState>(&mut self, t: f64, eval_t: f64, st: &mut S) -> Result<Changed> {
        let mut changed = Changed::default();
        let events = &self.inputs.events;
        for _ in 0..MAX_CASCADE {
            for (e, ev) in events.iter().enumerate() {
                let v = ev
                    .trigger
                    .eval::<f64>(|i| st.count(i), &self.params, eval_t)
                    != 0.0;
                if v == self.memory[e] {
                    continue;
                }
                self.memory[e] = v;
                if !v {
                    if !ev.persistent {
                        self.pending.retain(|p| p.event != e);
                    }
                    continue;
                }
                let delay = match &ev.delay {
                    Some(d) => d.eval::<f64>(|i| st.count(i), &self.params, eval_t),
                    None => 0.0,
                };
                if !(delay >= 0.0 && delay.is_finite()) {
                    return Err(self.error_at(
                        ev.span.line,
                        &format!(
                            "the delay of event `{}` is {} s",
                            ev.label,
                            round_trip(delay)
                        ),
                        t,
                    ));
                }
                let values = ev.values_at_trigger.then(|| {
                    ev.assignments
                        .iter()
                        .map(|a| a.value.eval::<f64>(|i| st.count(i), &self.params, eval_t))
                        .collect()
                });
                self.seq += 1;
                self.pending.push(Pending {
                    time: t + delay,
                    event: e,
                    values,
                    seq: self.seq,
                });
            }
            // The due execution of highest priority, ties by declaration order, then by
            // order of triggering.
            let mut best: Option<(usize, f64)> = None;
            for (k, p) in self.pending.iter().enumerate() {
                if p.time > t {
                    continue;
                }
                let ev = &events[p.event];
                let prio = match &ev.priority {
                    Some(pr) => pr.eval::<f64>(|i| st.count(i), &self.params, eval_t),
                    None => f64::NEG_INFINITY,
                };
                let better = match best {
                    None => true,
                    Some((b, bp)) => {
                        let q = &self.pending[b];
                        prio > bp || (prio == bp && (p.event, p.seq) < (q.event, q.seq))
                    }
                };
                if better {
                    best = Some((k, prio));
                }
            }
            let Some((k, _)) = best else {
                return Ok(changed);
            };
            let p = self.pending.remove(k);
            let c = self.execute(t, eval_t, &p, st)?;
            if c.params {
                st.params_changed(t, &self.params);
            }
            changed.state |= c.state;
            changed.params |= c.params;
        }
        Err(Error::usage(format!(
            "{}: events keep triggering one another at t = {} s ({MAX_CASCADE} executions at \
             one instant); check that an event does not make its own condition true again",
            self.inputs.file,
            round_trip(t)
        )))
    }

    /// Applies one event's assignments together: every value first, then every write.
    fn execute<S: EventState>(
        &mut self,
        t: f64,
        eval_t: f64,
        p: &Pending,
        st: &mut S,
    ) -> Result<Changed> {
        let ev = &self.inputs.events[p.event];
        self.values.clear();
        match &p.values {
            Some(v) => self.values.extend_from_slice(v),
            None => {
                for a in &ev.assignments {
                    let v = a.value.eval::<f64>(|i| st.count(i), &self.params, eval_t);
                    self.values.push(v);
                }
            }
        }
        let mut changed = Changed::default();
        for (a, &v) in ev.assignments.iter().zip(&self.values) {
            if !v.is_finite() {
                return Err(self.error_at(
                    a.span.line,
                    &format!("event `{}` computes the value {}", ev.label, round_trip(v)),
                    t,
                ));
            }
            match a.target {
                Target::Species(i) => {
                    let new = if a.add {
                        st.count(i) + v * a.to_count
                    } else {
                        v * a.to_count
                    };
                    changed.state |= new != st.count(i);
                    st.set_count(t, i, new).map_err(|m| {
                        self.error_at(
                            a.span.line,
                            &format!(
                                "event `{}` sets `{}`: {m}",
                                ev.label, self.inputs.species[i]
                            ),
                            t,
                        )
                    })?;
                }
                Target::Param(q) => {
                    let new = if a.add { self.params[q] + v } else { v };
                    changed.params |= new != self.params[q];
                    self.params[q] = new;
                }
            }
        }
        Ok(changed)
    }

    /// The earliest breakpoint strictly after `t`.
    fn find_next(&mut self, t: f64) {
        let mut next = f64::INFINITY;
        for (d, &k) in self.inputs.doses.iter().zip(&self.dose_next) {
            if k < d.times.count {
                next = next.min(d.times.time(k));
            }
        }
        for e in &self.inputs.law_edges {
            next = next.min(e.next_after(t, &self.params));
        }
        for ev in &self.inputs.events {
            next = next.min(ev.trigger.next_edge(t, &self.params));
        }
        for p in &self.pending {
            next = next.min(p.time);
        }
        // A pending execution at exactly t was executed; anything left at t (a delay of
        // zero found after) counts as due now.
        self.next = if next <= t { t } else { next };
    }

    fn error_at(&self, line: u32, msg: &str, t: f64) -> Error {
        Error::usage(format!(
            "{}:{line}: {msg} at t = {} s",
            self.inputs.file,
            round_trip(t)
        ))
    }
}

/// The state of a stochastic kernel: whole counts, each change reported to the observer.
pub struct Counts<'a, O> {
    pub x: &'a mut [i64],
    pub obs: &'a mut O,
}

impl<O: super::observe::Observer> EventState for Counts<'_, O> {
    fn count(&self, i: usize) -> f64 {
        self.x[i] as f64
    }

    fn set_count(&mut self, t: f64, i: usize, count: f64) -> std::result::Result<(), String> {
        let n = count.round();
        if n.is_nan() || n < 0.0 {
            return Err(format!("the count would be {count}, below 0"));
        }
        if n > crate::network::MAX_COUNT as f64 {
            return Err(format!(
                "the count would be {count:.4e}, more than copyloop can hold (2^50)"
            ));
        }
        let n = n as i64;
        let before = self.x[i];
        if n != before {
            self.obs.moved(t, i, before, n - before);
            self.x[i] = n;
        }
        Ok(())
    }

    fn params_changed(&mut self, t: f64, p: &[f64]) {
        self.obs.params(t, p);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::expr::{self, Checks};
    use crate::network::parser::{parse, Item, Rate};
    use crate::network::{load_source, Network, Overrides};

    /// Counts held as reals, for the tests.
    struct Plain(Vec<f64>);

    impl EventState for Plain {
        fn count(&self, i: usize) -> f64 {
            self.0[i]
        }
        fn set_count(&mut self, _t: f64, i: usize, c: f64) -> std::result::Result<(), String> {
            self.0[i] = c;
            Ok(())
        }
    }

    fn net(src: &str) -> Network {
        load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap()
    }

    /// A program of the constant value `v` (seconds, or a number).
    fn constant(v: f64) -> crate::network::Law {
        let ast = parse("c.crn", format!("step r 0 -> X @ law {v}\n").as_bytes()).unwrap();
        let Item::Step(s) = &ast.items[0] else {
            panic!()
        };
        let Rate::Law(e) = &s.forward else { panic!() };
        expr::compile(e, "c", &|_| None, Checks::none()).unwrap()
    }

    const TWO: &str = "species X = 0\nspecies Y = 1\nstep s X -> 0 @ 0\n";

    // SBML L3V2 core §4.12.4 [M]: with a delay, the assignments execute at trigger time +
    // delay; with useValuesFromTriggerTime the values are those at the trigger.
    #[test]
    fn delayed_execution_with_values_at_trigger_or_execution() {
        for at_trigger in [true, false] {
            let mut n = net(&format!("{TWO}when time >= 10 s : X = Y\n"));
            n.events[0].delay = Some(constant(2.0));
            n.events[0].values_at_trigger = at_trigger;
            let inputs = Inputs::new(&n);
            let mut tl = Timeline::new(&inputs);
            let mut st = Plain(vec![0.0, 1.0]);
            tl.start(&mut st).unwrap();
            assert_eq!(tl.next(), 10.0);
            tl.breakpoint(10.0, &mut st).unwrap();
            assert_eq!((st.0[0], tl.next()), (0.0, 12.0));
            st.0[1] = 7.0;
            tl.breakpoint(12.0, &mut st).unwrap();
            assert_eq!(st.0[0], if at_trigger { 1.0 } else { 7.0 });
            assert_eq!(tl.next(), f64::INFINITY);
        }
    }

    // SBML §4.12.2 [M]: a non-persistent event whose trigger turns false before the delay has
    // passed does not execute; a persistent one does.
    #[test]
    fn persistence_decides_a_pending_execution() {
        for persistent in [true, false] {
            let mut n = net(&format!("{TWO}when X >= 5 : Y = 9\n"));
            n.events[0].delay = Some(constant(2.0));
            n.events[0].persistent = persistent;
            let inputs = Inputs::new(&n);
            let mut tl = Timeline::new(&inputs);
            let mut st = Plain(vec![0.0, 1.0]);
            tl.start(&mut st).unwrap();
            st.0[0] = 6.0;
            assert!(tl.changed(1.0, |i| st.0[i]));
            tl.settle(1.0, &mut st).unwrap();
            assert_eq!(tl.next(), 3.0);
            st.0[0] = 0.0;
            assert!(tl.changed(2.0, |i| st.0[i]));
            tl.settle(2.0, &mut st).unwrap();
            if persistent {
                assert_eq!(tl.next(), 3.0);
                tl.breakpoint(3.0, &mut st).unwrap();
                assert_eq!(st.0[1], 9.0);
            } else {
                assert_eq!(tl.next(), f64::INFINITY);
                assert_eq!(st.0[1], 1.0);
            }
        }
    }

    // SBML §4.12.7 [M]: events executing at one instant run in decreasing priority; the
    // `.crn` rule for ties is declaration order.
    #[test]
    fn priorities_order_simultaneous_events() {
        for (p1, p2, last) in [
            (Some(1.0), Some(5.0), 1.0),
            (Some(5.0), Some(1.0), 2.0),
            (None, None, 2.0),
        ] {
            let mut n = net(&format!(
                "{TWO}when time >= 10 s : X = 1\nwhen time >= 10 s : Y = 0\n"
            ));
            // The second event sets X too (a conflict the `.crn` compiler refuses; SBML orders
            // it by priority).
            n.events[1].assignments[0].target = crate::network::Target::Species(0);
            n.events[1].assignments[0].value = constant(2.0);
            n.events[0].priority = p1.map(constant);
            n.events[1].priority = p2.map(constant);
            let inputs = Inputs::new(&n);
            let mut tl = Timeline::new(&inputs);
            let mut st = Plain(vec![0.0, 1.0]);
            tl.start(&mut st).unwrap();
            tl.breakpoint(10.0, &mut st).unwrap();
            assert_eq!(st.0[0], last, "priorities {p1:?}, {p2:?}");
        }
    }

    // One event can trigger another at the same instant (SBML §4.12 [M]); a cascade without
    // end is stopped with an error.
    #[test]
    fn cascades_and_runaway_cascades() {
        let n = net(&format!(
            "{TWO}when time >= 10 s : X = 10\nwhen X >= 10 : Y = 5\n"
        ));
        let inputs = Inputs::new(&n);
        let mut tl = Timeline::new(&inputs);
        let mut st = Plain(vec![0.0, 1.0]);
        tl.start(&mut st).unwrap();
        tl.breakpoint(10.0, &mut st).unwrap();
        assert_eq!(st.0, vec![10.0, 5.0]);
        let n = net(&format!(
            "{TWO}dose X += 1 molecules at 1 s\nwhen X > 0 : X = 0\nwhen X < 1 : X = 1\n"
        ));
        let inputs = Inputs::new(&n);
        let mut tl = Timeline::new(&inputs);
        let mut st = Plain(vec![0.0, 1.0]);
        tl.start(&mut st).unwrap();
        let e = tl.breakpoint(1.0, &mut st).unwrap_err().to_string();
        assert!(e.contains("keep triggering one another"), "{e}");
    }

    // A trigger that is true at t = 0 fires then only when its initial value is false
    // (SBML initialValue; `.crn` `at start`).
    #[test]
    fn initial_value_decides_a_firing_at_the_start() {
        for (at_start, fired) in [(true, 9.0), (false, 1.0)] {
            let n = net(&format!(
                "{TWO}when Y > 0 : Y = 9{}\n",
                if at_start { " at start" } else { "" }
            ));
            let inputs = Inputs::new(&n);
            let mut tl = Timeline::new(&inputs);
            let mut st = Plain(vec![0.0, 1.0]);
            tl.start(&mut st).unwrap();
            assert_eq!(st.0[1], fired);
        }
    }
}
