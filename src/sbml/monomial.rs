//! A kinetic law as a monomial: number · Π parameterᵃ · Π compartmentᵇ · Π speciesᶜ.
//!
//! The mapper reads mass action from this form (a constant times the reactants), and checks
//! copyloop's own reading of a reaction against it. Products, quotients and whole powers of
//! numbers, parameters, compartments and species are monomials; anything else (a sum, a
//! function) is not.

use super::math::{Math, MathKind, Op};

/// What a leaf of a formula stands for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Factor {
    Number(f64),
    Parameter(usize),
    Compartment(usize),
    Species(usize),
}

/// number · Π parameters^power · Π compartments^power · Π species^power, each index once.
#[derive(Clone, Debug, PartialEq)]
pub struct Monomial {
    pub number: f64,
    pub parameters: Vec<(usize, i32)>,
    pub compartments: Vec<(usize, i32)>,
    pub species: Vec<(usize, i32)>,
}

/// Largest whole power read inside a monomial.
const MAX_POWER: i32 = 8;

fn merge(into: &mut Vec<(usize, i32)>, from: &[(usize, i32)], times: i32) {
    for &(i, p) in from {
        match into.iter_mut().find(|e| e.0 == i) {
            Some(e) => e.1 += p * times,
            None => into.push((i, p * times)),
        }
    }
    into.retain(|e| e.1 != 0);
}

impl Monomial {
    fn one() -> Monomial {
        Monomial {
            number: 1.0,
            parameters: Vec::new(),
            compartments: Vec::new(),
            species: Vec::new(),
        }
    }

    fn leaf(f: Factor) -> Monomial {
        let mut m = Monomial::one();
        match f {
            Factor::Number(v) => m.number = v,
            Factor::Parameter(i) => m.parameters.push((i, 1)),
            Factor::Compartment(i) => m.compartments.push((i, 1)),
            Factor::Species(i) => m.species.push((i, 1)),
        }
        m
    }

    /// self · other^power
    fn times(mut self, other: &Monomial, power: i32) -> Monomial {
        self.number *= other.number.powi(power);
        merge(&mut self.parameters, &other.parameters, power);
        merge(&mut self.compartments, &other.compartments, power);
        merge(&mut self.species, &other.species, power);
        self
    }

    /// The law `m` as a monomial, `leaf` saying what each number, identifier or csymbol is
    /// (`None`: not a factor of a monomial).
    pub fn of(m: &Math, leaf: &dyn Fn(&Math) -> Option<Factor>) -> Option<Monomial> {
        match &m.kind {
            MathKind::Apply(Op::Times, args) => {
                let mut acc = Monomial::one();
                for a in args {
                    acc = acc.times(&Monomial::of(a, leaf)?, 1);
                }
                Some(acc)
            }
            MathKind::Apply(Op::Divide, args) => {
                let a = Monomial::of(&args[0], leaf)?;
                let b = Monomial::of(&args[1], leaf)?;
                (b.number != 0.0).then(|| a.times(&b, -1))
            }
            MathKind::Apply(Op::Power, args) => {
                let base = Monomial::of(&args[0], leaf)?;
                let Some(Factor::Number(p)) = leaf(&args[1]) else {
                    return None;
                };
                let whole = p.fract() == 0.0 && p.abs() <= f64::from(MAX_POWER);
                (whole && (p >= 0.0 || base.number != 0.0))
                    .then(|| Monomial::one().times(&base, p as i32))
            }
            MathKind::Apply(..) | MathKind::Call(..) | MathKind::Piecewise { .. } => None,
            _ => leaf(m).map(Monomial::leaf),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sbml::error::Loc;

    fn ci(x: &str) -> Math {
        Math::new(MathKind::Ident(x.into()), Loc::default())
    }

    fn ap(op: Op, a: Vec<Math>) -> Math {
        Math::new(MathKind::Apply(op, a), Loc::default())
    }

    fn leaf(m: &Math) -> Option<Factor> {
        match &m.kind {
            MathKind::Number(v) => Some(Factor::Number(*v)),
            MathKind::Ident(x) => match x.as_str() {
                "k" => Some(Factor::Parameter(0)),
                "V" => Some(Factor::Compartment(0)),
                "A" => Some(Factor::Species(0)),
                "B" => Some(Factor::Species(1)),
                _ => None,
            },
            _ => None,
        }
    }

    #[test]
    fn products_quotients_and_whole_powers() {
        // V * k * A^2 / 2
        let law = ap(
            Op::Divide,
            vec![
                ap(
                    Op::Times,
                    vec![
                        ci("V"),
                        ci("k"),
                        ap(Op::Power, vec![ci("A"), Math::number(2.0, Loc::default())]),
                    ],
                ),
                Math::number(2.0, Loc::default()),
            ],
        );
        let m = Monomial::of(&law, &leaf).unwrap();
        assert_eq!(m.number, 0.5);
        assert_eq!(m.parameters, vec![(0, 1)]);
        assert_eq!(m.compartments, vec![(0, 1)]);
        assert_eq!(m.species, vec![(0, 2)]);
        // A * B / A = B
        let law = ap(
            Op::Divide,
            vec![ap(Op::Times, vec![ci("A"), ci("B")]), ci("A")],
        );
        assert_eq!(Monomial::of(&law, &leaf).unwrap().species, vec![(1, 1)]);
        // sums, unknown names and fractional powers are not monomials
        assert!(Monomial::of(&ap(Op::Plus, vec![ci("A"), ci("B")]), &leaf).is_none());
        assert!(Monomial::of(&ap(Op::Times, vec![ci("A"), ci("z")]), &leaf).is_none());
        let root = ap(Op::Power, vec![ci("A"), Math::number(0.5, Loc::default())]);
        assert!(Monomial::of(&root, &leaf).is_none());
    }
}
