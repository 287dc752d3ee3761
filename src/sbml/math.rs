//! MathML → a typed expression tree.
//!
//! SBML formulas are MathML 2.0 content markup restricted to the subset the SBML Level 3 core
//! specification lists (Hucka et al. 2019, J. Integr. Bioinform. 16:20190021, §3.4.1): tokens
//! `cn`, `ci`, `csymbol`; `apply`, `piecewise`; arithmetic, relational and logical operators; the
//! trigonometric and hyperbolic functions and their inverses; the constants `true`, `false`, `pi`,
//! `exponentiale`, `infinity`, `notanumber`; `lambda` inside function definitions; `semantics`
//! wrappers, whose annotations are ignored. Anything else is an error naming the element and its
//! line.
//!
//! The reader normalises as it goes: `root` and `log` always carry their degree and base (2 and
//! 10 when the qualifier is absent), constants become numbers, and the csymbols `delay` and
//! `rateOf` are kept as their own nodes so that the validator can refuse them with their place.

use super::error::{ErrorKind, Loc, SbmlError};
use super::xml::{self, Node, Xml, MATHML_NS};
use serde::Serialize;
use std::fmt;

/// Deepest nesting of MathML elements the reader follows.
pub const MAX_DEPTH: usize = 256;

/// The value of the `avogadro` csymbol. The SBML Level 3 core specification fixes it at the
/// CODATA 2006 value 6.02214179e23 (dimensionless) for every Level 3 model (Hucka et al. 2019,
/// §3.4.6) [verified: the specification text].
pub const SBML_AVOGADRO: f64 = 6.022_141_79e23;

const TIME_URL: &str = "http://www.sbml.org/sbml/symbols/time";
const AVOGADRO_URL: &str = "http://www.sbml.org/sbml/symbols/avogadro";
const DELAY_URL: &str = "http://www.sbml.org/sbml/symbols/delay";
const RATE_OF_URL: &str = "http://www.sbml.org/sbml/symbols/rateOf";

/// One node of a formula, with the place of its MathML element.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Math {
    pub kind: MathKind,
    pub loc: Loc,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MathKind {
    Number(f64),
    Boolean(bool),
    /// A `ci`: an SBML id (species, compartment, parameter, …) or a function's bound variable.
    Ident(String),
    /// The `time` csymbol.
    Time,
    /// The `avogadro` csymbol.
    Avogadro,
    /// A built-in operator applied to its arguments. `Root` is `[degree, x]`, `Log` is
    /// `[base, x]`.
    Apply(Op, Vec<Math>),
    /// A call of a function definition by id, before expansion.
    Call(String, Vec<Math>),
    /// `piecewise`: the first piece whose condition holds, else `otherwise`.
    Piecewise {
        pieces: Vec<(Math, Math)>,
        otherwise: Option<Box<Math>>,
    },
    /// The `delay` csymbol applied to (x, d).
    Delay(Box<Math>, Box<Math>),
    /// The `rateOf` csymbol applied to a symbol.
    RateOf(Box<Math>),
}

/// The built-in operators of SBML's MathML subset.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Op {
    Plus,
    Minus,
    Times,
    Divide,
    Power,
    Root,
    Abs,
    Exp,
    Ln,
    Log,
    Floor,
    Ceiling,
    Factorial,
    Quotient,
    Rem,
    Max,
    Min,
    Eq,
    Neq,
    Gt,
    Lt,
    Geq,
    Leq,
    And,
    Or,
    Xor,
    Not,
    Implies,
    Sin,
    Cos,
    Tan,
    Sec,
    Csc,
    Cot,
    Sinh,
    Cosh,
    Tanh,
    Sech,
    Csch,
    Coth,
    Arcsin,
    Arccos,
    Arctan,
    Arcsec,
    Arccsc,
    Arccot,
    Arcsinh,
    Arccosh,
    Arctanh,
    Arcsech,
    Arccsch,
    Arccoth,
}

/// How many arguments an operator takes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Arity {
    Exactly(usize),
    AtLeast(usize),
    /// `minus`: one (negation) or two (difference).
    OneOrTwo,
}

const OPS: &[(&str, Op)] = &[
    ("plus", Op::Plus),
    ("minus", Op::Minus),
    ("times", Op::Times),
    ("divide", Op::Divide),
    ("power", Op::Power),
    ("root", Op::Root),
    ("abs", Op::Abs),
    ("exp", Op::Exp),
    ("ln", Op::Ln),
    ("log", Op::Log),
    ("floor", Op::Floor),
    ("ceiling", Op::Ceiling),
    ("factorial", Op::Factorial),
    ("quotient", Op::Quotient),
    ("rem", Op::Rem),
    ("max", Op::Max),
    ("min", Op::Min),
    ("eq", Op::Eq),
    ("neq", Op::Neq),
    ("gt", Op::Gt),
    ("lt", Op::Lt),
    ("geq", Op::Geq),
    ("leq", Op::Leq),
    ("and", Op::And),
    ("or", Op::Or),
    ("xor", Op::Xor),
    ("not", Op::Not),
    ("implies", Op::Implies),
    ("sin", Op::Sin),
    ("cos", Op::Cos),
    ("tan", Op::Tan),
    ("sec", Op::Sec),
    ("csc", Op::Csc),
    ("cot", Op::Cot),
    ("sinh", Op::Sinh),
    ("cosh", Op::Cosh),
    ("tanh", Op::Tanh),
    ("sech", Op::Sech),
    ("csch", Op::Csch),
    ("coth", Op::Coth),
    ("arcsin", Op::Arcsin),
    ("arccos", Op::Arccos),
    ("arctan", Op::Arctan),
    ("arcsec", Op::Arcsec),
    ("arccsc", Op::Arccsc),
    ("arccot", Op::Arccot),
    ("arcsinh", Op::Arcsinh),
    ("arccosh", Op::Arccosh),
    ("arctanh", Op::Arctanh),
    ("arcsech", Op::Arcsech),
    ("arccsch", Op::Arccsch),
    ("arccoth", Op::Arccoth),
];

impl Op {
    /// The operator named by a MathML element.
    pub fn from_element(name: &str) -> Option<Op> {
        OPS.iter().find(|(n, _)| *n == name).map(|(_, o)| *o)
    }

    /// The MathML element name.
    pub fn name(self) -> &'static str {
        OPS.iter()
            .find(|(_, o)| *o == self)
            .map(|(n, _)| *n)
            .unwrap_or("?")
    }

    /// Arguments after normalisation (`root` and `log` count their degree or base).
    pub fn arity(self) -> Arity {
        use Op::*;
        match self {
            Plus | Times | And | Or | Xor => Arity::AtLeast(0),
            Max | Min => Arity::AtLeast(1),
            Eq | Gt | Lt | Geq | Leq => Arity::AtLeast(2),
            Minus => Arity::OneOrTwo,
            Divide | Power | Root | Log | Quotient | Rem | Neq | Implies => Arity::Exactly(2),
            _ => Arity::Exactly(1),
        }
    }

    /// Whether the operator yields a truth value.
    pub fn is_boolean(self) -> bool {
        use Op::*;
        matches!(
            self,
            Eq | Neq | Gt | Lt | Geq | Leq | And | Or | Xor | Not | Implies
        )
    }
}

impl Math {
    pub fn new(kind: MathKind, loc: Loc) -> Math {
        Math { kind, loc }
    }

    pub fn number(v: f64, loc: Loc) -> Math {
        Math::new(MathKind::Number(v), loc)
    }

    /// Calls `f` on this node and every node below it, parents first.
    pub fn visit<'m>(&'m self, f: &mut dyn FnMut(&'m Math)) {
        f(self);
        for c in self.children() {
            c.visit(f);
        }
    }

    /// The direct sub-expressions.
    pub fn children(&self) -> Vec<&Math> {
        match &self.kind {
            MathKind::Apply(_, a) | MathKind::Call(_, a) => a.iter().collect(),
            MathKind::Piecewise { pieces, otherwise } => pieces
                .iter()
                .flat_map(|(v, c)| [v, c])
                .chain(otherwise.as_deref())
                .collect(),
            MathKind::Delay(x, d) => vec![x, d],
            MathKind::RateOf(x) => vec![x],
            _ => Vec::new(),
        }
    }

    /// Number of nodes in the tree.
    pub fn size(&self) -> usize {
        let mut n = 0;
        self.visit(&mut |_| n += 1);
        n
    }
}

/// Reads the single expression inside a `<math>` element; `None` for an empty one.
/// `owner` is the id of the SBML element the formula belongs to, for messages.
pub fn read(xml: &Xml, math: Node, owner: Option<&str>) -> Result<Option<Math>, SbmlError> {
    let r = Reader { xml, owner };
    r.check_math_element(math)?;
    let body = r.single_child(math)?;
    body.map(|b| r.expr(b, 0)).transpose()
}

/// A function definition's bound variables and body.
pub type Lambda = (Vec<String>, Option<Math>);

/// Reads the `lambda` inside a function definition's `<math>`: its bound variables and body.
pub fn read_lambda(
    xml: &Xml,
    math: Node,
    owner: Option<&str>,
) -> Result<Option<Lambda>, SbmlError> {
    let r = Reader { xml, owner };
    r.check_math_element(math)?;
    let Some(mut node) = r.single_child(math)? else {
        return Ok(None);
    };
    if xml::name(node) == "semantics" {
        node = r.semantics_body(node)?;
    }
    if xml::name(node) != "lambda" {
        return Err(r.err(
            node,
            "a function definition's math must be a <lambda>".to_string(),
        ));
    }
    let mut params = Vec::new();
    let mut body = None;
    for c in xml::elements(node) {
        r.mathml(c)?;
        if xml::name(c) == "bvar" {
            if body.is_some() {
                return Err(r.err(c, "<bvar> must come before the function body".into()));
            }
            let ci = r.single_child(c)?.filter(|n| xml::name(*n) == "ci");
            let Some(ci) = ci else {
                return Err(r.err(c, "<bvar> must hold one <ci>".into()));
            };
            r.mathml(ci)?;
            params.push(r.ident(ci)?);
        } else if body.is_none() {
            body = Some(r.expr(c, 1)?);
        } else {
            return Err(r.err(c, "a <lambda> has one body after its <bvar>s".into()));
        }
    }
    Ok(Some((params, body)))
}

struct Reader<'x, 'a> {
    xml: &'x Xml<'a>,
    owner: Option<&'x str>,
}

impl Reader<'_, '_> {
    fn err(&self, node: Node, message: String) -> SbmlError {
        SbmlError::new(
            ErrorKind::Math { message },
            xml::name(node),
            self.owner,
            self.xml.loc(node),
        )
    }

    fn loc(&self, node: Node) -> Loc {
        self.xml.loc(node)
    }

    fn mathml(&self, node: Node) -> Result<(), SbmlError> {
        if xml::ns(node) == MATHML_NS {
            return Ok(());
        }
        Err(self.err(
            node,
            format!(
                "<{}> is not in the MathML namespace ({MATHML_NS}); found namespace \"{}\"",
                xml::name(node),
                xml::ns(node)
            ),
        ))
    }

    fn check_math_element(&self, math: Node) -> Result<(), SbmlError> {
        self.mathml(math)?;
        if xml::name(math) != "math" {
            return Err(self.err(math, "expected a <math> element".into()));
        }
        Ok(())
    }

    /// The one element child of `node`, if any; more than one is an error.
    fn single_child<'a, 'i>(&self, node: Node<'a, 'i>) -> Result<Option<Node<'a, 'i>>, SbmlError> {
        let mut it = xml::elements(node);
        let first = it.next();
        if let Some(extra) = it.next() {
            return Err(self.err(
                extra,
                format!(
                    "<{}> holds one expression; this is a second one",
                    xml::name(node)
                ),
            ));
        }
        Ok(first)
    }

    fn semantics_body<'a, 'i>(&self, node: Node<'a, 'i>) -> Result<Node<'a, 'i>, SbmlError> {
        xml::elements(node)
            .find(|c| !matches!(xml::name(*c), "annotation" | "annotation-xml"))
            .ok_or_else(|| self.err(node, "<semantics> holds no expression".into()))
    }

    fn ident(&self, node: Node) -> Result<String, SbmlError> {
        let text = node.text().unwrap_or("").trim();
        if text.is_empty() || !is_sid(text) {
            return Err(self.err(
                node,
                format!("<ci> must hold an SBML identifier, found \"{text}\""),
            ));
        }
        Ok(text.to_string())
    }

    fn expr(&self, node: Node, depth: usize) -> Result<Math, SbmlError> {
        self.mathml(node)?;
        if depth > MAX_DEPTH {
            return Err(self.err(
                node,
                format!("the formula is nested deeper than {MAX_DEPTH} elements"),
            ));
        }
        let loc = self.loc(node);
        let name = xml::name(node);
        let kind = match name {
            "cn" => MathKind::Number(self.number(node)?),
            "ci" => MathKind::Ident(self.ident(node)?),
            "csymbol" => match self.csymbol_url(node)? {
                TIME_URL => MathKind::Time,
                AVOGADRO_URL => MathKind::Avogadro,
                DELAY_URL | RATE_OF_URL => {
                    return Err(self.err(
                        node,
                        "this csymbol is a function; it must be the first child of an <apply>"
                            .into(),
                    ))
                }
                other => {
                    return Err(self.err(node, format!("unknown csymbol definitionURL \"{other}\"")))
                }
            },
            "true" => MathKind::Boolean(true),
            "false" => MathKind::Boolean(false),
            "pi" => MathKind::Number(std::f64::consts::PI),
            "exponentiale" => MathKind::Number(std::f64::consts::E),
            "infinity" => MathKind::Number(f64::INFINITY),
            "notanumber" => MathKind::Number(f64::NAN),
            "apply" => return self.apply(node, depth),
            "piecewise" => self.piecewise(node, depth)?,
            "semantics" => return self.expr(self.semantics_body(node)?, depth + 1),
            "lambda" => {
                return Err(self.err(
                    node,
                    "<lambda> may appear only as the math of a function definition".into(),
                ))
            }
            _ if Op::from_element(name).is_some() => {
                return Err(self.err(
                    node,
                    format!("<{name}/> is an operator; it must be the first child of an <apply>"),
                ))
            }
            _ => {
                return Err(self.err(
                    node,
                    format!("<{name}> is not part of the MathML subset SBML uses"),
                ))
            }
        };
        Ok(Math::new(kind, loc))
    }

    fn csymbol_url<'a>(&self, node: Node<'a, '_>) -> Result<&'a str, SbmlError> {
        xml::attr(node, "definitionURL")
            .map(str::trim)
            .ok_or_else(|| self.err(node, "<csymbol> needs a definitionURL".into()))
    }

    /// The value of a `cn`: `real` (the default), `integer`, `e-notation` (m <sep/> e, m·10^e)
    /// or `rational` (n <sep/> d, n/d).
    fn number(&self, node: Node) -> Result<f64, SbmlError> {
        let ty = xml::attr(node, "type").map(str::trim).unwrap_or("real");
        if let Some(base) = xml::attr(node, "base") {
            if base.trim() != "10" {
                return Err(self.err(node, format!("numbers in base {base} are not supported")));
            }
        }
        let mut parts = vec![String::new()];
        for c in node.children() {
            if c.is_text() {
                parts.last_mut().unwrap().push_str(c.text().unwrap_or(""));
            } else if c.is_element() {
                if xml::name(c) == "sep" {
                    parts.push(String::new());
                } else {
                    return Err(self.err(c, "a <cn> holds only a number (and <sep/>)".into()));
                }
            }
        }
        let parts: Vec<&str> = parts.iter().map(|p| p.trim()).collect();
        let bad = |what: &str| {
            self.err(
                node,
                format!(
                    "<cn type=\"{ty}\"> must hold {what}, found \"{}\"",
                    parts.join(" <sep/> ")
                ),
            )
        };
        match (ty, parts.as_slice()) {
            ("real", [t]) => parse_double(t).ok_or_else(|| bad("a number")),
            ("integer", [t]) => t
                .parse::<i64>()
                .map(|v| v as f64)
                .map_err(|_| bad("an integer")),
            ("e-notation", [m, e]) => match (parse_double(m), e.parse::<i32>()) {
                (Some(_), Ok(_)) => format!("{m}e{e}")
                    .parse::<f64>()
                    .map_err(|_| bad("m <sep/> e")),
                _ => Err(bad("a mantissa <sep/> an integer exponent")),
            },
            ("rational", [n, d]) => match (n.parse::<i64>(), d.parse::<i64>()) {
                (Ok(n), Ok(d)) => Ok(n as f64 / d as f64),
                _ => Err(bad("integer <sep/> integer")),
            },
            ("real" | "integer" | "e-notation" | "rational", _) => Err(bad("one number")),
            _ => Err(self.err(
                node,
                format!("unknown <cn> type \"{ty}\" (real, integer, e-notation or rational)"),
            )),
        }
    }

    fn piecewise(&self, node: Node, depth: usize) -> Result<MathKind, SbmlError> {
        let mut pieces = Vec::new();
        let mut otherwise = None;
        for c in xml::elements(node) {
            self.mathml(c)?;
            match xml::name(c) {
                "piece" => {
                    if otherwise.is_some() {
                        return Err(self.err(c, "<piece> after <otherwise>".into()));
                    }
                    let args: Vec<Node> = xml::elements(c).collect();
                    if args.len() != 2 {
                        return Err(self.err(
                            c,
                            format!(
                                "a <piece> holds a value and a condition, found {} elements",
                                args.len()
                            ),
                        ));
                    }
                    pieces.push((
                        self.expr(args[0], depth + 1)?,
                        self.expr(args[1], depth + 1)?,
                    ));
                }
                "otherwise" => {
                    if otherwise.is_some() {
                        return Err(self.err(c, "a <piecewise> has at most one <otherwise>".into()));
                    }
                    let Some(v) = self.single_child(c)? else {
                        return Err(self.err(c, "<otherwise> holds no expression".into()));
                    };
                    otherwise = Some(Box::new(self.expr(v, depth + 1)?));
                }
                other => {
                    return Err(self.err(
                        c,
                        format!("<{other}> in <piecewise>; expected <piece> or <otherwise>"),
                    ))
                }
            }
        }
        Ok(MathKind::Piecewise { pieces, otherwise })
    }

    fn apply(&self, node: Node, depth: usize) -> Result<Math, SbmlError> {
        let loc = self.loc(node);
        let mut children = xml::elements(node);
        let Some(head) = children.next() else {
            return Err(self.err(node, "an empty <apply>".into()));
        };
        self.mathml(head)?;
        let mut args = Vec::new();
        let mut qualifier: Option<(Node, Math)> = None;
        for c in children {
            self.mathml(c)?;
            match xml::name(c) {
                q @ ("degree" | "logbase") => {
                    let Some(v) = self.single_child(c)? else {
                        return Err(self.err(c, format!("<{q}> holds no expression")));
                    };
                    if qualifier.is_some() {
                        return Err(self.err(c, format!("a second qualifier <{q}>")));
                    }
                    qualifier = Some((c, self.expr(v, depth + 1)?));
                }
                "bvar" => return Err(self.err(c, "<bvar> may appear only in a <lambda>".into())),
                _ => args.push(self.expr(c, depth + 1)?),
            }
        }
        let head_name = xml::name(head);
        let kind = match head_name {
            "ci" => {
                if let Some((q, _)) = qualifier {
                    return Err(self.err(q, "a qualifier on a function call".into()));
                }
                MathKind::Call(self.ident(head)?, args)
            }
            "csymbol" => {
                if let Some((q, _)) = qualifier {
                    return Err(self.err(q, "a qualifier on a csymbol".into()));
                }
                match self.csymbol_url(head)? {
                    DELAY_URL => {
                        let [x, d]: [Math; 2] = args.try_into().map_err(|a: Vec<Math>| {
                            self.err(head, format!("delay takes 2 arguments, found {}", a.len()))
                        })?;
                        MathKind::Delay(Box::new(x), Box::new(d))
                    }
                    RATE_OF_URL => {
                        let [x]: [Math; 1] = args.try_into().map_err(|a: Vec<Math>| {
                            self.err(head, format!("rateOf takes 1 argument, found {}", a.len()))
                        })?;
                        MathKind::RateOf(Box::new(x))
                    }
                    TIME_URL | AVOGADRO_URL => {
                        return Err(self.err(head, "this csymbol is a value, not a function".into()))
                    }
                    other => {
                        return Err(
                            self.err(head, format!("unknown csymbol definitionURL \"{other}\""))
                        )
                    }
                }
            }
            _ => {
                let Some(op) = Op::from_element(head_name) else {
                    return Err(self.err(
                        head,
                        format!("<{head_name}> is not an operator of the MathML subset SBML uses"),
                    ));
                };
                if xml::elements(head).next().is_some() {
                    return Err(self.err(head, format!("<{head_name}/> must be empty")));
                }
                let args = self.qualified(op, head, args, qualifier)?;
                self.check_arity(op, head, args.len())?;
                MathKind::Apply(op, args)
            }
        };
        Ok(Math::new(kind, loc))
    }

    /// Puts `root`'s degree and `log`'s base first (2 and 10 by default); refuses a qualifier
    /// on any other operator.
    fn qualified(
        &self,
        op: Op,
        head: Node,
        mut args: Vec<Math>,
        qualifier: Option<(Node, Math)>,
    ) -> Result<Vec<Math>, SbmlError> {
        let (want, default) = match op {
            Op::Root => ("degree", 2.0),
            Op::Log => ("logbase", 10.0),
            _ => {
                if let Some((q, _)) = qualifier {
                    return Err(self.err(q, format!("<{}> takes no qualifier", op.name())));
                }
                return Ok(args);
            }
        };
        let first = match qualifier {
            Some((q, _)) if xml::name(q) != want => {
                return Err(self.err(q, format!("<{}> takes <{want}>", op.name())))
            }
            Some((_, m)) => m,
            None => Math::number(default, self.loc(head)),
        };
        args.insert(0, first);
        Ok(args)
    }

    fn check_arity(&self, op: Op, head: Node, n: usize) -> Result<(), SbmlError> {
        let ok = match op.arity() {
            Arity::Exactly(k) => n == k,
            Arity::AtLeast(k) => n >= k,
            Arity::OneOrTwo => n == 1 || n == 2,
        };
        if ok {
            return Ok(());
        }
        let shown = if matches!(op, Op::Root | Op::Log) {
            n - 1
        } else {
            n
        };
        let want = match op.arity() {
            Arity::Exactly(k) if matches!(op, Op::Root | Op::Log) => format!("{}", k - 1),
            Arity::Exactly(k) => format!("{k}"),
            Arity::AtLeast(k) => format!("at least {k}"),
            Arity::OneOrTwo => "one or two".into(),
        };
        Err(self.err(
            head,
            format!("<{}> takes {want} argument(s), found {shown}", op.name()),
        ))
    }
}

/// A number as XML Schema `double` writes it (`1.5`, `-2e-3`, `INF`, `-INF`, `NaN`).
pub fn parse_double(t: &str) -> Option<f64> {
    let t = t.trim();
    match t {
        "INF" | "+INF" => return Some(f64::INFINITY),
        "-INF" => return Some(f64::NEG_INFINITY),
        "NaN" => return Some(f64::NAN),
        _ => {}
    }
    let ok = !t.is_empty()
        && t.chars()
            .all(|c| c.is_ascii_digit() || matches!(c, '+' | '-' | '.' | 'e' | 'E'));
    if ok {
        t.parse().ok()
    } else {
        None
    }
}

/// Whether `s` is an SBML `SId`: a letter or `_`, then letters, digits and `_`.
pub fn is_sid(s: &str) -> bool {
    let mut c = s.chars();
    matches!(c.next(), Some(f) if f.is_ascii_alphabetic() || f == '_')
        && c.all(|x| x.is_ascii_alphanumeric() || x == '_')
}

/// Infix text of a formula, for display (`k1 * S1 / (K + S1)`).
impl fmt::Display for Math {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_math(self, f, 0)
    }
}

/// Binding strength of a node as printed, for parentheses.
fn precedence(m: &Math) -> u8 {
    match &m.kind {
        MathKind::Apply(op, a) => match op {
            Op::Or | Op::Xor | Op::Implies => 1,
            Op::And => 2,
            Op::Eq | Op::Neq | Op::Gt | Op::Lt | Op::Geq | Op::Leq => 3,
            Op::Plus if a.len() >= 2 => 4,
            Op::Minus => 4,
            Op::Times | Op::Divide if a.len() >= 2 => 5,
            Op::Power => 7,
            _ => 9,
        },
        MathKind::Number(v) if *v < 0.0 => 6,
        _ => 9,
    }
}

fn write_math(m: &Math, f: &mut fmt::Formatter<'_>, outer: u8) -> fmt::Result {
    let p = precedence(m);
    let paren = p < outer;
    if paren {
        write!(f, "(")?;
    }
    match &m.kind {
        MathKind::Number(v) => write!(f, "{v}")?,
        MathKind::Boolean(b) => write!(f, "{b}")?,
        MathKind::Ident(s) => write!(f, "{s}")?,
        MathKind::Time => write!(f, "time")?,
        MathKind::Avogadro => write!(f, "avogadro")?,
        MathKind::Apply(op, a) => {
            let infix = match op {
                Op::Plus if a.len() >= 2 => Some(" + "),
                Op::Minus if a.len() == 2 => Some(" - "),
                Op::Times if a.len() >= 2 => Some(" * "),
                Op::Divide => Some(" / "),
                Op::Power => Some("^"),
                Op::Eq => Some(" == "),
                Op::Neq => Some(" != "),
                Op::Gt => Some(" > "),
                Op::Lt => Some(" < "),
                Op::Geq => Some(" >= "),
                Op::Leq => Some(" <= "),
                Op::And => Some(" and ").filter(|_| a.len() >= 2),
                Op::Or => Some(" or ").filter(|_| a.len() >= 2),
                _ => None,
            };
            match infix {
                Some(sym) => {
                    for (i, x) in a.iter().enumerate() {
                        if i > 0 {
                            write!(f, "{sym}")?;
                        }
                        // Left-associative: the right operand of - / ^ binds tighter.
                        let right = i > 0 && matches!(op, Op::Minus | Op::Divide | Op::Power);
                        let left_pow = i == 0 && *op == Op::Power;
                        write_math(x, f, p + u8::from(right || left_pow))?;
                    }
                }
                None if *op == Op::Minus => {
                    write!(f, "-")?;
                    write_math(&a[0], f, 6)?;
                }
                None => {
                    write!(f, "{}(", op.name())?;
                    write_list(a, f)?;
                    write!(f, ")")?;
                }
            }
        }
        MathKind::Call(name, a) => {
            write!(f, "{name}(")?;
            write_list(a, f)?;
            write!(f, ")")?;
        }
        MathKind::Piecewise { pieces, otherwise } => {
            write!(f, "piecewise(")?;
            for (i, (v, c)) in pieces.iter().enumerate() {
                if i > 0 {
                    write!(f, ", ")?;
                }
                write!(f, "{v}, {c}")?;
            }
            if let Some(o) = otherwise {
                if !pieces.is_empty() {
                    write!(f, ", ")?;
                }
                write!(f, "{o}")?;
            }
            write!(f, ")")?;
        }
        MathKind::Delay(x, d) => write!(f, "delay({x}, {d})")?,
        MathKind::RateOf(x) => write!(f, "rateOf({x})")?,
    }
    if paren {
        write!(f, ")")?;
    }
    Ok(())
}

fn write_list(a: &[Math], f: &mut fmt::Formatter<'_>) -> fmt::Result {
    for (i, x) in a.iter().enumerate() {
        if i > 0 {
            write!(f, ", ")?;
        }
        write!(f, "{x}")?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(body: &str) -> Math {
        let text = format!(r#"<math xmlns="{MATHML_NS}">{body}</math>"#);
        let x = Xml::parse(&text).unwrap();
        read(&x, x.doc.root_element(), None).unwrap().unwrap()
    }

    #[test]
    fn formulas_print_with_the_parentheses_they_need() {
        let m = parse(
            "<apply><divide/><apply><times/><ci>k</ci><ci>S</ci></apply>\
             <apply><plus/><ci>K</ci><ci>S</ci></apply></apply>",
        );
        assert_eq!(m.to_string(), "k * S / (K + S)");
        let m =
            parse("<apply><minus/><ci>a</ci><apply><minus/><ci>b</ci><ci>c</ci></apply></apply>");
        assert_eq!(m.to_string(), "a - (b - c)");
        let m = parse("<apply><power/><apply><minus/><ci>x</ci></apply><cn>2</cn></apply>");
        assert_eq!(m.to_string(), "(-x)^2");
    }

    #[test]
    fn positions_are_those_of_the_elements() {
        let m = parse("\n  <apply><plus/>\n    <ci> a </ci><cn>1</cn></apply>");
        assert_eq!((m.loc.line, m.loc.col), (2, 3));
        assert_eq!((m.children()[0].loc.line, m.children()[0].loc.col), (3, 5));
    }
}
