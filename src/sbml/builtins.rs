//! The network language's rate-law functions as SBML function definitions, both ways.
//!
//! `sat(x, K)` = x/(K + x), `inhib(x, K)` = 1/(1 + x/K) and `hill(x, K, n)` = (x/K)ⁿ/(1 + (x/K)ⁿ)
//! for x > 0, else 0 (the formulas of src/network/expr.rs). The exporter writes each as a
//! `lambda`; the importer recognises a function definition whose body is exactly one of these
//! (bound variables renamed) and compiles its calls to the network's own function, so a law
//! keeps its evaluation, bit for bit, and its text. Any other function definition is expanded
//! at its call sites.

use super::error::Loc;
use super::math::{Math, MathKind, Op};
use super::model::{FunctionDefinition, Model};
use std::collections::HashMap;

/// A function of the network language.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Builtin {
    Sat,
    Inhib,
    Hill,
}

fn ci(x: &str) -> Math {
    Math::new(MathKind::Ident(x.to_string()), Loc::default())
}

fn cn(v: f64) -> Math {
    Math::number(v, Loc::default())
}

fn ap(op: Op, args: Vec<Math>) -> Math {
    Math::new(MathKind::Apply(op, args), Loc::default())
}

impl Builtin {
    pub const ALL: [Builtin; 3] = [Builtin::Sat, Builtin::Inhib, Builtin::Hill];

    /// Its name in the network language (and the id the exporter gives its definition).
    pub fn name(self) -> &'static str {
        match self {
            Builtin::Sat => "sat",
            Builtin::Inhib => "inhib",
            Builtin::Hill => "hill",
        }
    }

    pub fn from_name(name: &str) -> Option<Builtin> {
        Builtin::ALL.into_iter().find(|b| b.name() == name)
    }

    /// Names of its bound variables as the exporter writes them.
    pub fn params(self) -> &'static [&'static str] {
        match self {
            Builtin::Sat | Builtin::Inhib => &["x", "K"],
            Builtin::Hill => &["x", "K", "n"],
        }
    }

    /// Its body over the bound variables `v`.
    pub fn body(self, v: &[String]) -> Math {
        let x = || ci(&v[0]);
        let k = || ci(&v[1]);
        match self {
            Builtin::Sat => ap(Op::Divide, vec![x(), ap(Op::Plus, vec![k(), x()])]),
            Builtin::Inhib => ap(
                Op::Divide,
                vec![
                    cn(1.0),
                    ap(Op::Plus, vec![cn(1.0), ap(Op::Divide, vec![x(), k()])]),
                ],
            ),
            Builtin::Hill => {
                let r = || ap(Op::Power, vec![ap(Op::Divide, vec![x(), k()]), ci(&v[2])]);
                Math::new(
                    MathKind::Piecewise {
                        pieces: vec![(cn(0.0), ap(Op::Leq, vec![x(), cn(0.0)]))],
                        otherwise: Some(Box::new(ap(
                            Op::Divide,
                            vec![r(), ap(Op::Plus, vec![cn(1.0), r()])],
                        ))),
                    },
                    Loc::default(),
                )
            }
        }
    }

    /// Its SBML function definition.
    pub fn definition(self) -> FunctionDefinition {
        let params: Vec<String> = self.params().iter().map(|p| p.to_string()).collect();
        FunctionDefinition {
            id: self.name().to_string(),
            body: Some(self.body(&params)),
            params,
            loc: Loc::default(),
        }
    }

    /// The function a definition is, if its body is exactly one of these.
    pub fn recognise(def: &FunctionDefinition) -> Option<Builtin> {
        let body = def.body.as_ref()?;
        Builtin::ALL
            .into_iter()
            .find(|b| b.params().len() == def.params.len() && b.body(&def.params).same(body))
    }
}

/// The model's function definitions that are functions of the network language, by id.
pub fn recognised(model: &Model) -> HashMap<String, Builtin> {
    model
        .function_definitions
        .iter()
        .filter_map(|d| Builtin::recognise(d).map(|b| (d.id.clone(), b)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sbml::eval;

    // The formulas of the network language (the README's network language): sat = x/(K+x), hill = xⁿ/(Kⁿ+xⁿ),
    // inhib = 1/(1+x/K).
    #[test]
    fn bodies_are_the_formulas() {
        let v = |b: Builtin| -> Vec<String> { b.params().iter().map(|s| s.to_string()).collect() };
        let at = |b: Builtin, args: &[f64]| {
            let names = v(b);
            let body = b.body(&names);
            let value = |id: &str| names.iter().position(|n| n == id).map(|i| args[i]);
            eval::eval(&body, &value, 0.0).unwrap()
        };
        assert!((at(Builtin::Sat, &[3.0, 5.0]) - 3.0 / 8.0).abs() < 1e-15);
        assert!((at(Builtin::Inhib, &[3.0, 5.0]) - 1.0 / 1.6).abs() < 1e-15);
        let h = at(Builtin::Hill, &[3.0, 5.0, 2.0]);
        assert!((h - 9.0 / 34.0).abs() < 1e-15);
        assert_eq!(at(Builtin::Hill, &[0.0, 5.0, 2.0]), 0.0);
    }

    #[test]
    fn definitions_are_recognised_under_other_names_only_when_exact() {
        let mut d = Builtin::Sat.definition();
        d.id = "michaelis".into();
        d.params = vec!["s".into(), "km".into()];
        d.body = Some(Builtin::Sat.body(&d.params));
        assert_eq!(Builtin::recognise(&d), Some(Builtin::Sat));
        // K + x and x + K are the same number, but not the same evaluation order.
        d.body = Some(ap(
            Op::Divide,
            vec![ci("s"), ap(Op::Plus, vec![ci("s"), ci("km")])],
        ));
        assert_eq!(Builtin::recognise(&d), None);
        for b in Builtin::ALL {
            assert_eq!(Builtin::recognise(&b.definition()), Some(b));
        }
    }
}
