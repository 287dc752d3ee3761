//! SBML events → the network's own events (the compiler's `when` item with SBML's further
//! fields, [`EventForm`]).
//!
//! Every field of an SBML Level 3 Version 2 event (§4.12 \[M\]) has its exact counterpart in the
//! network's event: the trigger (fires on its transition from false to true), `persistent`,
//! `initialValue`, the delay (evaluated at trigger time, in the model's time unit),
//! `useValuesFromTriggerTime` and the priority (executions at one instant in decreasing
//! priority). An assignment to a species sets what its symbol means: its concentration where
//! `hasOnlySubstanceUnits` is false (the count becomes value × size), else its amount.
//!
//! Refused, naming the event: an assignment to a compartment's size (the network's compartments
//! are fixed) and to a species reference's stoichiometry.

use super::{bare, name, not_yet, span, Context, Locals, Scale};
use crate::network::parser::{Assign, BinOp, EventForm, Expr, Literal, When};
use crate::network::{Dim, Quantity};
use crate::sbml::error::{Loc, SbmlError};
use crate::sbml::initial::symbol_is_amount;
use crate::sbml::model::{Event, Symbol};
use crate::sbml::units;

impl Context<'_> {
    /// The `when` item of event `e` (the `k`-th of the model, for its label when it has no
    /// id); `None` for an event without a trigger formula, which never fires (SBML Level 3
    /// Version 2 core §4.12.2 \[M\]).
    pub(super) fn event(&self, k: usize, e: &Event) -> Result<Option<When>, SbmlError> {
        let label = e.id.clone().unwrap_or_else(|| format!("event_{}", k + 1));
        let owner = label.as_str();
        let locals = Locals::new();
        let trigger = e.trigger.as_ref().and_then(|t| t.math.as_ref());
        let (Some(t), Some(math)) = (e.trigger.as_ref(), trigger) else {
            return Ok(None);
        };
        let condition = self.condition(self.expr(math, &locals, owner)?, math.loc);
        let delay = e
            .delay
            .as_ref()
            .map(|d| self.expr(d, &locals, owner))
            .transpose()?;
        let priority = e
            .priority
            .as_ref()
            .map(|p| self.expr(p, &locals, owner))
            .transpose()?;
        let mut assignments = Vec::with_capacity(e.assignments.len());
        for a in &e.assignments {
            // An assignment without a formula changes nothing (§4.12.6 [M]).
            let Some(m) = &a.math else {
                continue;
            };
            let value = self.expr(m, &locals, owner)?;
            let value = self.assigned(&a.variable, value, a.loc, owner)?;
            assignments.push(Assign {
                target: name(&a.variable, a.loc),
                add: false,
                value,
                span: span(a.loc),
            });
        }
        Ok(Some(When {
            condition,
            assignments,
            at_start: false,
            form: Some(EventForm {
                label,
                delay,
                priority,
                persistent: t.persistent,
                initial_value: t.initial_value,
                values_at_trigger: e.use_values_from_trigger_time,
            }),
            span: span(e.loc),
        }))
    }

    /// Refuses two events with the same priority formula: SBML runs such events, when they
    /// execute at one instant, in random order (§4.12.7 \[M\]); the network runs them in
    /// declaration order.
    pub(super) fn equal_priorities(&self) -> Result<(), SbmlError> {
        let events = &self.m.events;
        for (b, e) in events.iter().enumerate() {
            let Some(pb) = &e.priority else { continue };
            for a in &events[..b] {
                if a.priority.as_ref().is_some_and(|pa| pa.same(pb)) {
                    return Err(not_yet(
                        "priority",
                        e.id.as_deref(),
                        pb.loc,
                        format!(
                            "events `{}` and `{}` have the same priority, so SBML executes them in random order at one instant; copyloop runs simultaneous events in a fixed order",
                            a.id.as_deref().unwrap_or(""),
                            e.id.as_deref().unwrap_or("")
                        ),
                    ));
                }
            }
        }
        Ok(())
    }

    /// A trigger as a comparison: a formula that is a number (`true`, a parameter) is true
    /// where it is not 0.
    fn condition(&self, e: Expr, loc: Loc) -> Expr {
        if is_comparison(&e) {
            return e;
        }
        let zero = Expr::Number(bare(0.0, loc));
        let s = span(loc);
        let lt = Expr::Binary(BinOp::Lt, Box::new(e.clone()), Box::new(zero.clone()), s);
        let gt = Expr::Binary(BinOp::Gt, Box::new(e), Box::new(zero), s);
        Expr::Binary(BinOp::Or, Box::new(lt), Box::new(gt), s)
    }

    /// The value an assignment writes, as the network reads it: a species' count from its
    /// concentration or amount, a parameter's value in its canonical unit.
    fn assigned(&self, id: &str, value: Expr, loc: Loc, owner: &str) -> Result<Expr, SbmlError> {
        let times = |q: Quantity| {
            let lit = if q.dim.is_none() {
                bare(q.value, loc)
            } else {
                Literal {
                    quantity: q,
                    bare: false,
                    unit_factor: 1.0,
                    span: span(loc),
                }
            };
            Expr::Binary(
                BinOp::Mul,
                Box::new(value.clone()),
                Box::new(Expr::Number(lit)),
                span(loc),
            )
        };
        match self.symbols.get(id) {
            Some(Symbol::Species(i)) => {
                let amount = symbol_is_amount(self.m, *i);
                Ok(match self.scale {
                    Scale::Counts => match self.divisor(*i, loc)? {
                        Some(v) => times(Quantity::bare(v)),
                        None => value,
                    },
                    // A concentration in mol/L, or an amount in mol per the volume.
                    Scale::Volume { litres, .. } if amount => {
                        times(Quantity::new(1.0 / litres, Dim::CONC))
                    }
                    Scale::Volume { .. } => times(Quantity::new(1.0, Dim::CONC)),
                })
            }
            Some(Symbol::Parameter(p)) => {
                let param = &self.m.parameters[*p];
                match (self.scale, &param.units) {
                    (Scale::Volume { .. }, Some(u)) if !self.param_dims[*p].is_none() => {
                        let (dim, f) = units::canonical(self.m, self.level, u)
                            .map_err(|e| not_yet("eventAssignment", Some(id), loc, e))?;
                        Ok(times(Quantity::new(f, dim)))
                    }
                    _ => Ok(value),
                }
            }
            Some(Symbol::Compartment(_)) => Err(not_yet(
                "eventAssignment",
                Some(id),
                loc,
                format!(
                    "event `{owner}` changes the size of compartment `{id}` (compartments have a fixed size)"
                ),
            )),
            _ => Err(not_yet(
                "eventAssignment",
                Some(id),
                loc,
                format!("event `{owner}` sets `{id}`, which is not a species or a parameter"),
            )),
        }
    }
}

/// Whether an expression is truth-valued at its top.
fn is_comparison(e: &Expr) -> bool {
    matches!(
        e,
        Expr::Binary(
            BinOp::Lt | BinOp::Le | BinOp::Gt | BinOp::Ge | BinOp::And | BinOp::Or,
            ..
        )
    )
}
