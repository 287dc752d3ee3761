//! Typed errors of the SBML importer: what went wrong, on which element (and its id), where.
//!
//! Every error names the XML element, the SBML id when the element has one, and the line and
//! column of its start tag. [`SbmlError::diagnostic`] turns one into the crate's
//! [`Diagnostic`], so an SBML file is reported like any other input
//! (exit status 2).

use crate::error::{Diagnostic, Span};
use serde::Serialize;
use std::fmt;

/// A place in the XML text: 1-based line and column (in characters) of an element's `<`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Loc {
    pub line: u32,
    pub col: u32,
}

/// A construct of SBML that copyloop does not simulate, and refuses rather than ignore.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Construct {
    /// An SBML Level 3 package (hierarchical composition, flux balance, distributions, …).
    Package(String),
    AlgebraicRule,
    FastReaction,
    /// The `delay` csymbol: a value at an earlier time.
    DelayFunction,
    /// The `rateOf` csymbol: the time derivative of a symbol.
    RateOf,
    /// SBML Level 1, whose MathML-free formula strings copyloop does not read.
    Level1,
}

impl Construct {
    /// A short name for tables and messages.
    pub fn name(&self) -> String {
        match self {
            Construct::Package(p) => format!("package {p}"),
            Construct::AlgebraicRule => "algebraic rule".into(),
            Construct::FastReaction => "fast reaction".into(),
            Construct::DelayFunction => "delay function".into(),
            Construct::RateOf => "rateOf function".into(),
            Construct::Level1 => "SBML Level 1".into(),
        }
    }
}

/// What is wrong.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ErrorKind {
    /// The file is larger than the importer reads.
    TooLarge { bytes: u64, limit: u64 },
    /// The bytes are not UTF-8.
    NotUtf8,
    /// The XML is not well formed.
    Xml { message: String },
    /// The root is not an SBML element of a known level and version.
    Namespace { message: String },
    /// A required attribute is absent.
    MissingAttribute { attribute: String },
    /// An attribute's value does not parse as its type.
    BadAttribute {
        attribute: String,
        value: String,
        expected: String,
    },
    /// A required child element is absent.
    MissingElement { element: String },
    /// An element that has no place here.
    UnexpectedElement { element: String },
    /// An id given twice in one scope.
    DuplicateId { first_line: u32 },
    /// A reference to an id that does not exist, or is of the wrong kind.
    Dangling { attribute: String, target: String },
    /// A MathML element outside the subset SBML uses, or misused.
    Math { message: String },
    /// A construct copyloop refuses.
    Unsupported { construct: Construct },
    /// A model whose meaning is incomplete or contradictory (no initial value, a cycle, …).
    Invalid { message: String },
    /// Valid SBML that the current network representation cannot hold yet.
    NotYet { message: String },
    /// Something the importer skips (a warning, not an error).
    Ignored { message: String },
}

/// One error of the importer.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SbmlError {
    /// Boxed, so that results carrying an error stay small.
    pub kind: Box<ErrorKind>,
    /// The XML element's local name (`species`, `apply`, …).
    pub element: String,
    /// The SBML id of the element, or of the nearest enclosing element that has one.
    pub id: Option<String>,
    pub loc: Loc,
}

impl SbmlError {
    pub fn new(kind: ErrorKind, element: &str, id: Option<&str>, loc: Loc) -> SbmlError {
        SbmlError {
            kind: Box::new(kind),
            element: element.to_string(),
            id: id.map(str::to_string),
            loc,
        }
    }

    /// The diagnostic for this error in `file`, whose text is `source`.
    pub fn diagnostic(&self, file: &str, source: &str) -> Diagnostic {
        let span = Span::new(
            self.loc.line,
            self.loc.col,
            self.element.chars().count() as u32 + 1,
        );
        let d = Diagnostic::at(file, source, span, self.to_string());
        match self.help() {
            Some(h) => d.with_help(h),
            None => d,
        }
    }

    fn help(&self) -> Option<String> {
        match &*self.kind {
            ErrorKind::TooLarge { .. } => {
                Some("split the model, or remove large annotations and notes".into())
            }
            ErrorKind::Unsupported { construct } => Some(match construct {
                Construct::Package(_) => {
                    "copyloop reads SBML core only; flatten or convert the model to core".into()
                }
                Construct::AlgebraicRule => {
                    "solve the rule for one variable and write it as an assignment rule".into()
                }
                Construct::FastReaction => {
                    "replace the fast reaction by its equilibrium (an assignment rule) or give it an ordinary rate"
                        .into()
                }
                Construct::DelayFunction | Construct::RateOf => {
                    "copyloop simulates models without delays or derivatives in their formulas".into()
                }
                Construct::Level1 => "convert the model to SBML Level 2 or 3".into(),
            }),
            _ => None,
        }
    }
}

impl fmt::Display for SbmlError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let what = match &self.id {
            Some(id) => format!("<{}> `{id}`", self.element),
            None => format!("<{}>", self.element),
        };
        match &*self.kind {
            ErrorKind::TooLarge { bytes, limit } => write!(
                f,
                "the file is {bytes} bytes; copyloop reads SBML files of up to {limit} bytes"
            ),
            ErrorKind::NotUtf8 => write!(f, "the file is not UTF-8 text"),
            ErrorKind::Xml { message } => write!(f, "malformed XML: {message}"),
            ErrorKind::Namespace { message } => write!(f, "{what}: {message}"),
            ErrorKind::MissingAttribute { attribute } => {
                write!(f, "{what} needs the attribute `{attribute}`")
            }
            ErrorKind::BadAttribute {
                attribute,
                value,
                expected,
            } => write!(
                f,
                "{what}: attribute `{attribute}` is \"{value}\", but it must be {expected}"
            ),
            ErrorKind::MissingElement { element } => {
                write!(f, "{what} needs a <{element}> element")
            }
            ErrorKind::UnexpectedElement { element } => {
                write!(f, "<{element}> has no place inside {what}")
            }
            ErrorKind::DuplicateId { first_line } => write!(
                f,
                "{what}: this id is already used on line {first_line}; ids are unique in a model"
            ),
            ErrorKind::Dangling { attribute, target } => write!(
                f,
                "{what}: {attribute} refers to `{target}`, which is not defined in this model"
            ),
            ErrorKind::Math { message } => write!(f, "{what}: {message}"),
            ErrorKind::Unsupported { construct } => write!(
                f,
                "{what}: copyloop does not support the {} (refused rather than simulate a different model)",
                construct.name()
            ),
            ErrorKind::Invalid { message } => write!(f, "{what}: {message}"),
            ErrorKind::NotYet { message } => write!(f, "{what}: not supported yet: {message}"),
            ErrorKind::Ignored { message } => write!(f, "{what}: {message}"),
        }
    }
}

impl std::error::Error for SbmlError {}
