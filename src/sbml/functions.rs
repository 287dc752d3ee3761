//! Function definitions expanded at their call sites.
//!
//! A call `f(a, b)` of `lambda(x, y, body)` becomes `body` with every `x` replaced by `a` and
//! every `y` by `b`, all at once (an argument is never rescanned, so an argument that mentions
//! `y` is not captured). Calls inside bodies are expanded first; a function that calls itself,
//! directly or through others, is an error, and so is an expansion that grows past
//! [`MAX_NODES`] nodes (nested calls can grow a formula exponentially).

use super::error::{ErrorKind, SbmlError};
use super::math::{Math, MathKind};
use super::model::{FunctionDefinition, Model};
use std::collections::HashMap;

/// Largest formula an expansion may produce.
pub const MAX_NODES: usize = 1_000_000;

/// Replaces every call of a function definition in the model's formulas by the expanded body.
/// The definitions themselves are kept, with their bodies expanded.
pub fn expand(model: &mut Model) -> Result<(), SbmlError> {
    let defs = model.function_definitions.clone();
    let mut ex = Expander {
        index: defs
            .iter()
            .enumerate()
            .map(|(i, f)| (f.id.as_str(), i))
            .collect(),
        defs: &defs,
        bodies: vec![None; defs.len()],
        open: vec![false; defs.len()],
    };
    for i in 0..defs.len() {
        ex.body(i)?;
    }
    for (f, b) in model.function_definitions.iter_mut().zip(&ex.bodies) {
        f.body = b.clone();
    }
    for m in model.maths_mut() {
        if has_call(m) {
            *m = ex.expand(m)?;
        }
    }
    Ok(())
}

fn has_call(m: &Math) -> bool {
    let mut found = false;
    m.visit(&mut |n| found |= matches!(n.kind, MathKind::Call(..)));
    found
}

struct Expander<'d> {
    defs: &'d [FunctionDefinition],
    index: HashMap<&'d str, usize>,
    /// Expanded bodies, filled on first use.
    bodies: Vec<Option<Math>>,
    /// Definitions being expanded (a call back into one is recursion).
    open: Vec<bool>,
}

impl Expander<'_> {
    fn err(&self, m: &Math, kind: ErrorKind, owner: Option<&str>) -> SbmlError {
        let element = match m.kind {
            MathKind::Call(..) => "apply",
            _ => "ci",
        };
        SbmlError::new(kind, element, owner, m.loc)
    }

    /// The expanded body of definition `i`.
    fn body(&mut self, i: usize) -> Result<Option<Math>, SbmlError> {
        if let Some(b) = &self.bodies[i] {
            return Ok(Some(b.clone()));
        }
        let def = &self.defs[i];
        let Some(body) = &def.body else {
            return Ok(None);
        };
        self.open[i] = true;
        let b = self.expand(body);
        self.open[i] = false;
        let b = b?;
        self.bodies[i] = Some(b.clone());
        Ok(Some(b))
    }

    fn expand(&mut self, m: &Math) -> Result<Math, SbmlError> {
        let kind = match &m.kind {
            MathKind::Call(name, args) => return self.call(m, name, args),
            MathKind::Apply(op, a) => MathKind::Apply(*op, self.all(a)?),
            MathKind::Piecewise { pieces, otherwise } => MathKind::Piecewise {
                pieces: pieces
                    .iter()
                    .map(|(v, c)| Ok((self.expand(v)?, self.expand(c)?)))
                    .collect::<Result<_, SbmlError>>()?,
                otherwise: match otherwise {
                    Some(o) => Some(Box::new(self.expand(o)?)),
                    None => None,
                },
            },
            MathKind::Delay(x, d) => {
                MathKind::Delay(Box::new(self.expand(x)?), Box::new(self.expand(d)?))
            }
            MathKind::RateOf(x) => MathKind::RateOf(Box::new(self.expand(x)?)),
            other => other.clone(),
        };
        Ok(Math::new(kind, m.loc))
    }

    fn all(&mut self, a: &[Math]) -> Result<Vec<Math>, SbmlError> {
        a.iter().map(|x| self.expand(x)).collect()
    }

    fn call(&mut self, m: &Math, name: &str, args: &[Math]) -> Result<Math, SbmlError> {
        let Some(&i) = self.index.get(name) else {
            return Err(self.err(
                m,
                ErrorKind::Dangling {
                    attribute: "a function call".into(),
                    target: name.to_string(),
                },
                None,
            ));
        };
        let def = &self.defs[i];
        if self.open[i] {
            return Err(self.err(
                m,
                ErrorKind::Invalid {
                    message: format!(
                        "function `{name}` calls itself; SBML functions cannot recurse"
                    ),
                },
                Some(&def.id),
            ));
        }
        if args.len() != def.params.len() {
            return Err(self.err(
                m,
                ErrorKind::Math {
                    message: format!(
                        "function `{name}` takes {} argument(s), found {}",
                        def.params.len(),
                        args.len()
                    ),
                },
                None,
            ));
        }
        let args = self.all(args)?;
        let Some(body) = self.body(i)? else {
            return Err(self.err(
                m,
                ErrorKind::Invalid {
                    message: format!("function `{name}` has no math"),
                },
                None,
            ));
        };
        let params = &self.defs[i].params;
        let out = substitute(&body, params, &args);
        if out.size() > MAX_NODES {
            return Err(self.err(
                m,
                ErrorKind::Invalid {
                    message: format!(
                        "expanding function calls makes this formula larger than {MAX_NODES} nodes"
                    ),
                },
                None,
            ));
        }
        Ok(out)
    }
}

/// `body` with each identifier `params[k]` replaced by `args[k]`.
fn substitute(body: &Math, params: &[String], args: &[Math]) -> Math {
    let kind = match &body.kind {
        MathKind::Ident(x) => match params.iter().position(|p| p == x) {
            Some(k) => return args[k].clone(),
            None => MathKind::Ident(x.clone()),
        },
        MathKind::Apply(op, a) => {
            MathKind::Apply(*op, a.iter().map(|x| substitute(x, params, args)).collect())
        }
        MathKind::Call(f, a) => MathKind::Call(
            f.clone(),
            a.iter().map(|x| substitute(x, params, args)).collect(),
        ),
        MathKind::Piecewise { pieces, otherwise } => MathKind::Piecewise {
            pieces: pieces
                .iter()
                .map(|(v, c)| (substitute(v, params, args), substitute(c, params, args)))
                .collect(),
            otherwise: otherwise
                .as_ref()
                .map(|o| Box::new(substitute(o, params, args))),
        },
        MathKind::Delay(x, d) => MathKind::Delay(
            Box::new(substitute(x, params, args)),
            Box::new(substitute(d, params, args)),
        ),
        MathKind::RateOf(x) => MathKind::RateOf(Box::new(substitute(x, params, args))),
        other => other.clone(),
    };
    Math::new(kind, body.loc)
}
