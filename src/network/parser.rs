//! Text → syntax tree for the `.crn` network language (the README's network language).
//!
//! ```text
//! volume      <number> <volume-unit>
//! compartment <name> = <number> <volume-unit>
//! species     <name> [in <compartment>] = <amount> [clamped]
//! param       <name> = <number> [<unit>]
//! step <label> <side> -> <side>  @ <rate>
//! step <label> <side> <-> <side> @ <rate>, <rate>
//! dose   <species> += <amount> at <time> [every <time>] [until <time> | times <n>]
//! infuse <species> at <rate> from <time> to <time>
//! when   <condition> : <name> = <expr>, <name> += <expr>, … [at start]
//! ```
//!
//! Every node keeps its [`Span`] so the compiler can point at it. Numbers with units are turned
//! into canonical [`Quantity`] values here; what they mean (and whether their dimension fits) is
//! the compiler's business. Each line is parsed on its own and all errors are collected, so one
//! run of `check` shows every broken line.

use super::lexer::{lex_line, Tok, Token};
use super::units::{self, Dim, Quantity};
use crate::error::{Diagnostic, Span};

/// A parsed network file.
#[derive(Clone, Debug)]
pub struct Ast {
    pub file: String,
    pub source: String,
    pub items: Vec<Item>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Name {
    pub text: String,
    pub span: Span,
}

/// A number with its unit, already in canonical units.
#[derive(Clone, Debug, PartialEq)]
pub struct Literal {
    pub quantity: Quantity,
    /// True when no unit was written.
    pub bare: bool,
    /// Factor from the written unit to canonical units (1 when bare), so that a value given
    /// later without a unit (a sweep point) can be read in the unit the file used.
    pub unit_factor: f64,
    pub span: Span,
}

impl Ast {
    /// The unit the file wrote after the value of `name` (a species, a param or `volume`) and
    /// its factor to canonical units, e.g. `("/min", 1/60)` for `param k = 60 /min`; `None`
    /// where the value is bare or the text does not show its unit (an imported model).
    pub fn written_unit(&self, name: &str) -> Option<(String, f64)> {
        let lit = self.items.iter().find_map(|item| match item {
            Item::Volume(lit) if name == "volume" => Some(lit),
            Item::Param { name: n, value, .. } if n.text == name => Some(value),
            Item::Species {
                name: n, amount, ..
            } if n.text == name => Some(amount),
            _ => None,
        })?;
        if lit.bare {
            return None;
        }
        let line = self
            .source
            .lines()
            .nth((lit.span.line as usize).checked_sub(1)?)?;
        let text: String = line
            .chars()
            .skip((lit.span.col as usize).saturating_sub(1))
            .take(lit.span.len as usize)
            .collect();
        let (q, unit) = parse_quantity(text.trim()).ok()?;
        let unit = unit?;
        let digits = text
            .trim_start()
            .trim_start_matches(|c: char| c.is_ascii_digit() || "+-.".contains(c));
        // The exponent of the number, if any (`1e-3 /s`), is not part of the unit.
        let rest = match digits.strip_prefix(['e', 'E']) {
            Some(r) if r.starts_with(|c: char| c.is_ascii_digit() || c == '-' || c == '+') => {
                r.trim_start_matches(|c: char| c.is_ascii_digit() || "+-".contains(c))
            }
            _ => digits,
        };
        (q.dim == lit.quantity.dim && (unit - lit.unit_factor).abs() <= 1e-12 * unit.abs())
            .then(|| (rest.trim().to_string(), lit.unit_factor))
    }
}

#[derive(Clone, Debug, PartialEq)]
pub enum Item {
    Volume(Literal),
    Compartment {
        name: Name,
        size: Literal,
    },
    Species {
        name: Name,
        /// `in <compartment>`.
        compartment: Option<Name>,
        amount: Literal,
        clamped: bool,
    },
    Param {
        name: Name,
        value: Literal,
    },
    Step(Step),
    Dose(Dose),
    Infuse(Infuse),
    When(When),
}

/// `dose <species> += <amount> at <time> [every <time>] [until <time> | times <n>]`.
#[derive(Clone, Debug, PartialEq)]
pub struct Dose {
    pub species: Name,
    pub amount: Operand,
    pub at: Operand,
    pub every: Option<Operand>,
    pub end: Option<DoseEnd>,
    pub span: Span,
}

/// How a repeated dose ends.
#[derive(Clone, Debug, PartialEq)]
pub enum DoseEnd {
    /// `until <time>`: the last dose is the last one at or before this time.
    Until(Operand),
    /// `times <n>`: n doses in all.
    Times(Operand),
}

/// `infuse <species> at <rate> from <time> to <time>`.
#[derive(Clone, Debug, PartialEq)]
pub struct Infuse {
    pub species: Name,
    pub rate: Operand,
    pub from: Operand,
    pub to: Operand,
    pub span: Span,
}

/// `when <condition> : <assignments> [at start]`.
#[derive(Clone, Debug, PartialEq)]
pub struct When {
    pub condition: Expr,
    pub assignments: Vec<Assign>,
    /// `at start`: fire at t = 0 when the condition holds then.
    pub at_start: bool,
    /// SBML's further event fields, for an imported model (`None` for a `when` line).
    pub form: Option<EventForm>,
    pub span: Span,
}

/// An imported SBML event's fields beyond a `when` line's (SBML Level 3 Version 2 core §4.12
/// \[M\]); the compiler copies them into [`super::Event`].
#[derive(Clone, Debug, PartialEq)]
pub struct EventForm {
    /// The event's name in reports and messages.
    pub label: String,
    /// Time from trigger to execution, in seconds (no dimension check).
    pub delay: Option<Expr>,
    pub priority: Option<Expr>,
    pub persistent: bool,
    /// The trigger's value just before t = 0 (replaces `at start`).
    pub initial_value: bool,
    pub values_at_trigger: bool,
}

/// `<name> = <expr>` or `<name> += <expr>`.
#[derive(Clone, Debug, PartialEq)]
pub struct Assign {
    pub target: Name,
    pub add: bool,
    pub value: Expr,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Step {
    pub label: Name,
    pub reactants: Vec<Term>,
    pub products: Vec<Term>,
    pub reversible: bool,
    pub forward: Rate,
    pub reverse: Option<Rate>,
    pub span: Span,
}

/// `[<integer>] <name>` on one side of a step.
#[derive(Clone, Debug, PartialEq)]
pub struct Term {
    pub coefficient: u32,
    pub species: Name,
    pub span: Span,
}

/// A constant operand: a param name or a literal.
#[derive(Clone, Debug, PartialEq)]
pub enum Operand {
    Param(Name),
    Literal(Literal),
}

impl Operand {
    pub fn span(&self) -> Span {
        match self {
            Operand::Param(n) => n.span,
            Operand::Literal(l) => l.span,
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub enum Rate {
    /// A mass-action constant.
    Constant(Operand),
    /// `half-life <time>`: k = ln 2 / t½ for a first-order step.
    HalfLife(Operand, Span),
    /// `kd <concentration>` on the reverse of a `<->` step: k_rev = k_fwd·K_d.
    Kd(Operand, Span),
    /// `clearance <volume/time>` on a first-order step: k = CL / V of its reactant's
    /// compartment.
    Clearance(Operand, Span),
    /// `law <expr>`: the reaction's whole rate.
    Law(Expr),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
    Lt,
    Le,
    Gt,
    Ge,
    And,
    Or,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    Number(Literal),
    Name(Name),
    Neg(Box<Expr>, Span),
    Binary(BinOp, Box<Expr>, Box<Expr>, Span),
    Call(Name, Vec<Expr>, Span),
}

/// Dropping a tree takes its subtrees out onto a list first: a chain `a + b + c …` is a tree
/// as deep as it is long, and the derived drop would follow it down the stack.
impl Drop for Expr {
    fn drop(&mut self) {
        fn take(e: &mut Expr, out: &mut Vec<Expr>) {
            let hole = || {
                Expr::Name(Name {
                    text: String::new(),
                    span: Span::new(0, 0, 0),
                })
            };
            match e {
                Expr::Neg(a, _) => out.push(std::mem::replace(&mut **a, hole())),
                Expr::Binary(_, a, b, _) => {
                    out.push(std::mem::replace(&mut **a, hole()));
                    out.push(std::mem::replace(&mut **b, hole()));
                }
                Expr::Call(_, args, _) => out.append(args),
                Expr::Number(_) | Expr::Name(_) => {}
            }
        }
        let leaf = |e: &Expr| matches!(e, Expr::Number(_) | Expr::Name(_));
        let shallow = match self {
            Expr::Neg(a, _) => leaf(a),
            Expr::Binary(_, a, b, _) => leaf(a) && leaf(b),
            Expr::Call(_, args, _) => args.iter().all(leaf),
            Expr::Number(_) | Expr::Name(_) => true,
        };
        if shallow {
            return;
        }
        let mut todo = Vec::new();
        take(self, &mut todo);
        while let Some(mut e) = todo.pop() {
            take(&mut e, &mut todo);
        }
    }
}

impl Expr {
    pub fn span(&self) -> Span {
        match self {
            Expr::Number(l) => l.span,
            Expr::Name(n) => n.span,
            Expr::Neg(_, s) | Expr::Binary(_, _, _, s) | Expr::Call(_, _, s) => *s,
        }
    }
}

/// How deeply an expression may nest (see `Parser::check_nesting`).
pub const MAX_NESTING: u32 = 64;

/// Words with a fixed meaning in the language; they cannot name species, params or steps.
pub const KEYWORDS: &[&str] = &[
    "volume",
    "species",
    "param",
    "step",
    "law",
    "kd",
    "half",
    "life",
    "clamped",
    "clearance",
    "and",
    "or",
];

/// Words that may follow a number and its unit on a line (they end the unit).
const AFTER_UNITS: &[&str] = &["at", "every", "until", "times", "from", "to", "start"];

/// The words a line starts with.
const HEADS: &str =
    "`volume`, `compartment`, `species`, `param`, `step`, `dose`, `infuse` or `when`";

/// Parsing stops after this many broken lines: the first ones are what the user needs.
const MAX_ERRORS: usize = 50;

/// Parses a whole file. `bytes` may be anything: invalid UTF-8 is reported with its position.
pub fn parse(file: &str, bytes: &[u8]) -> Result<Ast, Vec<Diagnostic>> {
    // A UTF-8 byte-order mark (which some editors write) is not part of the text.
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    if bytes.starts_with(b"\xFF\xFE") || bytes.starts_with(b"\xFE\xFF") {
        return Err(vec![Diagnostic::at(
            file,
            "",
            Span::new(1, 1, 1),
            "this file is UTF-16 text, not UTF-8",
        )
        .with_help("save it as UTF-8 (plain text)")]);
    }
    let source = match std::str::from_utf8(bytes) {
        Ok(s) => s.to_string(),
        Err(e) => {
            let good = &bytes[..e.valid_up_to()];
            let line = good.iter().filter(|&&b| b == b'\n').count() as u32 + 1;
            let line_start = good.iter().rposition(|&b| b == b'\n').map_or(0, |p| p + 1);
            let col = String::from_utf8_lossy(&good[line_start..]).chars().count() as u32 + 1;
            let lossy = String::from_utf8_lossy(bytes).into_owned();
            return Err(vec![Diagnostic::at(
                file,
                &lossy,
                Span::new(line, col, 1),
                "this file is not UTF-8 text",
            )
            .with_help(
                "a network file is plain text; check that the right file was given",
            )]);
        }
    };
    let mut items = Vec::new();
    let mut errors = Vec::new();
    for (i, text) in source.lines().enumerate() {
        if errors.len() >= MAX_ERRORS {
            break;
        }
        let line = i as u32 + 1;
        let tokens = match lex_line(text, line) {
            Ok(t) => t,
            Err(e) => {
                errors.push(Diagnostic::at(file, &source, e.span, e.message));
                continue;
            }
        };
        if tokens.is_empty() {
            continue;
        }
        let mut p = LineParser {
            file,
            source: &source,
            tokens: &tokens,
            pos: 0,
            line,
            end_col: text.chars().count() as u32 + 1,
        };
        match p.item() {
            Ok(item) => items.push(item),
            Err(d) => errors.push(*d),
        }
    }
    if items.is_empty() && errors.is_empty() {
        let d = Diagnostic::at(
            file,
            &source,
            Span::new(1, 1, 1),
            "the file has no statements",
        )
        .with_help("a network needs at least one `species` and one `step` line");
        errors.push(d);
    }
    if errors.is_empty() {
        Ok(Ast {
            file: file.to_string(),
            source,
            items,
        })
    } else {
        Err(errors)
    }
}

/// Reads a number with an optional unit, such as `2nM`, `3 /min` or `1e6 /M/s`, from a command
/// line value, with the unit rules of the file language. Returns the quantity in canonical
/// units and the factor of the written unit (`None` when no unit was written).
pub fn parse_quantity(text: &str) -> Result<(Quantity, Option<f64>), String> {
    let tokens = lex_line(text, 1).map_err(|e| e.message)?;
    if tokens.is_empty() {
        return Err("expected a number".into());
    }
    let mut p = LineParser {
        file: "",
        source: text,
        tokens: &tokens,
        pos: 0,
        line: 1,
        end_col: text.chars().count() as u32 + 1,
    };
    let lit = p
        .literal("a number with an optional unit")
        .and_then(|l| p.end().map(|_| l))
        .map_err(|d| d.message)?;
    Ok((lit.quantity, (!lit.bare).then_some(lit.unit_factor)))
}

type PResult<T> = Result<T, Box<Diagnostic>>;

struct LineParser<'a> {
    file: &'a str,
    source: &'a str,
    tokens: &'a [Token],
    pos: usize,
    line: u32,
    end_col: u32,
}

impl<'a> LineParser<'a> {
    fn peek(&self) -> Option<&'a Token> {
        self.tokens.get(self.pos)
    }

    fn peek_at(&self, k: usize) -> Option<&'a Token> {
        self.tokens.get(self.pos + k)
    }

    fn next(&mut self) -> Option<&'a Token> {
        let t = self.tokens.get(self.pos);
        self.pos += 1;
        t
    }

    /// The span of the last token consumed (the current one before any is).
    fn last(&self) -> Span {
        match self.pos.checked_sub(1).and_then(|k| self.tokens.get(k)) {
            Some(t) => t.span,
            None => self.here(),
        }
    }

    fn here(&self) -> Span {
        match self.peek() {
            Some(t) => t.span,
            None => Span::new(self.line, self.end_col, 1),
        }
    }

    fn error(&self, span: Span, message: impl Into<String>) -> Box<Diagnostic> {
        Box::new(Diagnostic::at(self.file, self.source, span, message))
    }

    /// "expected X, found Y" at the current token.
    fn expected(&self, what: &str) -> Box<Diagnostic> {
        let found = match self.peek() {
            Some(t) => t.tok.describe(),
            None => "the end of the line".to_string(),
        };
        self.error(self.here(), format!("expected {what}, found {found}"))
    }

    fn at_ident(&self, word: &str) -> bool {
        matches!(self.peek(), Some(Token { tok: Tok::Ident(s), .. }) if s == word)
    }

    fn eat(&mut self, tok: &Tok) -> bool {
        if self.peek().map(|t| &t.tok) == Some(tok) {
            self.pos += 1;
            true
        } else {
            false
        }
    }

    fn expect(&mut self, tok: &Tok, what: &str) -> PResult<Span> {
        match self.peek() {
            Some(t) if &t.tok == tok => {
                self.pos += 1;
                Ok(t.span)
            }
            _ => Err(self.expected(what)),
        }
    }

    fn end(&self) -> PResult<()> {
        match self.peek() {
            None => Ok(()),
            Some(_) => Err(self.expected("the end of the line")),
        }
    }

    fn item(&mut self) -> PResult<Item> {
        let head = self.next().expect("non-empty line");
        let word = match &head.tok {
            Tok::Ident(w) => w.as_str(),
            _ => "",
        };
        let item = match word {
            "volume" => {
                let lit = self.literal("a volume such as `1 pL`")?;
                Item::Volume(lit)
            }
            "compartment" => {
                let name = self.declared_name("a compartment name")?;
                self.expect(&Tok::Eq, "`=` after the compartment name")?;
                let size = self.literal("a volume such as `3 L`")?;
                Item::Compartment { name, size }
            }
            "species" => {
                let name = self.declared_name("a species name")?;
                let compartment = if self.at_ident("in") {
                    self.pos += 1;
                    Some(self.name_ref("the name of a compartment")?)
                } else {
                    None
                };
                let eq_what = if compartment.is_some() {
                    "`=` after the compartment"
                } else {
                    "`=` (or `in <compartment>`) after the species name"
                };
                self.expect(&Tok::Eq, eq_what)?;
                let amount = self.literal("an amount such as `500 molecules` or `2 nM`")?;
                let clamped = if self.at_ident("clamped") {
                    self.pos += 1;
                    true
                } else {
                    false
                };
                Item::Species {
                    name,
                    compartment,
                    amount,
                    clamped,
                }
            }
            "param" => {
                let name = self.declared_name("a param name")?;
                self.expect(&Tok::Eq, "`=` after the param name")?;
                let value = self.literal("a number with an optional unit")?;
                Item::Param { name, value }
            }
            "step" => Item::Step(self.step(head.span)?),
            "dose" => Item::Dose(self.dose(head.span)?),
            "infuse" => Item::Infuse(self.infuse(head.span)?),
            "when" => Item::When(self.when(head.span)?),
            _ => {
                return Err(self
                    .error(
                        head.span,
                        format!("expected {HEADS}, found {}", head.tok.describe()),
                    )
                    .with_help_boxed("each line starts with one of these words"))
            }
        };
        self.end()?;
        Ok(item)
    }

    /// A name being declared: must match `[A-Za-z_][A-Za-z0-9_]*` and not be a keyword, a unit
    /// or a function.
    fn declared_name(&mut self, what: &str) -> PResult<Name> {
        let t = self.peek();
        let Some(Token {
            tok: Tok::Ident(text),
            span,
        }) = t
        else {
            return Err(self.expected(what));
        };
        self.pos += 1;
        check_name(text).map_err(|m| self.error(*span, m))?;
        Ok(Name {
            text: text.clone(),
            span: *span,
        })
    }

    fn name_ref(&mut self, what: &str) -> PResult<Name> {
        match self.peek() {
            Some(Token {
                tok: Tok::Ident(text),
                span,
            }) => {
                self.pos += 1;
                Ok(Name {
                    text: text.clone(),
                    span: *span,
                })
            }
            _ => Err(self.expected(what)),
        }
    }

    fn step(&mut self, head: Span) -> PResult<Step> {
        let label = self.declared_name("a step label")?;
        let reactants = self.side()?;
        let reversible = match self.peek().map(|t| &t.tok) {
            Some(Tok::Arrow) => false,
            Some(Tok::BiArrow) => true,
            _ => return Err(self.expected("`->` or `<->`")),
        };
        self.pos += 1;
        let products = self.side()?;
        if !self.eat(&Tok::At) {
            return Err(self
                .expected("`@` and the rate")
                .with_help_boxed("a step reads `step <label> A + B -> C @ <rate>`"));
        }
        let forward = self.rate(false)?;
        let reverse = if reversible {
            if !self.eat(&Tok::Comma) {
                return Err(self.expected("`,` and the reverse rate of the `<->` step"));
            }
            Some(self.rate(true)?)
        } else {
            if self.peek().map(|t| &t.tok) == Some(&Tok::Comma) {
                return Err(self
                    .error(
                        self.here(),
                        "a second rate is given for a one-way `->` step",
                    )
                    .with_help_boxed("write `<->` for a reversible step"));
            }
            None
        };
        let last = self.tokens.last().map_or(head, |t| t.span);
        Ok(Step {
            label,
            reactants,
            products,
            reversible,
            forward,
            reverse,
            span: head.to(last),
        })
    }

    fn expect_word(&mut self, word: &str, what: &str) -> PResult<Span> {
        if self.at_ident(word) {
            let span = self.here();
            self.pos += 1;
            Ok(span)
        } else {
            Err(self.expected(what))
        }
    }

    fn last_span(&self, head: Span) -> Span {
        let last = self.tokens[..self.pos.min(self.tokens.len())]
            .last()
            .map_or(head, |t| t.span);
        head.to(last)
    }

    /// `dose X += <amount> at <time> [every <time>] [until <time> | times <n>]`.
    fn dose(&mut self, head: Span) -> PResult<Dose> {
        let species = self.name_ref("the species to dose")?;
        if !(self.eat(&Tok::Plus) && self.eat(&Tok::Eq)) {
            return Err(self
                .expected("`+=` and the amount")
                .with_help_boxed("a dose reads `dose X += 5 nM at 1 h every 24 h times 7`"));
        }
        let amount = self.operand("an amount such as `5 nM` or `300 molecules`")?;
        self.expect_word("at", "`at` and the time of the (first) dose")?;
        let at = self.operand("a time such as `1 h`")?;
        let every = if self.at_ident("every") {
            self.pos += 1;
            Some(self.operand("a period such as `24 h`")?)
        } else {
            None
        };
        let end = if self.at_ident("until") {
            self.pos += 1;
            Some(DoseEnd::Until(self.operand("a time such as `7 d`")?))
        } else if self.at_ident("times") {
            self.pos += 1;
            Some(DoseEnd::Times(self.operand("a whole number of doses")?))
        } else {
            None
        };
        Ok(Dose {
            species,
            amount,
            at,
            every,
            end,
            span: self.last_span(head),
        })
    }

    /// `infuse X at <rate> from <time> to <time>`.
    fn infuse(&mut self, head: Span) -> PResult<Infuse> {
        let species = self.name_ref("the species to infuse")?;
        self.expect_word("at", "`at` and the infusion rate")?;
        let rate = self.operand("a rate such as `2 nM/min` or `100 molecules/s`")?;
        self.expect_word("from", "`from` and the start of the infusion")?;
        let from = self.operand("a time such as `1 h`")?;
        self.expect_word("to", "`to` and the end of the infusion")?;
        let to = self.operand("a time such as `3 h`")?;
        Ok(Infuse {
            species,
            rate,
            from,
            to,
            span: self.last_span(head),
        })
    }

    /// `when <condition> : X = <expr>, Y += <expr>, … [at start]`.
    fn when(&mut self, head: Span) -> PResult<When> {
        let condition = self.expr()?;
        if !self.eat(&Tok::Colon) {
            return Err(self
                .expected("`:` and what happens")
                .with_help_boxed("an event reads `when X >= 100 : X = 0, Y += 5 nM`"));
        }
        let mut assignments = Vec::new();
        loop {
            let target = self.name_ref("a species or param to set")?;
            let add = if self.eat(&Tok::Plus) {
                true
            } else if self.peek().map(|t| &t.tok) == Some(&Tok::Eq) {
                false
            } else {
                return Err(self.expected("`=` or `+=`"));
            };
            self.expect(&Tok::Eq, "`=` after `+`")?;
            let value = self.expr()?;
            let span = target.span.to(value.span());
            assignments.push(Assign {
                target,
                add,
                value,
                span,
            });
            if !self.eat(&Tok::Comma) {
                break;
            }
        }
        let at_start = if self.at_ident("at") {
            self.pos += 1;
            self.expect_word("start", "`start` (the line may end with `at start`)")?;
            true
        } else {
            false
        };
        Ok(When {
            condition,
            assignments,
            at_start,
            form: None,
            span: self.last_span(head),
        })
    }

    /// `0` or `[n] A + [m] B + …`.
    fn side(&mut self) -> PResult<Vec<Term>> {
        if let Some(Token {
            tok: Tok::Number(v, _),
            ..
        }) = self.peek()
        {
            let followed_by_name = matches!(
                self.peek_at(1),
                Some(Token {
                    tok: Tok::Ident(_),
                    ..
                })
            );
            if *v == 0.0 && !followed_by_name {
                self.pos += 1;
                return Ok(Vec::new());
            }
        }
        let mut terms = vec![self.term()?];
        while self.eat(&Tok::Plus) {
            terms.push(self.term()?);
        }
        Ok(terms)
    }

    fn term(&mut self) -> PResult<Term> {
        let start = self.here();
        let mut coefficient = 1;
        if let Some(Token {
            tok: Tok::Number(v, text),
            span,
        }) = self.peek()
        {
            if v.fract() != 0.0 || *v < 1.0 || *v > 1000.0 {
                return Err(self
                    .error(*span, format!("`{text}` is not a valid coefficient"))
                    .with_help_boxed("a coefficient is a whole number from 1 up, as in `2 A`"));
            }
            coefficient = *v as u32;
            self.pos += 1;
        }
        let species = self.name_ref("a species name (or `0` for nothing)")?;
        Ok(Term {
            coefficient,
            span: start.to(species.span),
            species,
        })
    }

    fn rate(&mut self, reverse: bool) -> PResult<Rate> {
        if self.at_ident("law") {
            self.pos += 1;
            return Ok(Rate::Law(self.expr()?));
        }
        if self.at_ident("half")
            && self.peek_at(1).map(|t| &t.tok) == Some(&Tok::Minus)
            && matches!(self.peek_at(2), Some(Token { tok: Tok::Ident(w), .. }) if w == "life")
        {
            let span = self.here().to(self.peek_at(2).unwrap().span);
            self.pos += 3;
            return Ok(Rate::HalfLife(
                self.operand("a half-life such as `40 min`")?,
                span,
            ));
        }
        if self.at_ident("clearance") {
            let span = self.here();
            self.pos += 1;
            return Ok(Rate::Clearance(
                self.operand("a clearance such as `5 L/h`")?,
                span,
            ));
        }
        if self.at_ident("kd") {
            let span = self.here();
            if !reverse {
                return Err(self
                    .error(span, "`kd` can only give the reverse rate of a `<->` step")
                    .with_help_boxed("write `step b A + B <-> C @ kon, kd 3 nM`"));
            }
            self.pos += 1;
            return Ok(Rate::Kd(
                self.operand("a dissociation constant such as `3 nM`")?,
                span,
            ));
        }
        Ok(Rate::Constant(self.operand(
            "a rate: a param name, a number with a unit, `half-life <time>` or `law <expression>`",
        )?))
    }

    fn operand(&mut self, what: &str) -> PResult<Operand> {
        match self.peek().map(|t| &t.tok) {
            Some(Tok::Ident(_)) => Ok(Operand::Param(self.name_ref(what)?)),
            Some(Tok::Number(..)) | Some(Tok::Minus) => Ok(Operand::Literal(self.literal(what)?)),
            _ => Err(self.expected(what)),
        }
    }

    /// `[-]<number> [<unit>]` with the value converted to canonical units.
    fn literal(&mut self, what: &str) -> PResult<Literal> {
        let start = self.here();
        let negative = self.eat(&Tok::Minus);
        let Some(Token {
            tok: Tok::Number(v, text),
            span,
        }) = self.peek()
        else {
            return Err(self.expected(what));
        };
        self.pos += 1;
        if !v.is_finite() {
            return Err(self.error(
                *span,
                format!("`{text}` is too large to be a finite number"),
            ));
        }
        let (factor, dim, bare, end) = self.unit(*span)?;
        let value = if negative { -v } else { *v } * factor;
        Ok(Literal {
            quantity: Quantity::new(value, dim),
            bare,
            unit_factor: factor,
            span: start.to(end),
        })
    }

    /// A unit after a number: factors joined by `*`, `/` or a space, each with an optional
    /// integer power `^n`. Returns (factor, dimension, no-unit-written, span of the last token).
    fn unit(&mut self, number: Span) -> PResult<(f64, Dim, bool, Span)> {
        let mut factor = 1.0;
        let mut dim = Dim::NONE;
        let mut bare = true;
        let mut end = number;
        loop {
            let (sign, name_at) = match self.peek().map(|t| &t.tok) {
                Some(Tok::Slash) | Some(Tok::Star) => {
                    let sign = if self.peek().unwrap().tok == Tok::Slash {
                        -1
                    } else {
                        1
                    };
                    match self.peek_at(1) {
                        Some(Token {
                            tok: Tok::Ident(w), ..
                        }) if units::is_unit(w) => (sign, 1),
                        Some(Token {
                            tok: Tok::Ident(w),
                            span,
                        }) if !self.in_expression() => {
                            return Err(self
                                .error(*span, format!("unknown unit `{w}`"))
                                .with_help_boxed(UNIT_HELP))
                        }
                        _ => break,
                    }
                }
                Some(Tok::Ident(w)) if units::is_unit(w) => (1, 0),
                _ => break,
            };
            self.pos += name_at;
            let t = self.next().unwrap();
            let Tok::Ident(w) = &t.tok else {
                unreachable!()
            };
            let (f, d) = units::unit(w).unwrap();
            let mut power = 1i32;
            end = t.span;
            if self.peek().map(|t| &t.tok) == Some(&Tok::Caret) {
                self.pos += 1;
                let neg = self.eat(&Tok::Minus);
                match self.peek() {
                    Some(Token {
                        tok: Tok::Number(p, _),
                        span,
                    }) if p.fract() == 0.0 && *p <= 9.0 => {
                        power = if neg { -(*p as i32) } else { *p as i32 };
                        end = *span;
                        self.pos += 1;
                    }
                    _ => return Err(self.expected("a small whole-number power such as `^-1`")),
                }
            }
            let power = power * sign;
            factor *= f.powi(power);
            dim = dim.times(d.powi(power));
            bare = false;
        }
        if let Some(Token {
            tok: Tok::Ident(w),
            span,
        }) = self.peek()
        {
            if !self.in_expression()
                && !KEYWORDS.contains(&w.as_str())
                && !AFTER_UNITS.contains(&w.as_str())
            {
                let msg = if bare {
                    format!("unknown unit `{w}`")
                } else {
                    format!("unknown unit `{w}` after `{}`", self.unit_text(number, end))
                };
                return Err(self.error(*span, msg).with_help_boxed(UNIT_HELP));
            }
        }
        Ok((factor, dim, bare, end))
    }

    fn in_expression(&self) -> bool {
        let head_is_when =
            matches!(self.tokens.first(), Some(Token { tok: Tok::Ident(w), .. }) if w == "when");
        head_is_when
            || self.tokens[..self.pos]
                .iter()
                .any(|t| matches!(&t.tok, Tok::Ident(w) if w == "law"))
    }

    fn unit_text(&self, from: Span, to: Span) -> String {
        let line = self
            .source
            .lines()
            .nth(self.line as usize - 1)
            .unwrap_or("");
        line.chars()
            .skip((from.col + from.len - 1) as usize)
            .take((to.col + to.len).saturating_sub(from.col + from.len) as usize)
            .collect::<String>()
            .trim()
            .to_string()
    }

    // ---- expressions: `or` < `and` < comparison < + - < * / < unary minus, ^ ----

    fn expr(&mut self) -> PResult<Expr> {
        self.expr_depth(0)
    }

    fn expr_depth(&mut self, depth: u32) -> PResult<Expr> {
        self.check_nesting(depth)?;
        self.logic(depth, "or", BinOp::Or)
    }

    /// Refuses nesting past [`MAX_NESTING`] (parentheses, calls, signs and powers each nest
    /// one level; chains such as `a + b + c` do not), so that no expression can exhaust the
    /// stack of the compiler's walks.
    fn check_nesting(&self, depth: u32) -> PResult<()> {
        if depth > MAX_NESTING {
            return Err(self
                .error(
                    self.here(),
                    format!("the expression is nested more than {MAX_NESTING} levels deep here"),
                )
                .with_help_boxed(
                    "parentheses, function calls, `-` signs and `^` powers each nest one level; \
                     split the expression with params or several steps",
                ));
        }
        Ok(())
    }

    /// `a or b …` (`and` binds tighter: it is parsed one level down).
    fn logic(&mut self, depth: u32, word: &str, op: BinOp) -> PResult<Expr> {
        let next = |p: &mut Self| {
            if op == BinOp::Or {
                p.logic(depth, "and", BinOp::And)
            } else {
                p.comparison(depth)
            }
        };
        // Spans run from the first token to the last (a closing parenthesis included).
        let start = self.here();
        let mut lhs = next(self)?;
        while self.at_ident(word) {
            self.pos += 1;
            let rhs = next(self)?;
            let span = start.to(self.last());
            lhs = Expr::Binary(op, Box::new(lhs), Box::new(rhs), span);
        }
        Ok(lhs)
    }

    fn comparison_op(&self) -> Option<BinOp> {
        match self.peek().map(|t| &t.tok) {
            Some(Tok::Lt) => Some(BinOp::Lt),
            Some(Tok::Le) => Some(BinOp::Le),
            Some(Tok::Gt) => Some(BinOp::Gt),
            Some(Tok::Ge) => Some(BinOp::Ge),
            _ => None,
        }
    }

    fn comparison(&mut self, depth: u32) -> PResult<Expr> {
        let start = self.here();
        let lhs = self.sum(depth)?;
        let Some(op) = self.comparison_op() else {
            return Ok(lhs);
        };
        self.pos += 1;
        let rhs = self.sum(depth)?;
        if self.comparison_op().is_some() {
            return Err(self
                .error(self.here(), "comparisons cannot be chained")
                .with_help_boxed("write `a < b and b < c`"));
        }
        let span = start.to(self.last());
        Ok(Expr::Binary(op, Box::new(lhs), Box::new(rhs), span))
    }

    fn sum(&mut self, depth: u32) -> PResult<Expr> {
        let start = self.here();
        let mut lhs = self.term_expr(depth)?;
        loop {
            let op = match self.peek().map(|t| &t.tok) {
                Some(Tok::Plus) => BinOp::Add,
                Some(Tok::Minus) => BinOp::Sub,
                _ => break,
            };
            self.pos += 1;
            let rhs = self.term_expr(depth)?;
            let span = start.to(self.last());
            lhs = Expr::Binary(op, Box::new(lhs), Box::new(rhs), span);
        }
        Ok(lhs)
    }

    fn term_expr(&mut self, depth: u32) -> PResult<Expr> {
        let start = self.here();
        let mut lhs = self.unary(depth)?;
        loop {
            let op = match self.peek().map(|t| &t.tok) {
                Some(Tok::Star) => BinOp::Mul,
                Some(Tok::Slash) => BinOp::Div,
                _ => break,
            };
            self.pos += 1;
            let rhs = self.unary(depth)?;
            let span = start.to(self.last());
            lhs = Expr::Binary(op, Box::new(lhs), Box::new(rhs), span);
        }
        Ok(lhs)
    }

    fn unary(&mut self, depth: u32) -> PResult<Expr> {
        self.check_nesting(depth)?;
        if let Some(t) = self.peek() {
            if t.tok == Tok::Minus {
                self.pos += 1;
                let inner = self.unary(depth + 1)?;
                let span = t.span.to(self.last());
                return Ok(Expr::Neg(Box::new(inner), span));
            }
        }
        let start = self.here();
        let base = self.primary(depth)?;
        if self.eat(&Tok::Caret) {
            let exponent = self.unary(depth + 1)?;
            let span = start.to(self.last());
            return Ok(Expr::Binary(
                BinOp::Pow,
                Box::new(base),
                Box::new(exponent),
                span,
            ));
        }
        Ok(base)
    }

    fn primary(&mut self, depth: u32) -> PResult<Expr> {
        match self.peek().map(|t| &t.tok) {
            Some(Tok::Number(..)) => Ok(Expr::Number(self.literal("a number")?)),
            Some(Tok::LParen) => {
                let open = self.here();
                self.pos += 1;
                let inner = self.expr_depth(depth + 1)?;
                if !self.eat(&Tok::RParen) {
                    return Err(self
                        .expected("`)`")
                        .with_help_boxed(format!("the `(` at column {} is not closed", open.col)));
                }
                Ok(inner)
            }
            Some(Tok::Ident(_)) => {
                let name = self.name_ref("a name")?;
                if self.peek().map(|t| &t.tok) == Some(&Tok::LParen) {
                    let open = self.here();
                    self.pos += 1;
                    let mut args = vec![self.expr_depth(depth + 1)?];
                    while self.eat(&Tok::Comma) {
                        args.push(self.expr_depth(depth + 1)?);
                    }
                    let close = self.here();
                    if !self.eat(&Tok::RParen) {
                        return Err(self.expected("`,` or `)`").with_help_boxed(format!(
                            "the `(` of `{}` at column {} is not closed",
                            name.text, open.col
                        )));
                    }
                    let span = name.span.to(close);
                    return Ok(Expr::Call(name, args, span));
                }
                Ok(Expr::Name(name))
            }
            Some(Tok::RParen) => Err(self
                .expected("a number, a name or `(`")
                .with_help_boxed("this `)` has no matching `(`")),
            _ => Err(self.expected("a number, a name or `(`")),
        }
    }
}

const UNIT_HELP: &str = "units are M mM uM µM nM pM fM, molecules, L mL uL µL nL pL fL um3, \
                         s min h d, joined by `*`, `/` or a space, with powers like `^-1`";

trait WithHelp {
    fn with_help_boxed(self, help: impl Into<String>) -> Self;
}

impl WithHelp for Box<Diagnostic> {
    fn with_help_boxed(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }
}

/// Checks a declared name: `[A-Za-z_][A-Za-z0-9_]*` and not a keyword. A name may equal a
/// unit (`M`, `L`, `s`): right after a number that word reads as the unit, elsewhere as the name.
pub fn check_name(text: &str) -> Result<(), String> {
    let mut chars = text.chars();
    let valid = chars
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_');
    if !valid {
        return Err(format!(
            "`{text}` is not a valid name: names are letters, digits and `_`, starting with a letter or `_`"
        ));
    }
    if KEYWORDS.contains(&text) {
        return Err(format!(
            "`{text}` is a keyword of the language and cannot be a name"
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok(src: &str) -> Ast {
        parse("t.crn", src.as_bytes()).unwrap_or_else(|e| panic!("{}", e[0]))
    }

    fn err(src: &str) -> Diagnostic {
        parse("t.crn", src.as_bytes()).unwrap_err().remove(0)
    }

    #[test]
    fn declarations() {
        let ast = ok("volume 2 pL\nspecies H = 3 nM clamped\nparam k = 2 /min # c\n\n# x\n");
        assert_eq!(ast.items.len(), 3);
        match &ast.items[0] {
            Item::Volume(l) => assert!((l.quantity.value - 2e-12).abs() < 1e-27),
            _ => panic!(),
        }
        match &ast.items[1] {
            Item::Species {
                amount, clamped, ..
            } => {
                assert!(*clamped);
                assert_eq!(amount.quantity.dim, Dim::CONC);
            }
            _ => panic!(),
        }
        match &ast.items[2] {
            Item::Param { value, .. } => {
                assert!((value.quantity.value - 2.0 / 60.0).abs() < 1e-15);
                assert_eq!(value.quantity.dim, Dim::new(0, -1, 0, 0));
            }
            _ => panic!(),
        }
    }

    #[test]
    fn unit_forms() {
        let ast = ok("param a = 1 /M/s\nparam b = 1 M^-1 s^-1\nparam c = 3 nM/s\nparam d = 2 molecules/s\nparam e = 4 /nM/min\nparam f = 1 M*s\n");
        let dims: Vec<Dim> = ast
            .items
            .iter()
            .map(|i| match i {
                Item::Param { value, .. } => value.quantity.dim,
                _ => panic!(),
            })
            .collect();
        assert_eq!(dims[0], Dim::new(-1, -1, 0, 0));
        assert_eq!(dims[1], Dim::new(-1, -1, 0, 0));
        assert_eq!(dims[2], Dim::new(1, -1, 0, 0));
        assert_eq!(dims[3], Dim::new(0, -1, 1, 0));
        assert_eq!(dims[4], Dim::new(-1, -1, 0, 0));
        assert_eq!(dims[5], Dim::new(1, 1, 0, 0));
        match &ast.items[4] {
            Item::Param { value, .. } => {
                assert!((value.quantity.value - 4.0 / (1e-9 * 60.0)).abs() < 1e-3)
            }
            _ => panic!(),
        }
    }

    #[test]
    fn steps() {
        let ast = ok("step bind E + S -> C @ kon\nstep flip A <-> B @ 2 /s, 3 /s\nstep d 2 A + B -> 0 @ 1\nstep s 0 -> H @ law vmax * sat(R, kd1) * inhib(H, ki)\nstep c H -> 0 @ half-life 40 min\nstep carry H + G <-> HG @ 2e6 /M/s, kd 3 nM\n");
        let steps: Vec<&Step> = ast
            .items
            .iter()
            .map(|i| match i {
                Item::Step(s) => s,
                _ => panic!(),
            })
            .collect();
        assert_eq!(steps[0].reactants.len(), 2);
        assert!(steps[1].reversible);
        assert_eq!(steps[2].reactants[0].coefficient, 2);
        assert!(steps[2].products.is_empty());
        assert!(steps[3].reactants.is_empty());
        assert!(matches!(
            steps[3].forward,
            Rate::Law(Expr::Binary(BinOp::Mul, ..))
        ));
        match &steps[4].forward {
            Rate::HalfLife(Operand::Literal(l), _) => assert_eq!(l.quantity.value, 2400.0),
            _ => panic!(),
        }
        assert!(matches!(steps[5].reverse, Some(Rate::Kd(..))));
    }

    #[test]
    fn law_with_commas_in_reversible_step() {
        let ast = ok("step r A <-> B @ law min(A, B) * 2 /s, law max(A, 1 nM)/s\n");
        match &ast.items[0] {
            Item::Step(s) => {
                assert!(matches!(s.forward, Rate::Law(_)));
                assert!(matches!(s.reverse, Some(Rate::Law(_))));
            }
            _ => panic!(),
        }
    }

    #[test]
    fn expression_precedence() {
        let ast = ok("step r 0 -> A @ law 1 + 2 * 3 ^ 2 / s\n");
        let Item::Step(s) = &ast.items[0] else {
            panic!()
        };
        let Rate::Law(Expr::Binary(BinOp::Add, _, rhs, _)) = &s.forward else {
            panic!("{:?}", s.forward)
        };
        assert!(matches!(**rhs, Expr::Binary(BinOp::Mul, ..)));
    }

    #[test]
    fn negative_cases_have_positions() {
        let d = err("step bind E + S -> C kon\n");
        assert_eq!((d.span.line, d.span.col), (1, 22));
        assert!(d.message.contains("expected `@`"));
        let d = err("species A = 3 parsecs\n");
        assert!(d.message.contains("unknown unit `parsecs`"));
        assert_eq!(d.span.col, 15);
        let d = err("step r 0 -> A @ law (1 + 2\n");
        assert!(d.message.contains("expected `)`"));
        let d = err("spieces A = 1\n");
        assert!(d
            .message
            .contains("expected `volume`, `compartment`, `species`"));
        let d = err("species 1A = 1\n");
        assert!(d.message.contains("expected a species name"));
        let d = err("species law = 1\n");
        assert!(d.message.contains("keyword"));
        let d = err("step a A -> B @ 1, 2\n");
        assert!(d.message.contains("one-way"));
        let d = err("step a A <-> B @ 1\n");
        assert!(d.message.contains("reverse rate"));
        let d = err("step a A -> B @ kd 3 nM\n");
        assert!(d.message.contains("`kd` can only"));
        let d = err("step a 1.5 A -> B @ 1\n");
        assert!(d.message.contains("coefficient"));
        let d = err("param k = 1e999\n");
        assert!(d.message.contains("finite"));
        let d = err("");
        assert!(d.message.contains("no statements"));
        let d = err("step a A B -> C @ 1\n");
        assert!(d.message.contains("expected `->` or `<->`"));
    }

    #[test]
    fn command_line_quantities() {
        let (q, unit) = parse_quantity("2nM").unwrap();
        assert_eq!(unit, Some(1e-9));
        assert!(q.dim == Dim::CONC && (q.value - 2e-9).abs() < 1e-24);
        let (q, unit) = parse_quantity("-3.5").unwrap();
        assert!(unit.is_none() && q.value == -3.5);
        let (q, _) = parse_quantity("1e6 /M/s").unwrap();
        assert_eq!(q.dim, Dim::new(-1, -1, 0, 0));
        assert!(parse_quantity("2 parsecs")
            .unwrap_err()
            .contains("unknown unit"));
        assert!(parse_quantity("").is_err());
        assert!(parse_quantity("2 nM 3").is_err());
    }

    #[test]
    fn invalid_utf8_is_located() {
        let d = parse("b.bin", b"species A = 1\nst\xffep")
            .unwrap_err()
            .remove(0);
        assert_eq!((d.span.line, d.span.col), (2, 3));
        assert!(d.message.contains("not UTF-8"));
    }

    #[test]
    fn all_errors_are_collected() {
        let e = parse("t.crn", b"foo\nbar\nspecies A = 1\n").unwrap_err();
        assert_eq!(e.len(), 2);
        assert_eq!(e[1].span.line, 2);
    }
}
