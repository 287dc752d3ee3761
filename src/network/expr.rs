//! Expressions of the network language (`law` rates, `when` conditions and assignments, dose
//! and edge times): checked for dimensions and compiled to one flat postfix program.
//!
//! Evaluation does no name lookups and no allocation: constant params are folded into
//! constants at compile time, species are loaded by index through a caller-supplied function
//! (as counts, each load multiplied by the factor that turns the count into the reading the
//! program wants: a concentration in its own compartment or an amount), varying params are
//! read from a slice, and the value stack is a fixed array whose needed depth is known after
//! compilation. The evaluator is generic over [`Scalar`], so the same program yields a value
//! (`f64`), a value with one directional derivative ([`Dual`], for Jacobians and ∂/∂t) or an
//! enclosure of its range over boxes of inputs ([`Interval`], for the thinning bounds of the
//! direct method).
//!
//! Functions: `sat(x, K)` = x/(K+x) (Michaelis–Menten / Langmuir saturation), `hill(x, K, n)`
//! = xⁿ/(Kⁿ+xⁿ) (Hill 1910), `inhib(x, K)` = 1/(1+x/K) (hyperbolic inhibition), `exp`, `ln`,
//! `min`, `max`, `sin`, `cos`, and `pulse(s, P, W)` = 1 when s − P·⌊s/P⌋ < W, else 0 (a
//! periodic square pulse of period P and width W, on at s = 0). `pi` is π where no declared
//! name is called so. Comparisons `< <= > >=` give 1 or 0, `and` and `or` combine them.
//!
//! How a program uses time ([`TimeUse`]): where `time` enters only a comparison with a
//! time-free side, or the first argument (`time ± e`) of `pulse`, the value is piecewise
//! constant in time and its [`Edge`]s (the times where it can jump) are known; kernels treat
//! them as breakpoints. Any other use of time is smooth.

use super::parser::{BinOp, Expr};
use super::units::{Dim, Quantity};
use crate::error::Span;
use std::ops::{Add, Div, Mul, Neg, Sub};

/// Deepest value stack a compiled program may need.
pub const MAX_STACK: usize = 32;

/// How deeply [`compile`] follows nested operands (chains such as `a + b + c` cost one level,
/// however long), so that a tree from any front end is refused before it could exhaust the
/// stack. The `.crn` parser's own limit is lower.
pub const MAX_DEPTH: usize = 512;

/// One instruction of a compiled program.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Op {
    Const(f64),
    /// Species `i`'s count times `scale`.
    Load(u32, f64),
    /// A varying param, by index into the run's param values.
    Param(u32),
    Time,
    Add,
    Sub,
    Mul,
    Div,
    Neg,
    Pow,
    PowI(i32),
    Exp,
    Ln,
    Sin,
    Cos,
    Sat,
    Hill,
    Inhib,
    Min,
    Max,
    Pulse,
    Lt,
    Le,
    Gt,
    Ge,
    And,
    Or,
}

/// How many arguments a function takes.
#[derive(Clone, Copy)]
enum Arity {
    Exactly(usize),
    TwoOrMore,
}

/// The functions a law may call, with their number of arguments; `None` for an unknown name.
fn arity(name: &str) -> Option<Arity> {
    match name {
        "sat" | "inhib" => Some(Arity::Exactly(2)),
        "hill" | "pulse" => Some(Arity::Exactly(3)),
        "exp" | "ln" | "sin" | "cos" => Some(Arity::Exactly(1)),
        "min" | "max" => Some(Arity::TwoOrMore),
        _ => None,
    }
}

/// The names of the functions, for messages.
pub const FUNCTIONS: &str = "sat, hill, inhib, exp, ln, min, max, sin, cos, pulse";

/// pulse(s, P, W) = 1 when s − P·⌊s/P⌋ < W, else 0; NaN unless P > 0 and both are finite.
pub fn pulse(s: f64, period: f64, width: f64) -> f64 {
    if !(period > 0.0 && period.is_finite() && width.is_finite() && s.is_finite()) {
        return f64::NAN;
    }
    let phase = s - period * (s / period).floor();
    if phase < width {
        1.0
    } else {
        0.0
    }
}

/// The smallest f64 above `t` (t finite): where a condition is evaluated "just after" an
/// edge at t.
pub fn just_after(t: f64) -> f64 {
    if t == 0.0 {
        f64::from_bits(1)
    } else if t > 0.0 {
        f64::from_bits(t.to_bits() + 1)
    } else {
        f64::from_bits(t.to_bits() - 1)
    }
}

/// The largest f64 below `t` (t finite).
pub fn just_before(t: f64) -> f64 {
    -just_after(-t)
}

fn truth(b: bool) -> f64 {
    if b {
        1.0
    } else {
        0.0
    }
}

/// A number type the evaluator can run on. The defaults of the piecewise functions
/// (min, max, hill's cut at x ≤ 0, pulse, comparisons) decide on [`Scalar::value`]; an
/// enclosure type overrides them.
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
    fn sin(self) -> Self;
    fn cos(self) -> Self;
    fn min(self, o: Self) -> Self {
        if o.value() < self.value() {
            o
        } else {
            self
        }
    }
    fn max(self, o: Self) -> Self {
        if o.value() > self.value() {
            o
        } else {
            self
        }
    }
    /// xⁿ/(Kⁿ+xⁿ) as (x/K)ⁿ/(1+(x/K)ⁿ), and 0 for x ≤ 0.
    fn hill(x: Self, k: Self, n: Self) -> Self {
        if x.value() <= 0.0 {
            Self::constant(0.0)
        } else {
            let r = (x / k).powf(n);
            r / (Self::constant(1.0) + r)
        }
    }
    fn pulse(s: Self, period: Self, width: Self) -> Self {
        Self::constant(pulse(s.value(), period.value(), width.value()))
    }
    fn lt(self, o: Self) -> Self {
        Self::constant(truth(self.value() < o.value()))
    }
    fn le(self, o: Self) -> Self {
        Self::constant(truth(self.value() <= o.value()))
    }
    fn gt(self, o: Self) -> Self {
        Self::constant(truth(self.value() > o.value()))
    }
    fn ge(self, o: Self) -> Self {
        Self::constant(truth(self.value() >= o.value()))
    }
    fn and(self, o: Self) -> Self {
        Self::constant(truth(self.value() != 0.0 && o.value() != 0.0))
    }
    fn or(self, o: Self) -> Self {
        Self::constant(truth(self.value() != 0.0 || o.value() != 0.0))
    }
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
    fn sin(self) -> f64 {
        f64::sin(self)
    }
    fn cos(self) -> f64 {
        f64::cos(self)
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
    /// d sin u = cos u · u'.
    fn sin(self) -> Dual {
        Dual {
            v: self.v.sin(),
            d: self.v.cos() * self.d,
        }
    }
    /// d cos u = −sin u · u'.
    fn cos(self) -> Dual {
        Dual {
            v: self.v.cos(),
            d: -self.v.sin() * self.d,
        }
    }
}

/// A closed interval [lo, hi] of reals: the enclosure arithmetic of Moore (1966, *Interval
/// Analysis*, Prentice-Hall \[M\]). Every operation returns an interval containing every value
/// the operation takes on its argument intervals (rounding aside, which the caller covers by
/// widening its final bound), so evaluating a program on intervals bounds its range.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Interval {
    pub lo: f64,
    pub hi: f64,
}

impl Interval {
    pub fn new(lo: f64, hi: f64) -> Interval {
        Interval { lo, hi }
    }

    pub fn point(v: f64) -> Interval {
        Interval { lo: v, hi: v }
    }

    const ALL: Interval = Interval {
        lo: f64::NEG_INFINITY,
        hi: f64::INFINITY,
    };

    const BOOL: Interval = Interval { lo: 0.0, hi: 1.0 };

    fn hull(vals: &[f64]) -> Interval {
        if vals.iter().any(|v| v.is_nan()) {
            return Interval::ALL;
        }
        let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        Interval { lo, hi }
    }

    fn is_point(self) -> bool {
        self.lo == self.hi
    }

    /// Whether every value is non-zero (true for sure) / some value is non-zero.
    fn surely(self) -> bool {
        self.lo > 0.0 || self.hi < 0.0
    }

    fn possibly(self) -> bool {
        !(self.lo == 0.0 && self.hi == 0.0)
    }

    fn boolean(surely: bool, possibly: bool) -> Interval {
        Interval::new(truth(surely), truth(possibly))
    }
}

impl Add for Interval {
    type Output = Interval;
    fn add(self, o: Interval) -> Interval {
        Interval::hull(&[self.lo + o.lo, self.hi + o.hi])
    }
}
impl Sub for Interval {
    type Output = Interval;
    fn sub(self, o: Interval) -> Interval {
        Interval::hull(&[self.lo - o.hi, self.hi - o.lo])
    }
}
impl Mul for Interval {
    type Output = Interval;
    fn mul(self, o: Interval) -> Interval {
        Interval::hull(&[
            self.lo * o.lo,
            self.lo * o.hi,
            self.hi * o.lo,
            self.hi * o.hi,
        ])
    }
}
impl Div for Interval {
    type Output = Interval;
    fn div(self, o: Interval) -> Interval {
        if o.lo <= 0.0 && o.hi >= 0.0 {
            return Interval::ALL;
        }
        self * Interval::new(1.0 / o.hi, 1.0 / o.lo)
    }
}
impl Neg for Interval {
    type Output = Interval;
    fn neg(self) -> Interval {
        Interval::new(-self.hi, -self.lo)
    }
}

/// The range of sin over [lo, hi]: the end values, and ±1 where a crest or trough
/// (π/2 + kπ) lies inside.
fn sin_range(lo: f64, hi: f64) -> Interval {
    use std::f64::consts::{FRAC_PI_2, PI};
    if !(lo.is_finite() && hi.is_finite()) || hi - lo >= 2.0 * PI {
        return Interval::new(-1.0, 1.0);
    }
    let mut r = Interval::hull(&[lo.sin(), hi.sin()]);
    // Crests at π/2 + 2kπ, troughs at −π/2 + 2kπ.
    let first = |phase: f64| ((lo - phase) / (2.0 * PI)).ceil() * 2.0 * PI + phase;
    if first(FRAC_PI_2) <= hi {
        r.hi = 1.0;
    }
    if first(-FRAC_PI_2) <= hi {
        r.lo = -1.0;
    }
    r
}

impl Scalar for Interval {
    fn constant(v: f64) -> Interval {
        Interval::point(v)
    }
    /// The lower end (not a representative value; every piecewise function is overridden).
    fn value(self) -> f64 {
        self.lo
    }
    /// uʷ for u ≥ 0 is monotone in each argument, so the corners bound it; a base that can
    /// be negative gives the whole line.
    fn powf(self, e: Interval) -> Interval {
        if self.lo < 0.0 {
            return Interval::ALL;
        }
        Interval::hull(&[
            self.lo.powf(e.lo),
            self.lo.powf(e.hi),
            self.hi.powf(e.lo),
            self.hi.powf(e.hi),
        ])
    }
    fn powi(self, n: i32) -> Interval {
        if n < 0 {
            return Interval::point(1.0) / self.powi(-n);
        }
        let (a, b) = (self.lo.powi(n), self.hi.powi(n));
        if n % 2 == 0 && self.lo < 0.0 && self.hi > 0.0 {
            Interval::new(0.0, a.max(b))
        } else {
            Interval::hull(&[a, b])
        }
    }
    fn exp(self) -> Interval {
        Interval::new(self.lo.exp(), self.hi.exp())
    }
    fn ln(self) -> Interval {
        if self.hi < 0.0 {
            return Interval::ALL;
        }
        let lo = if self.lo <= 0.0 {
            f64::NEG_INFINITY
        } else {
            self.lo.ln()
        };
        Interval::new(lo, self.hi.ln())
    }
    fn sin(self) -> Interval {
        sin_range(self.lo, self.hi)
    }
    fn cos(self) -> Interval {
        sin_range(
            self.lo + std::f64::consts::FRAC_PI_2,
            self.hi + std::f64::consts::FRAC_PI_2,
        )
    }
    fn min(self, o: Interval) -> Interval {
        Interval::new(self.lo.min(o.lo), self.hi.min(o.hi))
    }
    fn max(self, o: Interval) -> Interval {
        Interval::new(self.lo.max(o.lo), self.hi.max(o.hi))
    }
    /// r/(1+r) is increasing in r = (x/K)ⁿ ≥ 0; x ≤ 0 gives 0.
    fn hill(x: Interval, k: Interval, n: Interval) -> Interval {
        if x.hi <= 0.0 {
            return Interval::point(0.0);
        }
        let pos = Interval::new(x.lo.max(0.0), x.hi);
        let r = (pos / k).powf(n);
        if r.lo < 0.0 || r.lo.is_nan() {
            return Interval::new(0.0, 1.0);
        }
        let f = |r: f64| if r.is_infinite() { 1.0 } else { r / (1.0 + r) };
        let lo = if x.lo <= 0.0 { 0.0 } else { f(r.lo) };
        Interval::new(lo, f(r.hi))
    }
    /// Constant over `s` unless an edge (a multiple of P, or a multiple plus W) lies in
    /// (s.lo, s.hi].
    fn pulse(s: Interval, p: Interval, w: Interval) -> Interval {
        if !(p.is_point() && w.is_point()) {
            return Interval::BOOL;
        }
        let (p, w) = (p.lo, w.lo);
        let v = pulse(s.lo, p, w);
        if v.is_nan() || !s.hi.is_finite() {
            return Interval::BOOL;
        }
        if s.hi - s.lo >= p {
            return Interval::BOOL;
        }
        let base = p * (s.lo / p).floor();
        let (a, b) = (s.lo - base, s.hi - base);
        if [w, p, p + w].iter().any(|&e| e > a && e <= b) {
            Interval::BOOL
        } else {
            Interval::point(v)
        }
    }
    fn lt(self, o: Interval) -> Interval {
        Interval::boolean(self.hi < o.lo, self.lo < o.hi)
    }
    fn le(self, o: Interval) -> Interval {
        Interval::boolean(self.hi <= o.lo, self.lo <= o.hi)
    }
    fn gt(self, o: Interval) -> Interval {
        o.lt(self)
    }
    fn ge(self, o: Interval) -> Interval {
        o.le(self)
    }
    fn and(self, o: Interval) -> Interval {
        Interval::boolean(self.surely() && o.surely(), self.possibly() && o.possibly())
    }
    fn or(self, o: Interval) -> Interval {
        Interval::boolean(self.surely() || o.surely(), self.possibly() || o.possibly())
    }
}

/// What a name in an expression stands for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Resolved {
    /// A species, by index: its count times `scale`, a quantity of dimension `dim` (its
    /// concentration in its own compartment, or its amount).
    Species { index: usize, scale: f64, dim: Dim },
    /// A value known when compiling (a constant param, a compartment's volume), in canonical
    /// units.
    Constant(Quantity),
    /// A param that varies during a run, read from the run's param values.
    Param { index: usize, dim: Dim },
    /// The clock (seconds).
    Time,
}

/// How an expression is checked.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Checks {
    /// Check dimensions (the `.crn` rule); off for models whose units are optional.
    pub dimensions: bool,
    /// Molecule counts are pure numbers (a `.crn` network without a volume).
    pub counts_are_numbers: bool,
}

impl Checks {
    /// The `.crn` checks, with counts as numbers where the network has no volume.
    pub fn crn(counts_are_numbers: bool) -> Checks {
        Checks {
            dimensions: true,
            counts_are_numbers,
        }
    }

    /// No dimension checks (every value dimensionless).
    pub fn none() -> Checks {
        Checks {
            dimensions: false,
            counts_are_numbers: true,
        }
    }
}

/// How a program's value depends on time.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum TimeUse {
    /// Not at all.
    None,
    /// Piecewise constant, jumping only at its [`Edge`]s.
    Steps,
    /// Some other way (sin(time), time in arithmetic): it may change at any instant.
    Smooth,
}

/// A program without species and without time: evaluated with the run's param values.
#[derive(Clone, Debug, PartialEq)]
pub struct Program {
    ops: Box<[Op]>,
}

impl Program {
    /// Its value with the given param values.
    pub fn eval(&self, params: &[f64]) -> f64 {
        run::<f64>(&self.ops, |_| 0.0, params, 0.0)
    }

    /// Its value when it reads no varying param.
    pub fn constant(&self) -> Option<f64> {
        self.ops
            .iter()
            .all(|op| !matches!(op, Op::Param(_)))
            .then(|| self.eval(&[]))
    }
}

/// A time at which a piecewise-constant program may jump.
#[derive(Clone, Debug, PartialEq)]
pub enum Edge {
    /// A comparison of `time ± e` with a time-free value flips at this time.
    At(Program),
    /// `pulse(time − offset, period, width)` switches on at offset + k·period and off at
    /// offset + k·period + width.
    Periodic {
        offset: Program,
        period: Program,
        width: Program,
    },
}

impl Edge {
    /// The first time of this edge strictly after `t` (∞ if none), with the given params.
    pub fn next_after(&self, t: f64, params: &[f64]) -> f64 {
        match self {
            Edge::At(p) => {
                let v = p.eval(params);
                if v > t {
                    v
                } else {
                    f64::INFINITY
                }
            }
            Edge::Periodic {
                offset,
                period,
                width,
            } => {
                let (d, p, w) = (offset.eval(params), period.eval(params), width.eval(params));
                if !(p > 0.0 && p.is_finite() && d.is_finite() && w.is_finite()) {
                    return f64::INFINITY;
                }
                let k = ((t - d) / p).floor();
                let mut best = f64::INFINITY;
                for dk in -1..=2 {
                    let start = d + (k + dk as f64) * p;
                    for e in [start, start + w] {
                        if e > t && e < best {
                            best = e;
                        }
                    }
                }
                best
            }
        }
    }
}

/// A compiled program.
#[derive(Clone, Debug, PartialEq)]
pub struct Law {
    ops: Box<[Op]>,
    /// Species the program reads, sorted, without repeats.
    pub species: Vec<usize>,
    /// Varying params it reads, sorted, without repeats.
    pub params: Vec<usize>,
    /// Dimension of its value.
    pub dim: Dim,
    /// Whether its value is a truth value (a comparison, or `and`/`or` of them).
    pub boolean: bool,
    /// How it depends on time, and where it can jump.
    pub time: TimeUse,
    pub edges: Vec<Edge>,
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

/// How a checked node uses time.
#[derive(Clone, Debug)]
enum Clock {
    None,
    /// The node is `time + e` with e free of time and species: the program of e.
    Shift(Vec<Op>),
    Steps,
    Smooth,
}

impl Clock {
    /// The node's time use once it enters anything but a shift, a comparison or a pulse.
    fn consumed(&self) -> TimeUse {
        match self {
            Clock::None => TimeUse::None,
            Clock::Steps => TimeUse::Steps,
            Clock::Shift(_) | Clock::Smooth => TimeUse::Smooth,
        }
    }

    fn of(t: TimeUse) -> Clock {
        match t {
            TimeUse::None => Clock::None,
            TimeUse::Steps => Clock::Steps,
            TimeUse::Smooth => Clock::Smooth,
        }
    }
}

/// A checked node: its dimension, its value when it depends on nothing that varies, how it
/// uses species and time.
struct Typed {
    dim: Dim,
    constant: Option<f64>,
    ops: Vec<Op>,
    depth: usize,
    species: bool,
    clock: Clock,
    edges: Vec<Edge>,
    boolean: bool,
}

impl Typed {
    fn constant(value: f64, dim: Dim) -> Typed {
        Typed {
            dim,
            constant: Some(value),
            ops: vec![Op::Const(value)],
            depth: 1,
            species: false,
            clock: Clock::None,
            edges: Vec::new(),
            boolean: false,
        }
    }

    fn leaf(op: Op, dim: Dim) -> Typed {
        Typed {
            dim,
            constant: None,
            ops: vec![op],
            depth: 1,
            species: matches!(op, Op::Load(..)),
            clock: if op == Op::Time {
                Clock::Shift(vec![Op::Const(0.0)])
            } else {
                Clock::None
            },
            edges: Vec::new(),
            boolean: false,
        }
    }

    /// Free of time and of species: a value fixed between events.
    fn settled(&self) -> bool {
        !self.species && matches!(self.clock, Clock::None)
    }
}

/// Compiles `expr`. `resolve` maps a name to what it stands for.
pub fn compile(
    expr: &Expr,
    text: &str,
    resolve: &dyn Fn(&str) -> Option<Resolved>,
    checks: Checks,
) -> Result<Law, LawError> {
    let norm = move |d: Dim| {
        if !checks.dimensions {
            Dim::NONE
        } else if checks.counts_are_numbers {
            d.without_count()
        } else {
            d
        }
    };
    let ctx = Ctx {
        resolve,
        norm: &norm,
        depth: std::cell::Cell::new(0),
    };
    let typed = ctx.check(expr).map_err(|mut e| {
        if checks.dimensions && checks.counts_are_numbers && e.message.contains("concentration") {
            // Without a volume a species reads as a count, so a concentration meets a number.
            e.message.push_str(
                "; the network has no volume, so species are counts of molecules here: add a `volume` line or give the value in molecules",
            );
        }
        e
    })?;
    if typed.depth > MAX_STACK {
        return err(
            expr.span(),
            format!("this expression needs a stack deeper than {MAX_STACK}; split it into params"),
        );
    }
    let mut species = Vec::new();
    let mut params = Vec::new();
    for op in typed.ops.iter() {
        match op {
            Op::Load(i, _) => species.push(*i as usize),
            Op::Param(p) => params.push(*p as usize),
            _ => {}
        }
    }
    species.sort_unstable();
    species.dedup();
    params.sort_unstable();
    params.dedup();
    Ok(Law {
        time: typed.clock.consumed(),
        edges: typed.edges,
        boolean: typed.boolean,
        ops: typed.ops.into_boxed_slice(),
        species,
        params,
        dim: typed.dim,
        text: text.trim().to_string(),
    })
}

struct Ctx<'r> {
    resolve: &'r dyn Fn(&str) -> Option<Resolved>,
    norm: &'r dyn Fn(Dim) -> Dim,
    /// Current nesting of `check` (bounded by [`MAX_DEPTH`]).
    depth: std::cell::Cell<usize>,
}

impl Ctx<'_> {
    /// Checks a node and rejects a constant part that is not a finite number (`0/0`, `ln(0)`).
    fn check(&self, expr: &Expr) -> Result<Typed, LawError> {
        let depth = self.depth.get();
        if depth >= MAX_DEPTH {
            return err(
                expr.span(),
                format!("the expression is nested more than {MAX_DEPTH} levels deep here; split it with params"),
            );
        }
        self.depth.set(depth + 1);
        let t = self.node(expr);
        self.depth.set(depth);
        let t = t?;
        match t.constant {
            Some(v) if !v.is_finite() => err(
                expr.span(),
                format!(
                    "this part of the expression is the constant {}, not a finite number",
                    crate::numbers::plain(v)
                ),
            ),
            _ => Ok(t),
        }
    }

    fn node(&self, expr: &Expr) -> Result<Typed, LawError> {
        let norm = self.norm;
        match expr {
            Expr::Number(lit) => Ok(Typed::constant(lit.quantity.value, norm(lit.quantity.dim))),
            Expr::Name(name) => match (self.resolve)(&name.text) {
                Some(Resolved::Constant(q)) => Ok(Typed::constant(q.value, norm(q.dim))),
                Some(Resolved::Species { index, scale, dim }) => {
                    Ok(Typed::leaf(Op::Load(index as u32, scale), norm(dim)))
                }
                Some(Resolved::Param { index, dim }) => {
                    Ok(Typed::leaf(Op::Param(index as u32), norm(dim)))
                }
                Some(Resolved::Time) => Ok(Typed::leaf(Op::Time, norm(Dim::TIME))),
                None if name.text == "pi" => Ok(Typed::constant(std::f64::consts::PI, Dim::NONE)),
                None => err(
                    name.span,
                    format!(
                        "unknown name `{}`: not a species, a param, a compartment or `time`",
                        name.text
                    ),
                ),
            },
            Expr::Neg(inner, _) => {
                let t = self.check(inner)?;
                Ok(unary(t, Op::Neg, None))
            }
            Expr::Binary(..) => {
                // A chain `x + y + z …` is a left spine as deep as it is long: walk it with a
                // loop, recursing only into right operands (bounded by the parser's nesting
                // limit), so that no length of chain can exhaust the stack.
                let mut spine = vec![expr];
                let mut leftmost = expr;
                while let Expr::Binary(_, a, _, _) = leftmost {
                    leftmost = a;
                    if matches!(leftmost, Expr::Binary(..)) {
                        spine.push(leftmost);
                    }
                }
                let mut acc = self.check(leftmost)?;
                for node in spine.into_iter().rev() {
                    let Expr::Binary(op, a, b, span) = node else {
                        unreachable!("the spine holds binary nodes")
                    };
                    let tb = self.check(b)?;
                    acc = self.binary_node(*op, acc, tb, a, b, *span)?;
                    if let Some(v) = acc.constant.filter(|v| !v.is_finite()) {
                        return err(
                            node.span(),
                            format!("this part of the expression is the constant {}, not a finite number", crate::numbers::plain(v)),
                        );
                    }
                }
                Ok(acc)
            }
            Expr::Call(name, args, span) => self.call(name, args, *span),
        }
    }

    /// The node `a op b` from its checked operands.
    fn binary_node(
        &self,
        op: BinOp,
        ta: Typed,
        tb: Typed,
        a: &Expr,
        b: &Expr,
        span: Span,
    ) -> Result<Typed, LawError> {
        match op {
            BinOp::Add | BinOp::Sub => {
                same_dim(&ta, &tb, a.span(), b.span(), "add or subtract")?;
                let dim = ta.dim;
                let code = if op == BinOp::Add { Op::Add } else { Op::Sub };
                Ok(shifted(ta, tb, code, dim))
            }
            BinOp::Mul => {
                let dim = ta.dim.times(tb.dim);
                Ok(binary(ta, tb, Op::Mul, dim))
            }
            BinOp::Div => {
                let dim = ta.dim.per(tb.dim);
                Ok(binary(ta, tb, Op::Div, dim))
            }
            BinOp::Pow => power(ta, tb, a.span(), b.span(), span),
            BinOp::Lt | BinOp::Le | BinOp::Gt | BinOp::Ge => {
                same_dim(&ta, &tb, a.span(), b.span(), "compare")?;
                let code = match op {
                    BinOp::Lt => Op::Lt,
                    BinOp::Le => Op::Le,
                    BinOp::Gt => Op::Gt,
                    _ => Op::Ge,
                };
                Ok(comparison(ta, tb, code))
            }
            BinOp::And | BinOp::Or => {
                for (t, e) in [(&ta, a), (&tb, b)] {
                    if !t.boolean {
                        return err(
                            e.span(),
                            format!(
                                "`{}` joins conditions, but this is not one",
                                if op == BinOp::And { "and" } else { "or" }
                            ),
                        )
                        .map_err(|mut e| {
                            e.message
                                .push_str(": write a comparison such as `X > 5 nM`");
                            e
                        });
                    }
                }
                let code = if op == BinOp::And { Op::And } else { Op::Or };
                let mut t = binary(ta, tb, code, Dim::NONE);
                t.boolean = true;
                Ok(t)
            }
        }
    }

    fn call(
        &self,
        name: &super::parser::Name,
        args: &[Expr],
        span: Span,
    ) -> Result<Typed, LawError> {
        let Some(n) = arity(&name.text) else {
            return err(
                name.span,
                format!(
                    "unknown function `{}`; the functions are {FUNCTIONS}",
                    name.text
                ),
            );
        };
        match n {
            Arity::Exactly(n) if args.len() != n => {
                return err(
                    span,
                    format!(
                        "`{}` takes {n} argument{}, found {}",
                        name.text,
                        if n == 1 { "" } else { "s" },
                        args.len()
                    ),
                )
            }
            Arity::TwoOrMore if args.len() < 2 => {
                return err(span, format!("`{}` takes two or more arguments", name.text))
            }
            _ => {}
        }
        let typed: Vec<Typed> = args
            .iter()
            .map(|a| self.check(a))
            .collect::<Result<_, _>>()?;
        match name.text.as_str() {
            "exp" | "ln" | "sin" | "cos" => {
                dimensionless(&typed[0], args[0].span(), &name.text)?;
                let op = match name.text.as_str() {
                    "exp" => Op::Exp,
                    "ln" => Op::Ln,
                    "sin" => Op::Sin,
                    _ => Op::Cos,
                };
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
            "pulse" => {
                same_dim(
                    &typed[0],
                    &typed[1],
                    args[0].span(),
                    args[1].span(),
                    "pulse",
                )?;
                same_dim(
                    &typed[0],
                    &typed[2],
                    args[0].span(),
                    args[2].span(),
                    "pulse",
                )?;
                if let (Some(p), Some(w)) = (typed[1].constant, typed[2].constant) {
                    if p.is_nan() || p <= 0.0 || !(0.0..=p).contains(&w) {
                        return err(
                            span,
                            format!(
                                "pulse(s, period, width) needs period > 0 and 0 ≤ width ≤ period, \
                                 found period {} and width {} (in seconds for times)",
                                crate::numbers::plain(p),
                                crate::numbers::plain(w)
                            ),
                        );
                    }
                }
                let mut it = typed.into_iter();
                let (s, p, w) = (it.next().unwrap(), it.next().unwrap(), it.next().unwrap());
                Ok(pulse_node(s, p, w))
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

fn same_dim(a: &Typed, b: &Typed, sa: Span, sb: Span, what: &str) -> Result<(), LawError> {
    if a.dim == b.dim {
        return Ok(());
    }
    let hint = if a.dim == Dim::TIME || b.dim == Dim::TIME {
        " (times need a unit: `100 s`, `2 h`)"
    } else {
        ""
    };
    err(
        sa.to(sb),
        format!(
            "cannot {what} {} and {}: the dimensions differ{hint}",
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
    run::<f64>(ops, |_| 0.0, &[], 0.0)
}

fn merge_clock(a: &Clock, b: &Clock) -> Clock {
    Clock::of(a.consumed().max(b.consumed()))
}

fn unary(t: Typed, op: Op, dim: Option<Dim>) -> Typed {
    let dim = dim.unwrap_or(t.dim);
    let constant = t.constant.is_some();
    let mut ops = t.ops;
    ops.push(op);
    finish(Typed {
        dim,
        constant: constant.then_some(0.0),
        ops,
        depth: t.depth,
        species: t.species,
        clock: Clock::of(t.clock.consumed()),
        edges: t.edges,
        boolean: false,
    })
}

fn binary(a: Typed, b: Typed, op: Op, dim: Dim) -> Typed {
    let clock = merge_clock(&a.clock, &b.clock);
    combine(a, b, op, dim, clock)
}

/// `a ± b` keeps the form `time + e` when one side has it and the other is settled.
fn shifted(a: Typed, b: Typed, op: Op, dim: Dim) -> Typed {
    let clock = match (&a.clock, &b.clock) {
        (Clock::Shift(e), _) if b.settled() => {
            let mut e = e.clone();
            e.extend(b.ops.iter().copied());
            e.push(op);
            Clock::Shift(e)
        }
        (_, Clock::Shift(e)) if a.settled() && op == Op::Add => {
            let mut e = e.clone();
            e.extend(a.ops.iter().copied());
            e.push(Op::Add);
            Clock::Shift(e)
        }
        _ => merge_clock(&a.clock, &b.clock),
    };
    combine(a, b, op, dim, clock)
}

/// A comparison: where one side is `time + e` and the other settled, it flips when time
/// reaches (other − e), an edge.
fn comparison(a: Typed, b: Typed, op: Op) -> Typed {
    let flip = match (&a.clock, &b.clock) {
        (Clock::Shift(e), _) if b.settled() => Some((b.ops.clone(), e.clone())),
        (_, Clock::Shift(e)) if a.settled() => Some((a.ops.clone(), e.clone())),
        _ => None,
    };
    let (clock, edge) = match flip {
        Some((mut at, e)) => {
            at.extend(e);
            at.push(Op::Sub);
            (Clock::Steps, Some(Edge::At(Program { ops: at.into() })))
        }
        None => (merge_clock(&a.clock, &b.clock), None),
    };
    let mut t = combine(a, b, op, Dim::NONE, clock);
    t.edges.extend(edge);
    t.boolean = true;
    t
}

fn pulse_node(s: Typed, p: Typed, w: Typed) -> Typed {
    let periodic = match &s.clock {
        Clock::Shift(e) if p.settled() && w.settled() => {
            let mut offset = e.clone();
            offset.push(Op::Neg);
            Some(Edge::Periodic {
                offset: Program { ops: offset.into() },
                period: Program {
                    ops: p.ops.clone().into(),
                },
                width: Program {
                    ops: w.ops.clone().into(),
                },
            })
        }
        _ => None,
    };
    let clock = match periodic {
        Some(_) => Clock::Steps,
        None => Clock::of(
            s.clock
                .consumed()
                .max(p.clock.consumed())
                .max(w.clock.consumed()),
        ),
    };
    let constant = s.constant.is_some() && p.constant.is_some() && w.constant.is_some();
    let depth = s.depth.max(p.depth + 1).max(w.depth + 2);
    let species = s.species || p.species || w.species;
    let mut edges = s.edges;
    edges.extend(p.edges);
    edges.extend(w.edges);
    edges.extend(periodic);
    let mut ops = s.ops;
    ops.extend(p.ops);
    ops.extend(w.ops);
    ops.push(Op::Pulse);
    finish(Typed {
        dim: Dim::NONE,
        constant: constant.then_some(0.0),
        ops,
        depth,
        species,
        clock,
        edges,
        boolean: false,
    })
}

fn combine(a: Typed, b: Typed, op: Op, dim: Dim, clock: Clock) -> Typed {
    let constant = a.constant.is_some() && b.constant.is_some();
    let depth = a.depth.max(b.depth + 1);
    let mut ops = a.ops;
    ops.extend(b.ops);
    ops.push(op);
    let mut edges = a.edges;
    edges.extend(b.edges);
    finish(Typed {
        dim,
        constant: constant.then_some(0.0),
        ops,
        depth,
        species: a.species || b.species,
        clock,
        edges,
        boolean: false,
    })
}

fn ternary(a: Typed, b: Typed, c: Typed, op: Op, dim: Dim) -> Typed {
    let clock = Clock::of(
        a.clock
            .consumed()
            .max(b.clock.consumed())
            .max(c.clock.consumed()),
    );
    let constant = a.constant.is_some() && b.constant.is_some() && c.constant.is_some();
    let depth = a.depth.max(b.depth + 1).max(c.depth + 2);
    let species = a.species || b.species || c.species;
    let mut ops = a.ops;
    ops.extend(b.ops);
    ops.extend(c.ops);
    ops.push(op);
    let mut edges = a.edges;
    edges.extend(b.edges);
    edges.extend(c.edges);
    finish(Typed {
        dim,
        constant: constant.then_some(0.0),
        ops,
        depth,
        species,
        clock,
        edges,
        boolean: false,
    })
}

/// Folds a node whose inputs are all constants (its `constant` marks that they are).
fn finish(t: Typed) -> Typed {
    if t.constant.is_some() {
        let mut c = Typed::constant(fold(&t.ops), t.dim);
        c.boolean = t.boolean;
        return c;
    }
    t
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

/// Runs a program; `load(i)` gives species i's count, `params` the varying params' values.
#[inline]
fn run<T: Scalar>(ops: &[Op], load: impl Fn(usize) -> T, params: &[f64], time: T) -> T {
    let mut stack = [T::constant(0.0); MAX_STACK];
    let mut top = 0usize;
    for op in ops {
        match *op {
            Op::Const(v) => {
                stack[top] = T::constant(v);
                top += 1;
            }
            Op::Load(i, scale) => {
                stack[top] = load(i as usize) * T::constant(scale);
                top += 1;
            }
            Op::Param(p) => {
                stack[top] = T::constant(params[p as usize]);
                top += 1;
            }
            Op::Time => {
                stack[top] = time;
                top += 1;
            }
            Op::Neg => stack[top - 1] = -stack[top - 1],
            Op::PowI(n) => stack[top - 1] = stack[top - 1].powi(n),
            Op::Exp => stack[top - 1] = stack[top - 1].exp(),
            Op::Ln => stack[top - 1] = stack[top - 1].ln(),
            Op::Sin => stack[top - 1] = stack[top - 1].sin(),
            Op::Cos => stack[top - 1] = stack[top - 1].cos(),
            Op::Hill | Op::Pulse => {
                let (x, k, n) = (stack[top - 3], stack[top - 2], stack[top - 1]);
                top -= 2;
                stack[top - 1] = if *op == Op::Hill {
                    T::hill(x, k, n)
                } else {
                    T::pulse(x, k, n)
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
                    Op::Min => a.min(b),
                    Op::Max => a.max(b),
                    Op::Lt => a.lt(b),
                    Op::Le => a.le(b),
                    Op::Gt => a.gt(b),
                    Op::Ge => a.ge(b),
                    Op::And => a.and(b),
                    Op::Or => a.or(b),
                    _ => unreachable!("unary and ternary ops handled above"),
                };
            }
        }
    }
    stack[0]
}

impl Law {
    /// The program's value with species counts given by `load`, varying params by `params`
    /// (canonical units, indexed as the network's params) and the clock at `time`, in
    /// canonical units of [`Law::dim`].
    #[inline]
    pub fn eval<T: Scalar>(&self, load: impl Fn(usize) -> T, params: &[f64], time: T) -> T {
        run(&self.ops, load, params, time)
    }

    /// The compiled program, for inspection.
    pub fn ops(&self) -> &[Op] {
        &self.ops
    }

    /// The earliest edge strictly after `t` (∞ when there is none).
    pub fn next_edge(&self, t: f64, params: &[f64]) -> f64 {
        self.edges
            .iter()
            .map(|e| e.next_after(t, params))
            .fold(f64::INFINITY, f64::min)
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
        let sp = |index: usize| {
            if with_volume {
                Resolved::Species {
                    index,
                    scale: 1.0,
                    dim: Dim::CONC,
                }
            } else {
                Resolved::Species {
                    index,
                    scale: 1.0,
                    dim: Dim::COUNT,
                }
            }
        };
        let resolve = |n: &str| match n {
            "X" => Some(sp(0)),
            "Y" => Some(sp(1)),
            "vmax" => Some(Resolved::Constant(Quantity::new(
                2e-9,
                Dim::new(1, -1, 0, 0),
            ))),
            "K" => Some(Resolved::Constant(Quantity::new(5e-9, Dim::CONC))),
            "n" => Some(Resolved::Constant(Quantity::bare(2.0))),
            "k" => Some(Resolved::Constant(Quantity::new(
                0.1,
                Dim::new(0, -1, 0, 0),
            ))),
            "kv" => Some(Resolved::Param {
                index: 0,
                dim: Dim::new(0, -1, 0, 0),
            }),
            "P" => Some(Resolved::Constant(Quantity::new(60.0, Dim::TIME))),
            "time" => Some(Resolved::Time),
            _ => None,
        };
        compile(e, src, &resolve, Checks::crn(!with_volume))
    }

    fn at(l: &Law, x: f64, y: f64) -> f64 {
        l.eval::<f64>(|i| if i == 0 { x } else { y }, &[0.5], 0.0)
    }

    fn at_time(l: &Law, x: f64, t: f64) -> f64 {
        l.eval::<f64>(|_| x, &[0.5], t)
    }

    // Formulas of the README: sat = x/(K+x), hill = xⁿ/(Kⁿ+xⁿ), inhib = 1/(1+x/K).
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
        assert_eq!(l.time, TimeUse::None);
    }

    #[test]
    fn loads_carry_their_scale() {
        let e = crate::network::parser::parse("t.crn", b"step r 0 -> X @ law 2 * X\n").unwrap();
        let Item::Step(s) = &e.items[0] else { panic!() };
        let Rate::Law(e) = &s.forward else { panic!() };
        let resolve = |_: &str| {
            Some(Resolved::Species {
                index: 0,
                scale: 0.25,
                dim: Dim::COUNT,
            })
        };
        let l = compile(e, "2 * X", &resolve, Checks::crn(true)).unwrap();
        assert_eq!(l.eval::<f64>(|_| 8.0, &[], 0.0), 4.0);
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
        let e = law_of("k * (time > 100)", true).unwrap_err();
        assert!(e.message.contains("times need a unit"), "{}", e.message);
        let e = law_of("k * pulse(time, -1 s, 0 s)", true).unwrap_err();
        assert!(e.message.contains("period > 0"), "{}", e.message);
        let e = law_of("k * (X and X > K)", true).unwrap_err();
        assert!(e.message.contains("joins conditions"), "{}", e.message);
    }

    #[test]
    fn no_dimension_checks_when_asked() {
        let ast = crate::network::parser::parse("t.crn", b"step r 0 -> X @ law X + k\n").unwrap();
        let Item::Step(s) = &ast.items[0] else {
            panic!()
        };
        let Rate::Law(e) = &s.forward else { panic!() };
        let resolve = |n: &str| match n {
            "X" => Some(Resolved::Species {
                index: 0,
                scale: 1.0,
                dim: Dim::CONC,
            }),
            _ => Some(Resolved::Constant(Quantity::new(
                0.1,
                Dim::new(0, -1, 0, 0),
            ))),
        };
        let l = compile(e, "X + k", &resolve, Checks::none()).unwrap();
        assert!(l.dim.is_none());
        assert!((l.eval::<f64>(|_| 2.0, &[], 0.0) - 2.1).abs() < 1e-15);
    }

    #[test]
    fn dual_numbers_give_exact_derivatives() {
        // d/dX of vmax·X/(K+X) = vmax·K/(K+X)²  (quotient rule)
        let l = law_of("vmax * sat(X, K) * X ^ 2", true).unwrap();
        let x = 3e-9;
        let d = l
            .eval::<Dual>(
                |i| {
                    if i == 0 {
                        Dual::variable(x)
                    } else {
                        Dual::constant(0.0)
                    }
                },
                &[],
                Dual::constant(0.0),
            )
            .d;
        let (v, k) = (2e-9, 5e-9);
        let want = v * k / (k + x).powi(2) * x * x + v * x / (k + x) * 2.0 * x;
        assert!((d - want).abs() < 1e-12 * want.abs());
        let l = law_of("vmax * hill(X, K, n)", true).unwrap();
        let d = l
            .eval::<Dual>(|_| Dual::variable(x), &[], Dual::constant(0.0))
            .d;
        // d/dx xⁿ/(Kⁿ+xⁿ) = n·Kⁿ·xⁿ⁻¹/(Kⁿ+xⁿ)²
        let want = 2e-9 * 2.0 * k * k * x / (k * k + x * x).powi(2);
        assert!((d - want).abs() < 1e-9 * want.abs());
        // d/dt of vmax·(1 + sin(2πt/P)) = vmax·(2π/P)·cos(2πt/P) (calculus).
        let l = law_of("vmax * (1 + sin(2 * pi * time / P))", true).unwrap();
        let t = 17.0;
        let d = l
            .eval::<Dual>(|_| Dual::constant(0.0), &[], Dual::variable(t))
            .d;
        let w = 2.0 * std::f64::consts::PI / 60.0;
        assert!((d - 2e-9 * w * (w * t).cos()).abs() < 1e-22);
        let l = law_of("vmax * cos(time / P)", true).unwrap();
        let d = l
            .eval::<Dual>(|_| Dual::constant(0.0), &[], Dual::variable(t))
            .d;
        assert!((d + 2e-9 / 60.0 * (t / 60.0).sin()).abs() < 1e-22);
    }

    // pulse(s, P, W) = 1 on [kP, kP + W), 0 on [kP + W, (k+1)P): the definition above.
    #[test]
    fn pulse_is_a_periodic_square_wave_with_its_edges() {
        let l = law_of("vmax * pulse(time - 10 s, P, 15 s)", true).unwrap();
        assert_eq!(l.time, TimeUse::Steps);
        assert_eq!(at_time(&l, 0.0, 9.9), 0.0);
        assert_eq!(at_time(&l, 0.0, 10.0), 2e-9);
        assert_eq!(at_time(&l, 0.0, 24.9), 2e-9);
        assert_eq!(at_time(&l, 0.0, 25.0), 0.0);
        assert_eq!(at_time(&l, 0.0, 70.0), 2e-9);
        // Edges at 10 + 60k (on) and 25 + 60k (off).
        let mut t = 0.0;
        let mut seen = Vec::new();
        for _ in 0..5 {
            t = l.next_edge(t, &[]);
            seen.push(t);
        }
        assert_eq!(seen, vec![10.0, 25.0, 70.0, 85.0, 130.0]);
        assert_eq!(pulse(-1.0, 4.0, 2.0), 0.0);
        assert_eq!(pulse(-3.0, 4.0, 2.0), 1.0);
        assert!(pulse(1.0, 0.0, 0.0).is_nan());
    }

    #[test]
    fn time_uses_are_classified() {
        let l = law_of("k * X * (time >= 2 * P)", true).unwrap();
        assert_eq!(l.time, TimeUse::Steps);
        assert_eq!(l.next_edge(0.0, &[]), 120.0);
        assert_eq!(l.next_edge(120.0, &[]), f64::INFINITY);
        // A shifted clock: time + 30 s < P flips at 30 s.
        let l = law_of("k * X * (time + 30 s < P)", true).unwrap();
        assert_eq!(l.next_edge(0.0, &[]), 30.0);
        let l = law_of("vmax * sin(time / P)", true).unwrap();
        assert_eq!(l.time, TimeUse::Smooth);
        let l = law_of("vmax * (time / P > 1)", true).unwrap();
        assert_eq!(l.time, TimeUse::Smooth);
        // A comparison with a species is no edge: the flip time moves with the state.
        let l = law_of("vmax * (time > X / vmax)", true).unwrap();
        assert_eq!((l.time, l.edges.len()), (TimeUse::Smooth, 0));
        let l = law_of("k * X", true).unwrap();
        assert_eq!((l.time, l.edges.len()), (TimeUse::None, 0));
    }

    #[test]
    fn comparisons_and_logic() {
        let l = law_of("k * ((X > K and Y <= K) or X >= 2 * K)", true).unwrap();
        let v = |x: f64, y: f64| l.eval::<f64>(|i| if i == 0 { x } else { y }, &[], 0.0);
        assert_eq!(v(6e-9, 5e-9), 0.1);
        assert_eq!(v(6e-9, 6e-9), 0.0);
        assert_eq!(v(10e-9, 6e-9), 0.1);
        assert_eq!(v(4e-9, 0.0), 0.0);
    }

    #[test]
    fn varying_params_are_read_at_run_time() {
        let l = law_of("kv * X", true).unwrap();
        assert_eq!(l.params, vec![0]);
        assert_eq!(l.eval::<f64>(|_| 4.0, &[0.25], 0.0), 1.0);
        assert_eq!(l.eval::<f64>(|_| 4.0, &[2.0], 0.0), 8.0);
    }

    /// Interval evaluation encloses every value on the box (Moore 1966 \[M\]): checked against
    /// dense sampling of the same program.
    #[test]
    fn intervals_enclose_sampled_values() {
        let cases = [
            "vmax * (1 + sin(2 * pi * time / P)) * sat(X, K)",
            "vmax * (1 - cos(time / P)) * hill(X, K, n) + vmax * pulse(time, P, 20 s)",
            "vmax * exp(-time / P) * inhib(X, K) + min(vmax, vmax * time / P)",
            "vmax * (time < 30 s) + vmax * max(ln(1 + time / P), 0.5) * X ^ 2 / K ^ 2",
        ];
        for src in cases {
            let l = law_of(src, true).unwrap();
            for (t0, t1, x0, x1) in [
                (0.0, 5.0, 1e-9, 1e-9),
                (13.0, 47.0, 0.0, 2e-9),
                (25.0, 35.0, 3e-9, 9e-9),
                (100.0, 400.0, 5e-9, 5e-9),
            ] {
                let b = l.eval::<Interval>(|_| Interval::new(x0, x1), &[], Interval::new(t0, t1));
                for a in 0..=40 {
                    for c in 0..=4 {
                        let t = t0 + (t1 - t0) * a as f64 / 40.0;
                        let x = x0 + (x1 - x0) * c as f64 / 4.0;
                        let v = l.eval::<f64>(|_| x, &[], t);
                        let slack = 1e-12 * v.abs();
                        assert!(
                            v >= b.lo - slack && v <= b.hi + slack,
                            "{src}: {v} outside [{}, {}] at t {t} x {x}",
                            b.lo,
                            b.hi
                        );
                    }
                }
            }
        }
    }
}
