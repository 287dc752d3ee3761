//! Syntax → doses, infusions and events: the `dose`, `infuse` and `when` lines of a `.crn` file
//! (the rest of the compiler is in [`super::compile`]).
//!
//! - `dose X += A at T [every P] [until U | times N]`: A is a concentration of X's compartment
//!   or molecules, rounded to whole molecules (with a warning past 1 %); times need units;
//!   a repeated dose needs an end.
//! - `infuse X at R from T1 to T2`: a zero-order reaction `infuse_X` with law
//!   R·[T1 ≤ time < T2] (R in concentration of X's compartment per time, or molecules per
//!   time): Poisson input at rate R·Ω_c over the window, the pharmacologist's zero-order input.
//! - `when C : X = E, Y += E, … [at start]`: an [`Event`] (see [`super::schedule`]).
//! - Conflicts: two scheduled actions (doses, and `when` lines whose condition reads only the
//!   clock) at one instant where one sets a value the other reads or sets (other than two
//!   `+=` of the same target) are an error: the order would decide the result.

use super::compile::{Compiler, Named};
use super::expr::{self, Checks, Law, Resolved, TimeUse};
use super::parser::{BinOp, DoseEnd, Expr, Item, Literal, Name, Operand};
use super::schedule::{Assignment, Dose, Event, Infusion, Target, TimeSeq};
use super::units::{Dim, Quantity};
use super::{Kinetics, Reaction, Reading, MAX_COUNT};
use crate::error::Span;

/// Largest number of doses one line may schedule.
const MAX_DOSES: u64 = 100_000_000;

/// Scheduled instants examined per action when looking for conflicts.
const CONFLICT_INSTANTS: usize = 100_000;

/// A scheduled action for the conflict check: its instants, what it writes and reads.
struct Scheduled {
    line: u32,
    span: Span,
    instants: Vec<f64>,
    writes: Vec<(Target, bool)>,
    reads: Vec<Target>,
}

impl<'a> Compiler<'a> {
    /// The species an input names, if it is one that can change.
    fn input_species(&mut self, name: &Name, what: &str) -> Option<usize> {
        match self.names.get(name.text.as_str()) {
            Some(Named::Species(i)) => {
                let i = *i;
                if self.species[i].clamped {
                    self.error_help(
                        name.span,
                        format!("`{}` is clamped: {what} cannot change it", name.text),
                        "remove `clamped`, or apply the input to another species",
                    );
                    return None;
                }
                Some(i)
            }
            _ => {
                self.error_help(
                    name.span,
                    format!("unknown species `{}`", name.text),
                    format!("declare it with `species {} = <amount>`", name.text),
                );
                None
            }
        }
    }

    /// A time (seconds) given with a unit.
    fn time_of(&mut self, op: &Operand, what: &str) -> Option<f64> {
        if self.varying_param(op).is_some() {
            self.error(
                op.span(),
                format!("{what} cannot be a param that events change"),
            );
            return None;
        }
        let (q, bare) = self.operand(op)?;
        if bare || q.dim != Dim::TIME {
            let found = if bare {
                "a number without a unit".to_string()
            } else {
                format!("{}", q.dim)
            };
            self.error_help(
                op.span(),
                format!("{what} must be a time with its unit, found {found}"),
                "write e.g. `30 s`, `15 min` or `2 h`",
            );
            return None;
        }
        if !(q.value >= 0.0 && q.value.is_finite()) {
            self.error(op.span(), format!("{what} must be finite and at least 0 s"));
            return None;
        }
        Some(q.value)
    }

    /// Molecules from an amount of species `i`: a concentration of its compartment, or
    /// molecules (bare or with the unit).
    fn dose_amount(&mut self, i: usize, op: &Operand) -> Option<(i64, f64)> {
        if self.varying_param(op).is_some() {
            self.error(op.span(), "a dose cannot be a param that events change");
            return None;
        }
        let (q, _) = self.operand(op)?;
        let comp = self.species[i].compartment;
        let exact = if q.dim == Dim::CONC {
            let Some(c) = comp.filter(|&c| self.compartments[c].volume_l.is_some()) else {
                self.error_help(
                    op.span(),
                    "a dose given as a concentration needs a volume",
                    "add a `volume` or `compartment` line, or give the dose in molecules",
                );
                return None;
            };
            q.value * self.compartments[c].omega
        } else if q.dim == Dim::COUNT {
            // A dose in molecules keeps its count at another volume; `operand` scaled it as a
            // constant.
            q.value / self.count_ratio
        } else if q.dim.is_none() {
            q.value
        } else {
            self.error_help(
                op.span(),
                format!(
                    "a dose is a concentration or molecules, but this is {}",
                    q.dim
                ),
                "write e.g. `dose H += 5 nM at 1 h` or `dose H += 300 molecules at 1 h`",
            );
            return None;
        };
        if !(exact >= 0.0 && exact.is_finite()) || exact > MAX_COUNT as f64 {
            self.error(
                op.span(),
                format!("a dose must be at least 0 and at most 2^50 molecules, found {exact:.4e}"),
            );
            return None;
        }
        let rounded = exact.round();
        if exact > 0.0 && ((rounded - exact) / exact).abs() > 0.01 {
            let d = self.diag(
                op.span(),
                format!(
                    "this dose is {} molecules; rounded to {}, which changes it by {:.1} %",
                    crate::numbers::short(exact),
                    rounded as i64,
                    100.0 * ((rounded - exact) / exact).abs()
                ),
            );
            self.warnings.push(d);
        }
        Some((rounded as i64, rounded))
    }

    /// The `dose` lines.
    pub(super) fn doses(&mut self) -> Vec<Dose> {
        let ast = self.ast;
        let mut out = Vec::new();
        for item in &ast.items {
            let Item::Dose(d) = item else { continue };
            let Some(i) = self.input_species(&d.species, "a dose") else {
                continue;
            };
            let amount = self.dose_amount(i, &d.amount);
            let start = self.time_of(&d.at, "the time of a dose");
            let period = match &d.every {
                Some(p) => match self.time_of(p, "the period of a dose") {
                    Some(v) if v > 0.0 => Some(Some(v)),
                    Some(_) => {
                        self.error(
                            p.span(),
                            "a dose period must be above 0 s: `every 0 s` repeats for ever at \
                             one instant",
                        );
                        None
                    }
                    None => None,
                },
                None => Some(None),
            };
            let (Some((count_each, amount)), Some(start), Some(period)) = (amount, start, period)
            else {
                continue;
            };
            let count = match (&d.end, period) {
                (None, None) => 1,
                (None, Some(_)) => {
                    let span = d.every.as_ref().map_or(d.span, |e| e.span());
                    self.error_help(
                        span,
                        "a repeated dose needs an end: it would repeat without limit",
                        "add `until <time>` or `times <n>`, e.g. `every 24 h times 7`",
                    );
                    continue;
                }
                (Some(DoseEnd::Until(u)), period) => {
                    let Some(until) = self.time_of(u, "the end of a dose schedule") else {
                        continue;
                    };
                    let Some(p) = period else {
                        self.error(u.span(), "`until` needs `every <period>` before it");
                        continue;
                    };
                    if until < start {
                        self.error(
                            u.span(),
                            "the schedule ends before its first dose: `until` must not be \
                             earlier than `at`",
                        );
                        continue;
                    }
                    ((until - start) / p * (1.0 + 1e-12)).floor() as u64 + 1
                }
                (Some(DoseEnd::Times(n)), period) => {
                    let Some((q, bare)) = self.operand(n) else {
                        continue;
                    };
                    let v = q.value;
                    if !bare || v.fract() != 0.0 || v < 1.0 {
                        self.error(
                            n.span(),
                            "`times` needs a whole number of doses, at least 1, without a unit",
                        );
                        continue;
                    }
                    if period.is_none() && v != 1.0 {
                        self.error(n.span(), "`times` needs `every <period>` before it");
                        continue;
                    }
                    v as u64
                }
            };
            if count > MAX_DOSES {
                self.error(
                    d.span,
                    format!("this schedule makes {count} doses, more than {MAX_DOSES}"),
                );
                continue;
            }
            out.push(Dose {
                species: i,
                count: count_each,
                amount,
                times: TimeSeq {
                    start,
                    period,
                    count,
                },
                span: d.span,
            });
        }
        out
    }

    /// The `infuse` lines, as zero-order reactions switched on over their windows (numbered
    /// from `first`, the number of reactions before them).
    pub(super) fn infusions(&mut self, first: usize) -> (Vec<Reaction>, Vec<Infusion>) {
        let ast = self.ast;
        let mut out = Vec::new();
        let mut list = Vec::new();
        for item in &ast.items {
            let Item::Infuse(f) = item else { continue };
            let Some(i) = self.input_species(&f.species, "an infusion") else {
                continue;
            };
            let from = self.time_of(&f.from, "the start of an infusion");
            let to = self.time_of(&f.to, "the end of an infusion");
            let rate = self.infusion_rate(i, &f.rate);
            let (Some(from), Some(to), Some(rate)) = (from, to, rate) else {
                continue;
            };
            if to <= from {
                self.error(
                    f.to.span(),
                    "an infusion must end after it starts (`to` later than `from`)",
                );
                continue;
            }
            let name = &self.species[i].name;
            let mut label = format!("infuse_{name}");
            let mut k = 2;
            while self.labels.contains_key(&label) {
                label = format!("infuse_{name}_{k}");
                k += 1;
            }
            self.labels.insert(label.clone(), f.span);
            let text = format!(
                "{} molecules/s for {} s <= time < {} s",
                crate::numbers::plain(rate),
                crate::numbers::plain(from),
                crate::numbers::plain(to)
            );
            let law = window_law(rate, from, to, f.span, &text, self.volume_l.is_none());
            let comp = self.species[i].compartment;
            list.push(Infusion {
                reaction: first + out.len(),
                species: i,
                rate,
                from,
                to,
                span: f.span,
            });
            out.push(self.reaction(
                label,
                &[],
                &[(i, 1)],
                Kinetics::Law { law, scale: 1.0 },
                f.span,
                comp,
            ));
        }
        (out, list)
    }

    /// An infusion rate in molecules per second.
    fn infusion_rate(&mut self, i: usize, op: &Operand) -> Option<f64> {
        if self.varying_param(op).is_some() {
            self.error(
                op.span(),
                "an infusion rate cannot be a param that events change",
            );
            return None;
        }
        let (q, bare) = self.operand(op)?;
        let per_time_conc = Dim::CONC.per(Dim::TIME);
        let per_time_count = Dim::COUNT.per(Dim::TIME);
        let v = if !bare && q.dim == per_time_conc {
            let comp = self.species[i].compartment;
            let Some(c) = comp.filter(|&c| self.compartments[c].volume_l.is_some()) else {
                self.error_help(
                    op.span(),
                    "an infusion rate in concentration per time needs a volume",
                    "add a `volume` or `compartment` line, or give the rate in molecules/s",
                );
                return None;
            };
            q.value * self.compartments[c].omega
        } else if !bare && q.dim == per_time_count {
            q.value * self.count_ratio
        } else {
            self.error_help(
                op.span(),
                format!(
                    "an infusion rate is an amount per time, but this is {}",
                    if bare {
                        "a number without a unit".to_string()
                    } else {
                        q.dim.to_string()
                    }
                ),
                "write e.g. `infuse H at 2 nM/min from 1 h to 3 h` or `at 50 molecules/s`",
            );
            return None;
        };
        if !(v >= 0.0 && v.is_finite()) {
            self.error(op.span(), "an infusion rate must be finite and at least 0");
            return None;
        }
        Some(v)
    }

    /// The `when` lines.
    pub(super) fn events(&mut self) -> Vec<Event> {
        let ast = self.ast;
        let mut out = Vec::new();
        for item in &ast.items {
            let Item::When(w) = item else { continue };
            let Some(trigger) = self.program(&w.condition) else {
                continue;
            };
            let cspan = w.condition.span();
            if !trigger.boolean {
                self.error_help(
                    cspan,
                    "a condition compares values, but this is a number",
                    "write e.g. `when X >= 100 : …` or `when time >= 2 h : …`",
                );
                continue;
            }
            if w.form.is_none()
                && trigger.species.is_empty()
                && trigger.params.is_empty()
                && trigger.time == TimeUse::None
            {
                self.error_help(
                    cspan,
                    "this condition reads no species, no changing param and not `time`: it \
                     never changes, so it can never trigger",
                    "compare a species or `time` with a value, e.g. `X >= 100` or `time >= 2 h`",
                );
                continue;
            }
            // An imported event may vary smoothly with time: the ODE engine locates its
            // crossing, the stochastic kernels refuse it.
            if trigger.time == TimeUse::Smooth && w.form.is_none() {
                self.error_help(
                    cspan,
                    "in a condition, `time` may only be compared with a fixed time",
                    "write e.g. `time >= 2 h`; periodic triggers can use `pulse(time, 24 h, 1 h) > 0`",
                );
                continue;
            }
            let mut assignments: Vec<Assignment> = Vec::new();
            let mut ok = true;
            for a in &w.assignments {
                match self.assignment(a) {
                    Some(asg) => {
                        if assignments.iter().any(|b| b.target == asg.target) {
                            self.error(
                                a.target.span,
                                format!("`{}` is assigned twice in one event", a.target.text),
                            );
                            ok = false;
                        }
                        assignments.push(asg);
                    }
                    None => ok = false,
                }
            }
            if !ok {
                continue;
            }
            let Some(form) = &w.form else {
                out.push(Event {
                    label: format!("when_{}", w.span.line),
                    trigger,
                    initial_value: !w.at_start,
                    persistent: true,
                    delay: None,
                    priority: None,
                    values_at_trigger: true,
                    assignments,
                    span: w.span,
                });
                continue;
            };
            let delay = form.delay.as_ref().map(|d| self.program(d));
            let priority = form.priority.as_ref().map(|p| self.program(p));
            if matches!(delay, Some(None)) || matches!(priority, Some(None)) {
                continue;
            }
            out.push(Event {
                label: form.label.clone(),
                trigger,
                initial_value: form.initial_value,
                persistent: form.persistent,
                delay: delay.flatten(),
                priority: priority.flatten(),
                values_at_trigger: form.values_at_trigger,
                assignments,
                span: w.span,
            });
        }
        out
    }

    fn assignment(&mut self, a: &super::parser::Assign) -> Option<Assignment> {
        let target = match self.names.get(a.target.text.as_str()) {
            Some(Named::Species(i)) => {
                let i = *i;
                if self.species[i].clamped {
                    self.error_help(
                        a.target.span,
                        format!("`{}` is clamped: an event cannot change it", a.target.text),
                        "remove `clamped`, or assign another species",
                    );
                    return None;
                }
                Target::Species(i)
            }
            Some(Named::Param(p)) => Target::Param(*p),
            Some(Named::Compartment(_)) => {
                self.error(
                    a.target.span,
                    format!(
                        "`{}` is a compartment: its volume does not change",
                        a.target.text
                    ),
                );
                return None;
            }
            None => {
                self.error_help(
                    a.target.span,
                    format!("unknown name `{}`", a.target.text),
                    "an event sets a species or a param",
                );
                return None;
            }
        };
        let value = self.program(&a.value)?;
        let vspan = a.value.span();
        let norm = |d: Dim| {
            if self.volume_l.is_none() {
                d.without_count()
            } else {
                d
            }
        };
        let to_count = match target {
            Target::Species(i) => {
                let s = &self.species[i];
                let d = norm(value.dim);
                match s.reads_as {
                    Reading::Concentration if d == Dim::CONC => self.omega_of(s.compartment),
                    _ if d == norm(Dim::COUNT) || d.is_none() => 1.0,
                    _ => {
                        self.error_help(
                            vspan,
                            format!(
                                "the value for species `{}` has dimension {}, but an amount \
                                 is a concentration or molecules",
                                a.target.text, value.dim
                            ),
                            "write e.g. `X = 0`, `X += 5 nM` or `X = X / 2`",
                        );
                        return None;
                    }
                }
            }
            Target::Param(p) => {
                let want = norm(self.params[p].value.dim);
                if norm(value.dim) != want {
                    self.error(
                        vspan,
                        format!(
                            "the value for param `{}` has dimension {}, but the param is {}",
                            a.target.text, value.dim, want
                        ),
                    );
                    return None;
                }
                1.0
            }
        };
        Some(Assignment {
            target,
            add: a.add,
            value,
            to_count,
            span: a.span,
        })
    }

    /// Rejects two scheduled actions at one instant whose order would matter.
    pub(super) fn conflicts(&mut self, doses: &[Dose], events: &[Event]) {
        let mut acts: Vec<Scheduled> = Vec::new();
        for d in doses {
            let n = d.times.count.min(CONFLICT_INSTANTS as u64);
            acts.push(Scheduled {
                line: d.span.line,
                span: d.span,
                instants: (0..n).map(|k| d.times.time(k)).collect(),
                writes: vec![(Target::Species(d.species), true)],
                reads: Vec::new(),
            });
        }
        for e in events {
            // A priority orders executions at one instant; a delay moves them (imported events
            // only).
            if e.reads_state()
                || !e.trigger.params.is_empty()
                || e.priority.is_some()
                || e.delay.is_some()
            {
                continue;
            }
            let mut reads = Vec::new();
            for a in &e.assignments {
                reads.extend(a.value.species.iter().map(|&i| Target::Species(i)));
                reads.extend(a.value.params.iter().map(|&p| Target::Param(p)));
            }
            acts.push(Scheduled {
                line: e.span.line,
                span: e.span,
                instants: firing_times(&e.trigger, e.initial_value),
                writes: e.assignments.iter().map(|a| (a.target, a.add)).collect(),
                reads,
            });
        }
        for b in 1..acts.len() {
            for a in 0..b {
                let (x, y) = (&acts[a], &acts[b]);
                if !interacts(x, y) {
                    continue;
                }
                if let Some(t) = common_instant(&x.instants, &y.instants) {
                    let (line, span) = (x.line, y.span);
                    self.error_help(
                        span,
                        format!(
                            "this conflicts with line {line} at t = {} s: both act at the same \
                             instant on a value the other sets, so their order would decide the \
                             result",
                            crate::numbers::round_trip(t)
                        ),
                        "move one of them to another time, or merge them into one `when` line",
                    );
                    return;
                }
            }
        }
    }
}

/// Whether one action sets something the other reads or sets (two `+=` of one target commute).
fn interacts(a: &Scheduled, b: &Scheduled) -> bool {
    let one_way = |x: &Scheduled, y: &Scheduled| {
        x.writes.iter().any(|&(t, add)| {
            y.reads.contains(&t) || y.writes.iter().any(|&(u, add2)| u == t && !(add && add2))
        })
    };
    one_way(a, b) || one_way(b, a)
}

/// The first instant (within a relative 1e-12) common to two sorted lists.
fn common_instant(a: &[f64], b: &[f64]) -> Option<f64> {
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        let tol = 1e-12 * a[i].abs().max(b[j].abs()).max(1.0);
        if (a[i] - b[j]).abs() <= tol {
            return Some(a[i]);
        }
        if a[i] < b[j] {
            i += 1;
        } else {
            j += 1;
        }
    }
    None
}

/// The instants a condition of the clock alone turns true: at t = 0 when it holds then and
/// its value before was false, and at every edge where it goes from false to true (evaluated
/// just before and just after). At most [`CONFLICT_INSTANTS`] edges are examined.
pub(super) fn firing_times(trigger: &Law, initial_value: bool) -> Vec<f64> {
    let truth = |t: f64| trigger.eval::<f64>(|_| 0.0, &[], t) != 0.0;
    let mut out = Vec::new();
    if !initial_value && truth(0.0) {
        out.push(0.0);
    }
    let mut t = 0.0;
    for _ in 0..CONFLICT_INSTANTS {
        let next = trigger.next_edge(t, &[]);
        if !next.is_finite() {
            break;
        }
        let before = truth(expr::just_before(next));
        let after = truth(expr::just_after(next));
        if !before && after {
            out.push(next);
        }
        t = next;
    }
    out
}

/// The law `rate · [from ≤ time < to]` of an infusion (molecules per second).
fn window_law(rate: f64, from: f64, to: f64, span: Span, text: &str, counts: bool) -> Law {
    let lit = |v: f64, dim: Dim| {
        Expr::Number(Literal {
            quantity: Quantity::new(v, dim),
            bare: false,
            unit_factor: 1.0,
            span,
        })
    };
    let time = || {
        Expr::Name(Name {
            text: "time".into(),
            span,
        })
    };
    let bin = |op, a, b| Expr::Binary(op, Box::new(a), Box::new(b), span);
    let window = bin(
        BinOp::And,
        bin(BinOp::Ge, time(), lit(from, Dim::TIME)),
        bin(BinOp::Lt, time(), lit(to, Dim::TIME)),
    );
    let e = bin(BinOp::Mul, lit(rate, Dim::COUNT.per(Dim::TIME)), window);
    let resolve = |n: &str| (n == "time").then_some(Resolved::Time);
    expr::compile(&e, text, &resolve, Checks::crn(counts))
        .expect("an infusion window is a well-formed program")
}
