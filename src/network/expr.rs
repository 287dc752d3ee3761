//! Regulated rate laws: a `law` expression checked for dimensions and compiled to a flat
//! postfix program.
//!
//! Evaluation does no name lookups and no allocation: params are folded into constants at
//! compile time, species are loaded by index through a caller-supplied function, and the value
//! stack is a fixed array whose needed depth is known after compilation. The evaluator is generic
//! over [`Scalar`], so the same program yields a value (`f64`) or a value with one directional
//! derivative ([`Dual`]) for the deterministic engine's Jacobian.
//!
//! Functions (CONTRACT §1): `sat(x, K)` = x/(K+x) (Michaelis–Menten / Langmuir saturation),
//! `hill(x, K, n)` = xⁿ/(Kⁿ+xⁿ) (Hill 1910), `inhib(x, K)` = 1/(1+x/K) (hyperbolic
//! inhibition), `exp`, `ln`, `min`, `max`.

use super::parser::{BinOp, Expr};
use super::units::{Dim, Quantity};
use crate::error::Span;
use std::ops::{Add, Div, Mul, Neg, Sub};

/// Deepest value stack a compiled law may need.
pub const MAX_STACK: usize = 32;

/// One instruction of a compiled law.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Op {
    Const(f64),
    Load(u32),
    Add,
    Sub,
    Mul,
    Div,
    Neg,
    Pow,
    PowI(i32),
    Exp,
    Ln,
    Sat,
    Hill,
    Inhib,
    Min,
    Max,
}

/// The functions a law may call, with their number of arguments (`None`: two or more).
fn arity(name: &str) -> Option<Option<usize>> {
    match name {
        "sat" | "inhib" => Some(Some(2)),
        "hill" => Some(Some(3)),
        "exp" | "ln" => Some(Some(1)),
        "min" | "max" => Some(None),
        _ => None,
    }
}

/// A number type the evaluator can run on.
pub trait Scalar:
    Copy
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
{
    fn constant(v: f64) -> Self;
    fn value(self) -> f64;
    fn powf(self, e: Self) -> Self;
    fn powi(self, n: i32) -> Self;
    fn exp(self) -> Self;
    fn ln(self) -> Self;
}

impl Scalar for f64 {
    fn constant(v: f64) -> f64 {
        v
    }
    fn value(self) -> f64 {
        self
    }
    fn powf(self, e: f64) -> f64 {
        f64::powf(self, e)
    }
    fn powi(self, n: i32) -> f64 {
        f64::powi(self, n)
    }
    fn exp(self) -> f64 {
        f64::exp(self)
    }
    fn ln(self) -> f64 {
        f64::ln(self)
    }
}

/// A value and one directional derivative (forward-mode automatic differentiation).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Dual {
    pub v: f64,
    pub d: f64,
}

impl Dual {
    pub fn variable(v: f64) -> Dual {
        Dual { v, d: 1.0 }
    }
}

impl Add for Dual {
    type Output = Dual;
    fn add(self, o: Dual) -> Dual {
        Dual {
            v: self.v + o.v,
            d: self.d + o.d,
        }
    }
}
impl Sub for Dual {
    type Output = Dual;
    fn sub(self, o: Dual) -> Dual {
        Dual {
            v: self.v - o.v,
            d: self.d - o.d,
        }
    }
}
impl Mul for Dual {
    type Output = Dual;
    fn mul(self, o: Dual) -> Dual {
        Dual {
            v: self.v * o.v,
            d: self.d * o.v + self.v * o.d,
        }
    }
}
impl Div for Dual {
    type Output = Dual;
    fn div(self, o: Dual) -> Dual {
        Dual {
            v: self.v / o.v,
            d: (self.d * o.v - self.v * o.d) / (o.v * o.v),
        }
    }
}
impl Neg for Dual {
    type Output = Dual;
    fn neg(self) -> Dual {
        Dual {
            v: -self.v,
            d: -self.d,
        }
    }
}

impl Scalar for Dual {
    fn constant(v: f64) -> Dual {
        Dual { v, d: 0.0 }
    }
    fn value(self) -> f64 {
        self.v
    }
    /// d(u^w) = u^w·(w'·ln u + w·u'/u); the ln term is dropped when w is constant so that
    /// u ≤ 0 stays finite.
    fn powf(self, e: Dual) -> Dual {
        let v = self.v.powf(e.v);
        let mut d = if self.d != 0.0 {
            e.v * self.v.powf(e.v - 1.0) * self.d
        } else {
            0.0
        };
        if e.d != 0.0 {
            d += v * self.v.ln() * e.d;
        }
        Dual { v, d }
    }
    fn powi(self, n: i32) -> Dual {
        let d = if n == 0 || self.d == 0.0 {
            0.0
        } else {
            n as f64 * self.v.powi(n - 1) * self.d
        };
        Dual {
            v: self.v.powi(n),
            d,
        }
    }
    fn exp(self) -> Dual {
        let v = self.v.exp();
        Dual { v, d: v * self.d }
    }
    fn ln(self) -> Dual {
        Dual {
            v: self.v.ln(),
            d: self.d / self.v,
        }
    }
}

/// What a name in a law stands for.
#[derive(Clone, Copy, Debug)]
pub enum Resolved {
    /// A species, by index: its concentration (its count without a volume).
    Species(usize),
    /// A param's value in canonical units.
    Param(Quantity),
}

/// A compiled rate law.
#[derive(Clone, Debug, PartialEq)]
pub struct Law {
    ops: Box<[Op]>,
    /// Species the law reads, sorted, without repeats.
    pub species: Vec<usize>,
    /// Dimension of the law's value.
    pub dim: Dim,
    /// The source text, for display.
    pub text: String,
}

/// A dimension error at a place in the expression.
#[derive(Clone, Debug, PartialEq)]
pub struct LawError {
    pub span: Span,
    pub message: String,
}

fn err<T>(span: Span, message: impl Into<String>) -> Result<T, LawError> {
    Err(LawError {
        span,
        message: message.into(),
    })
}

/// A checked node: its dimension, and its value when it depends on no species.
struct Typed {
    dim: Dim,
    constant: Option<f64>,
    ops: Vec<Op>,
    depth: usize,
}

impl Typed {
    fn constant(value: f64, dim: Dim) -> Typed {
        Typed {
            dim,
            constant: Some(value),
            ops: vec![Op::Const(value)],
            depth: 1,
        }
    }
}

/// Compiles `expr`. `resolve` maps a name to a species or param; `counts_are_numbers` is true in
/// a network without a volume, where molecule counts are pure numbers.
pub fn compile(
    expr: &Expr,
    text: &str,
    resolve: &dyn Fn(&str) -> Option<Resolved>,
    counts_are_numbers: bool,
) -> Result<Law, LawError> {
    let species_dim = if counts_are_numbers {
        Dim::NONE
    } else {
        Dim::CONC
    };
    let norm = |d: Dim| {
        if counts_are_numbers {
            d.without_count()
        } else {
            d
        }
    };
    let typed = check(expr, resolve, species_dim, &norm)?;
    if typed.depth > MAX_STACK {
        return err(
            expr.span(),
            format!("this rate law needs a stack deeper than {MAX_STACK}; split it into params"),
        );
    }
    let mut species: Vec<usize> = typed
        .ops
        .iter()
        .filter_map(|op| match op {
            Op::Load(i) => Some(*i as usize),
            _ => None,
        })
        .collect();
    species.sort_unstable();
    species.dedup();
    Ok(Law {
        ops: typed.ops.into_boxed_slice(),
        species,
        dim: typed.dim,
        text: text.trim().to_string(),
    })
}

/// Checks a node and rejects a constant part that is not a finite number (`0/0`, `ln(0)`).
fn check(
    expr: &Expr,
    resolve: &dyn Fn(&str) -> Option<Resolved>,
    species_dim: Dim,
    norm: &dyn Fn(Dim) -> Dim,
) -> Result<Typed, LawError> {
    let t = check_node(expr, resolve, species_dim, norm)?;
    match t.constant {
        Some(v) if !v.is_finite() => err(
            expr.span(),
            format!("this part of the rate law is the constant {v}, not a finite number"),
        ),
        _ => Ok(t),
    }
}

fn check_node(
    expr: &Expr,
    resolve: &dyn Fn(&str) -> Option<Resolved>,
    species_dim: Dim,
    norm: &dyn Fn(Dim) -> Dim,
) -> Result<Typed, LawError> {
    let rec = |e: &Expr| check(e, resolve, species_dim, norm);
    match expr {
        Expr::Number(lit) => Ok(Typed::constant(lit.quantity.value, norm(lit.quantity.dim))),
        Expr::Name(name) => match resolve(&name.text) {
            Some(Resolved::Param(q)) => Ok(Typed::constant(q.value, norm(q.dim))),
            Some(Resolved::Species(i)) => Ok(Typed {
                dim: species_dim,
                constant: None,
                ops: vec![Op::Load(i as u32)],
                depth: 1,
            }),
            None => err(
                name.span,
                format!("unknown name `{}`: not a species or a param", name.text),
            ),
        },
        Expr::Neg(inner, _) => {
            let t = rec(inner)?;
            Ok(unary(t, Op::Neg, None))
        }
        Expr::Binary(op, a, b, span) => {
            let (ta, tb) = (rec(a)?, rec(b)?);
            let dim = match op {
                BinOp::Add | BinOp::Sub => {
                    same_dim(&ta, &tb, a.span(), b.span(), "add or subtract")?;
                    ta.dim
                }
                BinOp::Mul => ta.dim.times(tb.dim),
                BinOp::Div => ta.dim.per(tb.dim),
                BinOp::Pow => return power(ta, tb, a.span(), b.span(), *span),
            };
            let code = match op {
                BinOp::Add => Op::Add,
                BinOp::Sub => Op::Sub,
                BinOp::Mul => Op::Mul,
                BinOp::Div => Op::Div,
                BinOp::Pow => unreachable!(),
            };
            Ok(binary(ta, tb, code, dim))
        }
        Expr::Call(name, args, span) => {
            let Some(n) = arity(&name.text) else {
                return err(
                    name.span,
                    format!(
                        "unknown function `{}`; the functions are sat, hill, inhib, exp, ln, min, max",
                        name.text
                    ),
                );
            };
            match n {
                Some(n) if args.len() != n => {
                    return err(
                        *span,
                        format!(
                            "`{}` takes {n} argument{}, found {}",
                            name.text,
                            if n == 1 { "" } else { "s" },
                            args.len()
                        ),
                    )
                }
                None if args.len() < 2 => {
                    return err(
                        *span,
                        format!("`{}` takes two or more arguments", name.text),
                    )
                }
                _ => {}
            }
            let typed: Vec<Typed> = args.iter().map(rec).collect::<Result<_, _>>()?;
            match name.text.as_str() {
                "exp" | "ln" => {
                    dimensionless(&typed[0], args[0].span(), &name.text)?;
                    let op = if name.text == "exp" { Op::Exp } else { Op::Ln };
                    let t = typed.into_iter().next().unwrap();
                    Ok(unary(t, op, Some(Dim::NONE)))
                }
                "sat" | "inhib" => {
                    same_dim(
                        &typed[0],
                        &typed[1],
                        args[0].span(),
                        args[1].span(),
                        &name.text,
                    )?;
                    let op = if name.text == "sat" {
                        Op::Sat
                    } else {
                        Op::Inhib
                    };
                    let mut it = typed.into_iter();
                    let (x, k) = (it.next().unwrap(), it.next().unwrap());
                    Ok(binary(x, k, op, Dim::NONE))
                }
                "hill" => {
                    same_dim(&typed[0], &typed[1], args[0].span(), args[1].span(), "hill")?;
                    dimensionless(&typed[2], args[2].span(), "the Hill coefficient of hill")?;
                    let mut it = typed.into_iter();
                    let (x, k, n) = (it.next().unwrap(), it.next().unwrap(), it.next().unwrap());
                    Ok(ternary(x, k, n, Op::Hill, Dim::NONE))
                }
                _ => {
                    let op = if name.text == "min" { Op::Min } else { Op::Max };
                    let mut it = typed.into_iter().zip(args.iter());
                    let (mut acc, first) = it.next().unwrap();
                    for (t, a) in it {
                        same_dim(&acc, &t, first.span(), a.span(), &name.text)?;
                        let d = acc.dim;
                        acc = binary(acc, t, op, d);
                    }
                    Ok(acc)
                }
            }
        }
    }
}

fn same_dim(a: &Typed, b: &Typed, sa: Span, sb: Span, what: &str) -> Result<(), LawError> {
    if a.dim == b.dim {
        return Ok(());
    }
    err(
        sa.to(sb),
        format!(
            "cannot {what} {} and {}: the dimensions differ",
            a.dim, b.dim
        ),
    )
}

fn dimensionless(t: &Typed, span: Span, what: &str) -> Result<(), LawError> {
    if t.dim.is_none() {
        return Ok(());
    }
    err(
        span,
        format!(
            "the argument of {what} must be dimensionless, but it is {}",
            t.dim
        ),
    )
}

/// Evaluates a folded constant with the same code the evaluator runs.
fn fold(ops: &[Op]) -> f64 {
    run::<f64>(ops, |_| 0.0)
}

fn unary(t: Typed, op: Op, dim: Option<Dim>) -> Typed {
    let dim = dim.unwrap_or(t.dim);
    let mut ops = t.ops;
    ops.push(op);
    finish(ops, dim, t.constant.is_some(), t.depth)
}

fn binary(a: Typed, b: Typed, op: Op, dim: Dim) -> Typed {
    let constant = a.constant.is_some() && b.constant.is_some();
    let depth = a.depth.max(b.depth + 1);
    let mut ops = a.ops;
    ops.extend(b.ops);
    ops.push(op);
    finish(ops, dim, constant, depth)
}

fn ternary(a: Typed, b: Typed, c: Typed, op: Op, dim: Dim) -> Typed {
    let constant = a.constant.is_some() && b.constant.is_some() && c.constant.is_some();
    let depth = a.depth.max(b.depth + 1).max(c.depth + 2);
    let mut ops = a.ops;
    ops.extend(b.ops);
    ops.extend(c.ops);
    ops.push(op);
    finish(ops, dim, constant, depth)
}

fn finish(ops: Vec<Op>, dim: Dim, constant: bool, depth: usize) -> Typed {
    if constant {
        return Typed::constant(fold(&ops), dim);
    }
    Typed {
        dim,
        constant: None,
        ops,
        depth,
    }
}

/// `base ^ exponent`: the exponent must be a known number when the base has a dimension, and
/// then a whole number.
fn power(base: Typed, exp: Typed, sb: Span, se: Span, span: Span) -> Result<Typed, LawError> {
    dimensionless(&exp, se, "a power")?;
    if base.dim.is_none() {
        if let Some(n) = exp.constant.filter(|n| n.fract() == 0.0 && n.abs() <= 64.0) {
            return Ok(unary(base, Op::PowI(n as i32), Some(Dim::NONE)));
        }
        return Ok(binary(base, exp, Op::Pow, Dim::NONE));
    }
    match exp.constant {
        Some(n) if n.fract() == 0.0 && n.abs() <= 8.0 => {
            let dim = base.dim.powi(n as i32);
            Ok(unary(base, Op::PowI(n as i32), Some(dim)))
        }
        _ => err(
            sb.to(se).to(span),
            format!(
                "a quantity with dimension {} can only be raised to a fixed whole power",
                base.dim
            ),
        ),
    }
}

/// Runs a program; `load(i)` gives species i's value.
#[inline]
fn run<T: Scalar>(ops: &[Op], load: impl Fn(usize) -> T) -> T {
    let mut stack = [T::constant(0.0); MAX_STACK];
    let mut top = 0usize;
    for op in ops {
        match *op {
            Op::Const(v) => {
                stack[top] = T::constant(v);
                top += 1;
            }
            Op::Load(i) => {
                stack[top] = load(i as usize);
                top += 1;
            }
            Op::Neg => stack[top - 1] = -stack[top - 1],
            Op::PowI(n) => stack[top - 1] = stack[top - 1].powi(n),
            Op::Exp => stack[top - 1] = stack[top - 1].exp(),
            Op::Ln => stack[top - 1] = stack[top - 1].ln(),
            Op::Hill => {
                let (x, k, n) = (stack[top - 3], stack[top - 2], stack[top - 1]);
                top -= 2;
                stack[top - 1] = if x.value() <= 0.0 {
                    T::constant(0.0)
                } else {
                    let r = (x / k).powf(n);
                    r / (T::constant(1.0) + r)
                };
            }
            _ => {
                let (a, b) = (stack[top - 2], stack[top - 1]);
                top -= 1;
                stack[top - 1] = match *op {
                    Op::Add => a + b,
                    Op::Sub => a - b,
                    Op::Mul => a * b,
                    Op::Div => a / b,
                    Op::Pow => a.powf(b),
                    Op::Sat => a / (b + a),
                    Op::Inhib => T::constant(1.0) / (T::constant(1.0) + a / b),
                    Op::Min => {
                        if b.value() < a.value() {
                            b
                        } else {
                            a
                        }
                    }
                    Op::Max => {
                        if b.value() > a.value() {
                            b
                        } else {
                            a
                        }
                    }
                    _ => unreachable!("unary ops handled above"),
                };
            }
        }
    }
    stack[0]
}

impl Law {
    /// The law's value with species values given by `load` (concentrations, or counts in a
    /// network without a volume), in canonical units of [`Law::dim`].
    #[inline]
    pub fn eval<T: Scalar>(&self, load: impl Fn(usize) -> T) -> T {
        run(&self.ops, load)
    }

    /// The compiled program, for inspection.
    pub fn ops(&self) -> &[Op] {
        &self.ops
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::parser::{parse, Item, Rate};

    fn law_of(src: &str, with_volume: bool) -> Result<Law, LawError> {
        let line = format!("step r 0 -> X @ law {src}\n");
        let ast = parse("t.crn", line.as_bytes()).unwrap();
        let Item::Step(s) = &ast.items[0] else {
            panic!()
        };
        let Rate::Law(e) = &s.forward else { panic!() };
        let resolve = |n: &str| match n {
            "X" => Some(Resolved::Species(0)),
            "Y" => Some(Resolved::Species(1)),
            "vmax" => Some(Resolved::Param(Quantity::new(2e-9, Dim::new(1, -1, 0, 0)))),
            "K" => Some(Resolved::Param(Quantity::new(5e-9, Dim::CONC))),
            "n" => Some(Resolved::Param(Quantity::bare(2.0))),
            "k" => Some(Resolved::Param(Quantity::new(0.1, Dim::new(0, -1, 0, 0)))),
            _ => None,
        };
        compile(e, src, &resolve, !with_volume)
    }

    fn at(l: &Law, x: f64, y: f64) -> f64 {
        l.eval::<f64>(|i| if i == 0 { x } else { y })
    }

    // Formulas of CONTRACT §1: sat = x/(K+x), hill = xⁿ/(Kⁿ+xⁿ), inhib = 1/(1+x/K).
    #[test]
    fn functions_match_their_formulas() {
        let l = law_of("vmax * sat(X, K)", true).unwrap();
        assert_eq!(l.dim, Dim::new(1, -1, 0, 0));
        let v = at(&l, 3e-9, 0.0);
        assert!((v - 2e-9 * 3.0 / 8.0).abs() < 1e-24);
        let l = law_of("vmax * hill(X, K, n)", true).unwrap();
        let v = at(&l, 3e-9, 0.0);
        assert!((v - 2e-9 * 9.0 / 34.0).abs() < 1e-23);
        let l = law_of("vmax * inhib(Y, K)", true).unwrap();
        let v = at(&l, 0.0, 10e-9);
        assert!((v - 2e-9 / 3.0).abs() < 1e-23);
        let l = law_of(
            "k * X * exp(-1) * ln(exp(2)) * min(X, Y, K) / max(X, K)",
            true,
        )
        .unwrap();
        let v = at(&l, 1e-9, 7e-9);
        let want = 0.1 * 1e-9 * (-1f64).exp() * 2.0 * 1e-9 / 5e-9;
        assert!((v - want).abs() < 1e-12 * want);
    }

    #[test]
    fn constants_are_folded() {
        let l = law_of("k * (2 + 3) * 0.5 * X", true).unwrap();
        // k·5·0.5 folds to one constant: Const, Load, Mul.
        assert_eq!(l.ops().len(), 3, "{:?}", l.ops());
        assert!((at(&l, 2.0, 0.0) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn count_networks_treat_counts_as_numbers() {
        // DSMTS 003-05 style: 0.5·0.001·(100 − 2·P2)·(99 − 2·P2) with P2 a count.
        let l = law_of("0.5 * 0.001 * (100 - 2 * X) * (99 - 2 * X)", false).unwrap();
        assert!(l.dim.is_none());
        assert!((at(&l, 10.0, 0.0) - 0.5 * 0.001 * 80.0 * 79.0).abs() < 1e-12);
    }

    #[test]
    fn dimension_errors() {
        let e = law_of("X + k", true).unwrap_err();
        assert!(e.message.contains("cannot add"), "{}", e.message);
        let e = law_of("exp(X)", true).unwrap_err();
        assert!(e.message.contains("dimensionless"));
        let e = law_of("sat(X, k)", true).unwrap_err();
        assert!(e.message.contains("cannot sat"));
        let e = law_of("hill(X, K, K)", true).unwrap_err();
        assert!(e.message.contains("Hill coefficient"));
        let e = law_of("X ^ Y", true).unwrap_err();
        assert!(e.message.contains("dimensionless"));
        let e = law_of("X ^ 0.5", true).unwrap_err();
        assert!(e.message.contains("whole power"));
        let e = law_of("foo(X)", true).unwrap_err();
        assert!(e.message.contains("unknown function"));
        let e = law_of("sat(X)", true).unwrap_err();
        assert!(e.message.contains("takes 2 arguments"));
        let e = law_of("Z * k", true).unwrap_err();
        assert!(e.message.contains("unknown name `Z`"));
    }

    #[test]
    fn dual_numbers_give_exact_derivatives() {
        // d/dX of vmax·X/(K+X) = vmax·K/(K+X)²  (quotient rule)
        let l = law_of("vmax * sat(X, K) * X ^ 2", true).unwrap();
        let x = 3e-9;
        let d = l
            .eval::<Dual>(|i| {
                if i == 0 {
                    Dual::variable(x)
                } else {
                    Dual::constant(0.0)
                }
            })
            .d;
        let (v, k) = (2e-9, 5e-9);
        let want = v * k / (k + x).powi(2) * x * x + v * x / (k + x) * 2.0 * x;
        assert!((d - want).abs() < 1e-12 * want.abs());
        let l = law_of("vmax * hill(X, K, n)", true).unwrap();
        let d = l.eval::<Dual>(|_| Dual::variable(x)).d;
        // d/dx xⁿ/(Kⁿ+xⁿ) = n·Kⁿ·xⁿ⁻¹/(Kⁿ+xⁿ)²
        let want = 2e-9 * 2.0 * k * k * x / (k * k + x * x).powi(2);
        assert!((d - want).abs() < 1e-9 * want.abs());
    }
}
