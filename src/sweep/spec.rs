//! One `--vary NAME=SPEC`: which value of the network it changes and the values it takes.
//!
//! ```text
//! lin:A..B:N     N values evenly spaced from A to B inclusive
//! log:A..B:N     N values evenly spaced in ln from A to B inclusive (A, B > 0)
//! list:V1,V2,…   the values as listed
//! ```
//!
//! Values are numbers with an optional unit, read with the network language's own unit grammar
//! (the parser reads `param v = <value>`), so `3 nM`, `2e6 /M/s` and `40 min` mean here what they
//! mean in a `.crn` file. A value without a unit is read in the unit the file wrote for that
//! name ([`Override::Bare`]). NAME is a param, a species (its initial amount) or `volume`.
//! Swept amounts of a species the file counts in molecules are rounded to whole molecules.
//! In a Latin hypercube the `:N` may be left out: the range is cut into as many strata as the
//! design has points.

use crate::error::{Error, Result};
use crate::network::lexer::{lex_line, Tok};
use crate::network::parser::{self, Ast, Item};
use crate::network::{Dim, Override, Quantity};
use serde_json::{json, Value};

/// What a swept name stands for in the network file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Target {
    Param,
    /// A species' initial amount; `count` when the file gives it in molecules.
    Species {
        count: bool,
    },
    Volume,
}

impl Target {
    pub fn as_str(self) -> &'static str {
        match self {
            Target::Param => "param",
            Target::Species { .. } => "species",
            Target::Volume => "volume",
        }
    }
}

/// How the values of a dimension are laid out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scale {
    Lin,
    Log,
    List,
}

impl Scale {
    pub fn as_str(self) -> &'static str {
        match self {
            Scale::Lin => "lin",
            Scale::Log => "log",
            Scale::List => "list",
        }
    }
}

/// A unit written on the command line: its text, its factor to canonical units and its
/// dimension.
#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    pub text: String,
    pub factor: f64,
    pub dim: Dim,
}

/// One swept dimension. Every number here is in the dimension's own unit: `unit` when the spec
/// wrote one, otherwise the unit the file wrote for `name`.
#[derive(Clone, Debug, PartialEq)]
pub struct Vary {
    pub name: String,
    /// The spec as typed, for the sweep file's header.
    pub spec: String,
    pub target: Target,
    pub scale: Scale,
    pub unit: Option<Unit>,
    /// Range ends (lin and log).
    pub from: f64,
    pub to: f64,
    /// The `:N` of a lin or log spec, if given.
    pub count: Option<usize>,
    /// The values of a list spec.
    pub list: Vec<f64>,
    /// The unit the file wrote for `name` (`molecules` for a count written bare), which a
    /// value without a unit is read in; `None` for a bare param.
    pub file_unit: Option<String>,
}

impl Vary {
    /// Parses `NAME=SPEC` against the network `ast`.
    pub fn parse(text: &str, ast: &Ast) -> Result<Vary> {
        let fail = |msg: String| Error::usage(format!("--vary {text}: {msg}"));
        let (name, spec) = text
            .split_once('=')
            .ok_or_else(|| fail("expected NAME=SPEC, e.g. `kon=log:1e5..1e7:9`".into()))?;
        let name = name.trim();
        let spec = spec.trim();
        let target = target(name, ast).map_err(fail)?;
        let (kind, body) = spec
            .split_once(':')
            .ok_or_else(|| fail("SPEC is `lin:A..B:N`, `log:A..B:N` or `list:A,B,…`".into()))?;
        let mut v = Vary {
            name: name.to_string(),
            spec: spec.to_string(),
            target,
            scale: Scale::List,
            unit: None,
            from: 0.0,
            to: 0.0,
            count: None,
            list: Vec::new(),
            file_unit: file_unit(name, ast),
        };
        match kind.trim() {
            "lin" | "log" => {
                v.scale = if kind.trim() == "lin" {
                    Scale::Lin
                } else {
                    Scale::Log
                };
                let (range, n) = match body.rsplit_once(':') {
                    Some((r, n)) => (r, Some(n.trim())),
                    None => (body, None),
                };
                let (a, b) = range
                    .split_once("..")
                    .ok_or_else(|| fail(format!("expected a range `A..B`, found `{range}`")))?;
                let values = written_all(&[a, b]).map_err(fail)?;
                v.unit = values.0;
                v.from = values.1[0];
                v.to = values.1[1];
                if let Some(n) = n {
                    let n: usize = n.parse().map_err(|_| {
                        fail(format!("`{n}` is not a number of values (a whole number)"))
                    })?;
                    if n < 2 {
                        return Err(fail(
                            "a range needs at least 2 values; use `list:A` for one value".into(),
                        ));
                    }
                    if n as u64 > super::design::MAX_POINTS {
                        return Err(fail(format!(
                            "{n} values is more than a sweep may have ({})",
                            super::design::MAX_POINTS
                        )));
                    }
                    v.count = Some(n);
                }
                if v.scale == Scale::Log && !(v.from > 0.0 && v.to > 0.0) {
                    return Err(fail("a log range needs two positive ends".into()));
                }
            }
            "list" => {
                let items: Vec<&str> = body.split(',').collect();
                let values = written_all(&items).map_err(fail)?;
                v.unit = values.0;
                v.list = values.1;
            }
            other => {
                return Err(fail(format!(
                    "unknown kind `{other}`; SPEC is `lin:A..B:N`, `log:A..B:N` or `list:A,B,…`"
                )))
            }
        }
        if let Target::Species { count: true } = v.target {
            if let Some(u) = &v.unit {
                if u.dim != Dim::COUNT {
                    return Err(fail(format!(
                        "the file gives `{name}` in molecules, so its values need no unit or \
                         `molecules`, not `{}`",
                        u.text
                    )));
                }
            }
        }
        Ok(v)
    }

    /// The values of a grid design.
    pub fn grid_values(&self) -> Result<Vec<f64>> {
        let values = match self.scale {
            Scale::List => self.list.clone(),
            Scale::Lin | Scale::Log => {
                let n = self.count.ok_or_else(|| {
                    Error::usage(format!(
                        "--vary {}={}: a grid needs the number of values, e.g. `{}:{}..{}:5`",
                        self.name,
                        self.spec,
                        self.scale.as_str(),
                        crate::numbers::round_trip(self.from),
                        crate::numbers::round_trip(self.to)
                    ))
                })?;
                (0..n)
                    .map(|k| match k {
                        0 => self.from,
                        k if k == n - 1 => self.to,
                        k => self.at_fraction(k as f64 / (n - 1) as f64),
                    })
                    .collect()
            }
        };
        Ok(values.into_iter().map(|x| self.finish(x)).collect())
    }

    /// The value a fraction `f` of the way along the range: A + f·(B − A) on a lin range,
    /// A·(B/A)^f (evenly spaced in ln) on a log range. Not rounded (see [`Vary::finish`]).
    pub fn at_fraction(&self, f: f64) -> f64 {
        match self.scale {
            Scale::Log => self.from * (self.to / self.from).powf(f),
            Scale::Lin | Scale::List => self.from + f * (self.to - self.from),
        }
    }

    /// A value as the network will use it: whole molecules for a species counted in molecules.
    pub fn finish(&self, x: f64) -> f64 {
        match self.target {
            Target::Species { count: true } => x.round(),
            _ => x,
        }
    }

    /// The override that sets this name to `x` (in the dimension's unit).
    pub fn override_for(&self, x: f64) -> Override {
        match &self.unit {
            Some(u) if u.dim != Dim::COUNT || self.target == Target::Param => {
                Override::Quantity(Quantity::new(x * u.factor, u.dim))
            }
            // A count in molecules reads the same whether the file wrote `molecules` or nothing.
            _ => Override::Bare(x),
        }
    }

    /// What identifies this dimension in a sweep's fingerprint: the values it can take, not how
    /// they were typed.
    pub fn identity(&self) -> Value {
        let unit = self.unit.as_ref().map(|u| {
            json!({"factor": u.factor, "dim": [u.dim.conc, u.dim.time, u.dim.count, u.dim.volume]})
        });
        match self.scale {
            Scale::List => json!({"name": self.name, "scale": "list", "unit": unit,
                                  "values": self.list}),
            _ => json!({"name": self.name, "scale": self.scale.as_str(), "unit": unit,
                        "from": self.from, "to": self.to, "count": self.count}),
        }
    }

    /// The unit text shown with the values, or `None` for the file's own unit.
    pub fn unit_text(&self) -> Option<&str> {
        self.unit.as_ref().map(|u| u.text.as_str())
    }
}

/// The unit text the file wrote after the value of `name` (the volume, a param or a
/// species); `molecules` for a species amount written bare; `None` for a bare param or where
/// the file's text does not show it (an imported SBML model, whose amounts are counts).
fn file_unit(name: &str, ast: &Ast) -> Option<String> {
    let (lit, species) = ast.items.iter().find_map(|item| match item {
        Item::Volume(lit) if name == "volume" => Some((lit, false)),
        Item::Param { name: n, value, .. } if n.text == name => Some((value, false)),
        Item::Species {
            name: n, amount, ..
        } if n.text == name => Some((amount, true)),
        _ => None,
    })?;
    if lit.bare || lit.quantity.dim == Dim::COUNT {
        return species.then(|| "molecules".to_string());
    }
    let line = ast
        .source
        .lines()
        .nth((lit.span.line as usize).checked_sub(1)?)?;
    let text: String = line
        .chars()
        .skip((lit.span.col as usize).saturating_sub(1))
        .take(lit.span.len as usize)
        .collect();
    // The literal must read back as the same number and unit (a `.crn` line, not XML).
    let w = written(&text).ok()?;
    (w.unit.is_some() && w.canonical == lit.quantity.value).then(|| unit_text(&text))
}

/// What `name` is in the network file.
fn target(name: &str, ast: &Ast) -> std::result::Result<Target, String> {
    if name == "volume" {
        return if ast.items.iter().any(|i| matches!(i, Item::Volume(_))) {
            Ok(Target::Volume)
        } else {
            Err(format!(
                "{} sets no volume, so `volume` cannot vary",
                ast.file
            ))
        };
    }
    let mut names = Vec::new();
    for item in &ast.items {
        match item {
            Item::Param { name: n, .. } if n.text == name => return Ok(Target::Param),
            Item::Species {
                name: n, amount, ..
            } if n.text == name => {
                let d = amount.quantity.dim;
                return Ok(Target::Species {
                    count: d == Dim::COUNT || d.is_none(),
                });
            }
            Item::Param { name: n, .. } | Item::Species { name: n, .. } => {
                names.push(n.text.as_str())
            }
            _ => {}
        }
    }
    Err(format!(
        "`{name}` is not a param, a species or `volume` of {}; its names are: {}",
        ast.file,
        names.join(", ")
    ))
}

/// A value as written on the command line.
struct Written {
    /// The number as written, before its unit.
    number: f64,
    /// In canonical units.
    canonical: f64,
    unit: Option<Unit>,
}

/// Reads `text` as `<number> [<unit>]` with the network language's grammar.
fn written(text: &str) -> std::result::Result<Written, String> {
    let text = text.trim();
    if text.is_empty() {
        return Err("a value is missing".into());
    }
    if text.contains(['#', '\n', '\r']) {
        return Err(format!("`{text}` is not a number with a unit"));
    }
    let line = format!("param v = {text}");
    let ast = parser::parse("--vary", line.as_bytes()).map_err(|d| {
        let d = &d[0];
        let msg = d
            .message
            .replace("the end of the line", "the end of the value");
        match &d.help {
            Some(h) => format!("`{text}`: {msg} ({h})"),
            None => format!("`{text}`: {msg}"),
        }
    })?;
    let Some(Item::Param { value, .. }) = ast.items.first() else {
        return Err(format!("`{text}` is not a number with a unit"));
    };
    let unit = if value.bare {
        None
    } else {
        Some(Unit {
            text: unit_text(text),
            factor: value.unit_factor,
            dim: value.quantity.dim,
        })
    };
    Ok(Written {
        number: value.quantity.value / value.unit_factor,
        canonical: value.quantity.value,
        unit,
    })
}

/// The text after the number in `text` (which lexes: [`written`] parsed it).
fn unit_text(text: &str) -> String {
    let tokens = lex_line(text, 1).unwrap_or_default();
    let end = tokens
        .iter()
        .find(|t| matches!(t.tok, Tok::Number(..)))
        .map_or(0, |t| (t.span.col - 1 + t.span.len) as usize);
    text.chars()
        .skip(end)
        .collect::<String>()
        .trim()
        .to_string()
}

/// Reads several values that must share one unit convention: all without a unit, or all with
/// units of one dimension. Returns the unit of the first and every value in that unit.
fn written_all(texts: &[&str]) -> std::result::Result<(Option<Unit>, Vec<f64>), String> {
    let values: Vec<Written> = texts
        .iter()
        .map(|t| written(t))
        .collect::<std::result::Result<_, _>>()?;
    let first = values[0].unit.clone();
    let mut out = Vec::with_capacity(values.len());
    for (w, text) in values.iter().zip(texts) {
        let x = match (&first, &w.unit) {
            (None, None) => w.number,
            (Some(u), Some(v)) if u.dim == v.dim => w.canonical / u.factor,
            (Some(u), Some(v)) => {
                return Err(format!(
                    "`{}` is {} but `{}` is {}: one name takes one kind of value",
                    texts[0].trim(),
                    u.dim,
                    text.trim(),
                    v.dim
                ))
            }
            _ => {
                return Err(format!(
                    "write a unit on every value or on none (a value without a unit is read in \
                     the unit the file wrote): `{}` and `{}` differ",
                    texts[0].trim(),
                    text.trim()
                ))
            }
        };
        if !x.is_finite() {
            return Err(format!("`{}` is not a finite number", text.trim()));
        }
        out.push(x);
    }
    Ok((first, out))
}

#[cfg(test)]
mod tests {
    use super::*;

    const NET: &str = "volume 1 pL\nspecies H = 50 nM clamped\nspecies E = 200 molecules\n\
                       param kon = 2e7 /M/s\nparam koff = 0.5 /s\n\
                       step bind E + H <-> C @ kon, koff\nspecies C = 0\n";

    fn ast() -> Ast {
        parser::parse("t.crn", NET.as_bytes()).unwrap()
    }

    fn vary(s: &str) -> Result<Vary> {
        Vary::parse(s, &ast())
    }

    #[test]
    fn lin_grid_hits_both_ends() {
        let v = vary("koff=lin:0.5..1.5:5").unwrap();
        assert_eq!(v.grid_values().unwrap(), vec![0.5, 0.75, 1.0, 1.25, 1.5]);
        assert_eq!(v.override_for(0.75), Override::Bare(0.75));
    }

    #[test]
    fn log_grid_is_geometric() {
        let v = vary("kon=log:1e5..1e7:3").unwrap();
        let g = v.grid_values().unwrap();
        assert_eq!(g[0], 1e5);
        assert_eq!(g[1], 1e6);
        assert_eq!(g[2], 1e7);
    }

    #[test]
    fn the_unit_the_file_wrote_is_recorded_for_plots() {
        let unit = |s: &str| vary(s).unwrap().file_unit;
        assert_eq!(unit("kon=log:1e5..1e7:3").as_deref(), Some("/M/s"));
        assert_eq!(unit("koff=list:1").as_deref(), Some("/s"));
        assert_eq!(unit("H=list:1").as_deref(), Some("nM"));
        assert_eq!(unit("E=list:1").as_deref(), Some("molecules"));
        assert_eq!(
            unit("C=list:1").as_deref(),
            Some("molecules"),
            "a bare amount"
        );
        assert_eq!(unit("volume=list:1 fL").as_deref(), Some("pL"));
        let bare =
            parser::parse("b.crn", b"param k = 3\nspecies A = 1\nstep d A -> 0 @ k\n").unwrap();
        let v = Vary::parse("k=list:1", &bare).unwrap();
        assert_eq!(v.file_unit, None, "a bare param has no unit to show");
    }

    #[test]
    fn units_follow_the_network_language() {
        let v = vary("H=lin:10 nM..1 uM:3").unwrap();
        assert_eq!(v.unit_text(), Some("nM"));
        let g = v.grid_values().unwrap();
        assert_eq!(g[0], 10.0);
        assert!((g[2] - 1000.0).abs() < 1e-9);
        match v.override_for(10.0) {
            Override::Quantity(q) => {
                assert!((q.value - 1e-8).abs() < 1e-20);
                assert_eq!(q.dim, Dim::CONC);
            }
            o => panic!("{o:?}"),
        }
        let k = vary("kon=list:1e6 M^-1 s^-1, 2e6 /M/s").unwrap();
        assert_eq!(k.list, vec![1e6, 2e6]);
        assert_eq!(k.unit.unwrap().dim, Dim::mass_action_molar(2));
    }

    #[test]
    fn counted_species_round_to_whole_molecules() {
        let v = vary("E=lin:0..10:4").unwrap();
        assert_eq!(v.grid_values().unwrap(), vec![0.0, 3.0, 7.0, 10.0]);
        assert!(vary("E=list:1 nM").is_err());
        let m = vary("E=list:5 molecules").unwrap();
        assert_eq!(m.override_for(5.0), Override::Bare(5.0));
    }

    #[test]
    fn bad_specs_say_what_is_wrong() {
        let e = |s: &str| vary(s).unwrap_err().to_string();
        assert!(e("nope=lin:1..2:3").contains("is not a param, a species"));
        assert!(e("kon=log:0..1:3").contains("positive"));
        assert!(e("kon=lin:1..2:1").contains("at least 2"));
        assert!(e("kon=lin:1 nM..2:3").contains("a unit on every value"));
        assert!(e("kon=lin:1 nM..2 s:3").contains("one kind of value"));
        assert!(e("kon=lin:1 parsec..2:3").contains("unknown unit `parsec`"));
        assert!(e("kon=cube:1..2").contains("unknown kind"));
        assert!(e("kon").contains("NAME=SPEC"));
        assert!(e("kon=lin:1..2:x").contains("not a number of values"));
        assert!(vary("kon=lin:1..2").unwrap().grid_values().is_err());
    }

    #[test]
    fn volume_needs_a_volume() {
        assert_eq!(
            vary("volume=list:1 pL,2 pL").unwrap().target,
            Target::Volume
        );
        let none = parser::parse("n.crn", b"species A = 3\nstep d A -> 0 @ 1\n").unwrap();
        let e = Vary::parse("volume=list:1 pL", &none).unwrap_err();
        assert!(e.to_string().contains("sets no volume"));
    }
}
