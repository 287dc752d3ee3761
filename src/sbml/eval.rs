//! Evaluating a formula on numbers: initial assignments, and values fixed at load time.
//!
//! Booleans are numbers here, true = 1 and false = 0, and in a condition any non-zero value is
//! true (SBML Level 3 Version 2, §3.4.9). The functions follow MathML 2.0 content markup, whose
//! definitions are those of Abramowitz & Stegun (1964, Handbook of Mathematical Functions, §4):
//! sec = 1/cos, csc = 1/sin, cot = cos/sin, sech = 1/cosh, csch = 1/sinh, coth = cosh/sinh;
//! arcsec x = arccos(1/x), arccsc x = arcsin(1/x), arccot x = arctan(1/x), arcsech x =
//! arccosh(1/x), arccsch x = arcsinh(1/x), arccoth x = arctanh(1/x) (A&S 4.4.8–4.4.10,
//! 4.6.15–4.6.17); `root(n, x)` = x^(1/n), the real root for odd whole n and negative x;
//! `log(b, x)` = ln x / ln b; `factorial(n)` = Γ(n + 1); `quotient(a, b)` = the integer part of
//! a/b and `rem(a, b)` = a − b·quotient(a, b) (MathML 2.0, §4.4.3.1, \[M\]). `piecewise` takes
//! the first piece whose condition holds; with none and no `otherwise` its value is undefined,
//! an error here.

use super::error::Loc;
use super::math::{Math, MathKind, Op, SBML_AVOGADRO};

/// A formula that cannot be evaluated: an unknown name, an undefined `piecewise`, …
#[derive(Clone, Debug, PartialEq)]
pub struct EvalError {
    pub loc: Loc,
    pub message: String,
}

fn fail<T>(m: &Math, message: impl Into<String>) -> Result<T, EvalError> {
    Err(EvalError {
        loc: m.loc,
        message: message.into(),
    })
}

fn truth(v: f64) -> bool {
    v != 0.0
}

fn num(b: bool) -> f64 {
    if b {
        1.0
    } else {
        0.0
    }
}

/// The value of `m` at time `time`, with `value(id)` giving each identifier's value.
pub fn eval(m: &Math, value: &dyn Fn(&str) -> Option<f64>, time: f64) -> Result<f64, EvalError> {
    let ev = |x: &Math| eval(x, value, time);
    match &m.kind {
        MathKind::Number(v) => Ok(*v),
        MathKind::Boolean(b) => Ok(num(*b)),
        MathKind::Ident(id) => match value(id) {
            Some(v) => Ok(v),
            None => fail(m, format!("`{id}` has no value here")),
        },
        MathKind::Time => Ok(time),
        MathKind::Avogadro => Ok(SBML_AVOGADRO),
        MathKind::Piecewise { pieces, otherwise } => {
            for (v, c) in pieces {
                if truth(ev(c)?) {
                    return ev(v);
                }
            }
            match otherwise {
                Some(o) => ev(o),
                None => fail(
                    m,
                    "no piece of this piecewise holds, and it has no otherwise",
                ),
            }
        }
        MathKind::Call(f, _) => fail(m, format!("call of `{f}` was not expanded")),
        MathKind::Delay(..) => fail(m, "delay cannot be evaluated"),
        MathKind::RateOf(..) => fail(m, "rateOf cannot be evaluated"),
        MathKind::Apply(op, args) => {
            // Logical operators evaluate their arguments lazily only in the sense of MathML:
            // every argument is defined, so all are evaluated.
            let a: Vec<f64> = args.iter().map(ev).collect::<Result<_, _>>()?;
            Ok(apply(*op, &a))
        }
    }
}

/// An operator on evaluated arguments (their number is checked by the reader).
pub fn apply(op: Op, a: &[f64]) -> f64 {
    use Op::*;
    let x = a.first().copied().unwrap_or(0.0);
    match op {
        Plus => a.iter().sum(),
        Times => a.iter().product(),
        Minus => {
            if a.len() == 1 {
                -x
            } else {
                a[0] - a[1]
            }
        }
        Divide => a[0] / a[1],
        Power => a[0].powf(a[1]),
        Root => root(a[0], a[1]),
        Abs => x.abs(),
        Exp => x.exp(),
        Ln => x.ln(),
        Log => {
            if a[0] == 10.0 {
                a[1].log10()
            } else {
                a[1].ln() / a[0].ln()
            }
        }
        Floor => x.floor(),
        Ceiling => x.ceil(),
        Factorial => factorial(x),
        Quotient => (a[0] / a[1]).trunc(),
        Rem => a[0] - a[1] * (a[0] / a[1]).trunc(),
        Max => a.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        Min => a.iter().copied().fold(f64::INFINITY, f64::min),
        Eq => num(a.windows(2).all(|w| w[0] == w[1])),
        Neq => num(a[0] != a[1]),
        Gt => num(a.windows(2).all(|w| w[0] > w[1])),
        Lt => num(a.windows(2).all(|w| w[0] < w[1])),
        Geq => num(a.windows(2).all(|w| w[0] >= w[1])),
        Leq => num(a.windows(2).all(|w| w[0] <= w[1])),
        And => num(a.iter().all(|&v| truth(v))),
        Or => num(a.iter().any(|&v| truth(v))),
        Xor => num(a.iter().filter(|&&v| truth(v)).count() % 2 == 1),
        Not => num(!truth(x)),
        Implies => num(!truth(a[0]) || truth(a[1])),
        Sin => x.sin(),
        Cos => x.cos(),
        Tan => x.tan(),
        Sec => 1.0 / x.cos(),
        Csc => 1.0 / x.sin(),
        Cot => x.cos() / x.sin(),
        Sinh => x.sinh(),
        Cosh => x.cosh(),
        Tanh => x.tanh(),
        Sech => 1.0 / x.cosh(),
        Csch => 1.0 / x.sinh(),
        Coth => x.cosh() / x.sinh(),
        Arcsin => x.asin(),
        Arccos => x.acos(),
        Arctan => x.atan(),
        Arcsec => (1.0 / x).acos(),
        Arccsc => (1.0 / x).asin(),
        Arccot => (1.0 / x).atan(),
        Arcsinh => x.asinh(),
        Arccosh => x.acosh(),
        Arctanh => x.atanh(),
        Arcsech => (1.0 / x).acosh(),
        Arccsch => (1.0 / x).asinh(),
        Arccoth => (1.0 / x).atanh(),
    }
}

/// x^(1/n); for negative x and odd whole n, the real root −|x|^(1/n).
fn root(n: f64, x: f64) -> f64 {
    if x < 0.0 && n.fract() == 0.0 && (n as i64) % 2 != 0 {
        -(-x).powf(1.0 / n)
    } else {
        x.powf(1.0 / n)
    }
}

/// n! = Γ(n + 1): the exact product for whole n up to 170, the gamma function otherwise.
fn factorial(n: f64) -> f64 {
    if n.fract() == 0.0 && (0.0..=170.0).contains(&n) {
        (1..=n as u32).map(f64::from).product()
    } else {
        statrs::function::gamma::gamma(n + 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(v: f64) -> Math {
        Math::number(v, Loc::default())
    }

    fn ap(op: Op, a: &[f64]) -> f64 {
        let m = Math::new(
            MathKind::Apply(op, a.iter().map(|&v| c(v)).collect()),
            Loc::default(),
        );
        eval(&m, &|_| None, 0.0).unwrap()
    }

    // Identities of Abramowitz & Stegun (1964) §4 [verified: handbook formulas], checked at
    // arbitrary points.
    #[test]
    fn reciprocal_and_inverse_functions_follow_their_definitions() {
        let x = 0.7;
        assert!((ap(Op::Sec, &[x]) * x.cos() - 1.0).abs() < 1e-15);
        assert!((ap(Op::Cot, &[x]) - 1.0 / x.tan()).abs() < 1e-15);
        assert!((ap(Op::Coth, &[x]) - 1.0 / x.tanh()).abs() < 1e-14);
        // arcsec(sec x) = x for x in [0, π]; arccoth(coth x) = x.
        assert!((ap(Op::Arcsec, &[1.0 / x.cos()]) - x).abs() < 1e-14);
        assert!((ap(Op::Arccsc, &[1.0 / x.sin()]) - x).abs() < 1e-14);
        assert!((ap(Op::Arccot, &[1.0 / x.tan()]) - x).abs() < 1e-14);
        assert!((ap(Op::Arcsech, &[1.0 / x.cosh()]) - x).abs() < 1e-14);
        assert!((ap(Op::Arccsch, &[1.0 / x.sinh()]) - x).abs() < 1e-14);
        assert!((ap(Op::Arccoth, &[1.0 / x.tanh()]) - x).abs() < 1e-14);
        // arccosh x = ln(x + √(x²−1)) (A&S 4.6.21).
        let y: f64 = 2.5;
        assert!((ap(Op::Arccosh, &[y]) - (y + (y * y - 1.0).sqrt()).ln()).abs() < 1e-15);
    }

    #[test]
    fn arithmetic_roots_logs_and_factorials() {
        assert_eq!(ap(Op::Root, &[3.0, -8.0]), -2.0);
        assert!((ap(Op::Root, &[2.0, 2.0]) - std::f64::consts::SQRT_2).abs() < 1e-15);
        assert!((ap(Op::Log, &[10.0, 1000.0]) - 3.0).abs() < 1e-15);
        assert!((ap(Op::Log, &[2.0, 8.0]) - 3.0).abs() < 1e-15);
        assert_eq!(ap(Op::Factorial, &[5.0]), 120.0);
        // Γ(1.5 + 1) = 1.5·0.5·√π [verified: Γ(1/2) = √π].
        let g = 1.5 * 0.5 * std::f64::consts::PI.sqrt();
        assert!((ap(Op::Factorial, &[1.5]) - g).abs() < 1e-13);
        assert_eq!(ap(Op::Quotient, &[-7.0, 2.0]), -3.0);
        assert_eq!(ap(Op::Rem, &[-7.0, 2.0]), -1.0);
        assert_eq!(ap(Op::Plus, &[]), 0.0);
        assert_eq!(ap(Op::Times, &[]), 1.0);
        assert_eq!(ap(Op::Minus, &[3.0]), -3.0);
    }

    #[test]
    fn relations_and_logic_are_n_ary() {
        assert_eq!(ap(Op::Lt, &[1.0, 2.0, 3.0]), 1.0);
        assert_eq!(ap(Op::Lt, &[1.0, 3.0, 2.0]), 0.0);
        assert_eq!(ap(Op::Eq, &[2.0, 2.0, 2.0]), 1.0);
        assert_eq!(ap(Op::Xor, &[1.0, 1.0, 1.0]), 1.0);
        assert_eq!(ap(Op::And, &[]), 1.0);
        assert_eq!(ap(Op::Or, &[]), 0.0);
        assert_eq!(ap(Op::Implies, &[0.0, 0.0]), 1.0);
        assert_eq!(ap(Op::Not, &[2.5]), 0.0);
    }
}
