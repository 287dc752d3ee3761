//! The typed [`Document`] → SBML Level 3 Version 2 text.
//!
//! Writes every component the document model holds, in the order the specification gives
//! (Hucka et al. 2019, §4.2): function definitions, unit definitions, compartments, species,
//! parameters, initial assignments, rules, constraints, reactions, events; each element's
//! `notes` (XHTML paragraphs) and, on reactions, copyloop's reading as an annotation in its own
//! namespace. Formulas are MathML content markup; numbers are written with the shortest digits
//! that read back as the same double, and a number's unit as `sbml:units`. The reader
//! (`read.rs`) reads all of it back.

use super::math::{Math, MathKind, Op, SBML_L3_NS_PREFIX};
use super::model::*;
use super::xml::MATHML_NS;
use std::fmt::Write as _;

/// The SBML Level 3 Version 2 core namespace.
pub const L3V2_NS: &str = "http://www.sbml.org/sbml/level3/version2/core";

const XHTML_NS: &str = "http://www.w3.org/1999/xhtml";

const TIME_URL: &str = "http://www.sbml.org/sbml/symbols/time";
const AVOGADRO_URL: &str = "http://www.sbml.org/sbml/symbols/avogadro";
const DELAY_URL: &str = "http://www.sbml.org/sbml/symbols/delay";
const RATE_OF_URL: &str = "http://www.sbml.org/sbml/symbols/rateOf";

/// A double written so that it reads back as the same double (Rust's shortest round-trip
/// digits), in exponent form outside [1e-4, 1e15).
pub fn exact(x: f64) -> String {
    if x == 0.0 || (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// `text` with the five XML special characters escaped.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
    out
}

/// An element being written: its name and attributes.
struct Tag {
    name: &'static str,
    attrs: Vec<(&'static str, String)>,
}

fn tag(name: &'static str) -> Tag {
    Tag {
        name,
        attrs: Vec::new(),
    }
}

impl Tag {
    fn attr(mut self, k: &'static str, v: impl Into<String>) -> Tag {
        self.attrs.push((k, v.into()));
        self
    }

    fn opt(self, k: &'static str, v: Option<&str>) -> Tag {
        match v {
            Some(v) => self.attr(k, v),
            None => self,
        }
    }

    fn flag(self, k: &'static str, v: bool) -> Tag {
        self.attr(k, if v { "true" } else { "false" })
    }

    fn open(&self) -> String {
        let mut s = format!("<{}", self.name);
        for (k, v) in &self.attrs {
            write!(s, " {k}=\"{}\"", escape(v)).unwrap();
        }
        s
    }
}

struct Writer {
    out: String,
    depth: usize,
}

impl Writer {
    fn line(&mut self, text: &str) {
        for _ in 0..self.depth {
            self.out.push_str("  ");
        }
        self.out.push_str(text);
        self.out.push('\n');
    }

    /// An element with no children.
    fn empty(&mut self, t: Tag) {
        self.line(&format!("{}/>", t.open()));
    }

    /// An element whose children `body` writes.
    fn element(&mut self, t: Tag, body: impl FnOnce(&mut Writer)) {
        self.line(&format!("{}>", t.open()));
        self.depth += 1;
        body(self);
        self.depth -= 1;
        self.line(&format!("</{}>", t.name));
    }

    /// An element with `notes`, an optional annotation and children.
    fn sbase(
        &mut self,
        t: Tag,
        notes: Option<&str>,
        annotation: Option<&dyn Fn(&mut Writer)>,
        body: impl FnOnce(&mut Writer),
        has_children: bool,
    ) {
        if notes.is_none() && annotation.is_none() && !has_children {
            return self.empty(t);
        }
        self.element(t, |w| {
            if let Some(n) = notes {
                w.notes(n);
            }
            if let Some(a) = annotation {
                w.element(tag("annotation"), |w| a(w));
            }
            body(w);
        });
    }

    /// One XHTML paragraph per line of `text`.
    fn notes(&mut self, text: &str) {
        self.element(tag("notes"), |w| {
            w.element(tag("body").attr("xmlns", XHTML_NS), |w| {
                for p in text.lines().filter(|l| !l.trim().is_empty()) {
                    w.line(&format!("<p>{}</p>", escape(p.trim())));
                }
            });
        });
    }

    fn list<T>(&mut self, name: &'static str, items: &[T], each: impl Fn(&mut Writer, &T)) {
        if items.is_empty() {
            return;
        }
        self.element(tag(name), |w| {
            for x in items {
                each(w, x);
            }
        });
    }

    fn math(&mut self, m: &Math) {
        let mut t = tag("math").attr("xmlns", MATHML_NS);
        if uses_units(m) {
            t = t.attr("xmlns:sbml", L3V2_NS);
        }
        self.element(t, |w| w.expr(m));
    }

    fn lambda(&mut self, params: &[String], body: &Math) {
        let mut t = tag("math").attr("xmlns", MATHML_NS);
        if uses_units(body) {
            t = t.attr("xmlns:sbml", L3V2_NS);
        }
        self.element(t, |w| {
            w.element(tag("lambda"), |w| {
                for p in params {
                    w.element(tag("bvar"), |w| {
                        w.line(&format!("<ci> {} </ci>", escape(p)))
                    });
                }
                w.expr(body);
            });
        });
    }

    fn expr(&mut self, m: &Math) {
        match &m.kind {
            MathKind::Number(v) => {
                let units = m
                    .units
                    .as_deref()
                    .map(|u| format!(" sbml:units=\"{}\"", escape(u)))
                    .unwrap_or_default();
                if v.is_nan() {
                    self.line("<notanumber/>");
                } else if v.is_infinite() && *v > 0.0 {
                    self.line("<infinity/>");
                } else if v.is_infinite() {
                    self.element(tag("apply"), |w| {
                        w.line("<minus/>");
                        w.line("<infinity/>");
                    });
                } else {
                    self.line(&format!("<cn{units}> {} </cn>", exact(*v)));
                }
            }
            MathKind::Boolean(b) => self.line(if *b { "<true/>" } else { "<false/>" }),
            MathKind::Ident(id) => self.line(&format!("<ci> {} </ci>", escape(id))),
            MathKind::Time => self.line(&format!(
                "<csymbol encoding=\"text\" definitionURL=\"{TIME_URL}\"> time </csymbol>"
            )),
            MathKind::Avogadro => self.line(&format!(
                "<csymbol encoding=\"text\" definitionURL=\"{AVOGADRO_URL}\"> avogadro </csymbol>"
            )),
            MathKind::Apply(op, args) => self.element(tag("apply"), |w| {
                w.line(&format!("<{}/>", op.name()));
                match (op, args.as_slice()) {
                    (Op::Root, [degree, x]) => {
                        w.element(tag("degree"), |w| w.expr(degree));
                        w.expr(x);
                    }
                    (Op::Log, [base, x]) => {
                        w.element(tag("logbase"), |w| w.expr(base));
                        w.expr(x);
                    }
                    _ => args.iter().for_each(|a| w.expr(a)),
                }
            }),
            MathKind::Call(f, args) => self.element(tag("apply"), |w| {
                w.line(&format!("<ci> {} </ci>", escape(f)));
                args.iter().for_each(|a| w.expr(a));
            }),
            MathKind::Piecewise { pieces, otherwise } => self.element(tag("piecewise"), |w| {
                for (v, c) in pieces {
                    w.element(tag("piece"), |w| {
                        w.expr(v);
                        w.expr(c);
                    });
                }
                if let Some(o) = otherwise {
                    w.element(tag("otherwise"), |w| w.expr(o));
                }
            }),
            MathKind::Delay(x, d) => self.element(tag("apply"), |w| {
                w.line(&format!(
                    "<csymbol encoding=\"text\" definitionURL=\"{DELAY_URL}\"> delay </csymbol>"
                ));
                w.expr(x);
                w.expr(d);
            }),
            MathKind::RateOf(x) => self.element(tag("apply"), |w| {
                w.line(&format!(
                    "<csymbol encoding=\"text\" definitionURL=\"{RATE_OF_URL}\"> rateOf </csymbol>"
                ));
                w.expr(x);
            }),
        }
    }

    fn reading(&mut self, r: &Reading) {
        let constant = match &r.constant {
            ReadingConstant::Parameter(id) => id.clone(),
            ReadingConstant::Value(v) => exact(*v),
        };
        self.empty(
            tag("copyloop:massAction")
                .attr("xmlns:copyloop", COPYLOOP_NS)
                .attr("constant", constant)
                .attr("reading", r.kind.name())
                .opt("propensity", r.propensity.as_deref()),
        );
    }
}

fn uses_units(m: &Math) -> bool {
    let mut found = false;
    m.visit(&mut |n| found |= n.units.is_some());
    found
}

fn num(v: f64) -> String {
    exact(v)
}

fn parameter(w: &mut Writer, p: &Parameter, local: bool) {
    let t = tag(if local { "localParameter" } else { "parameter" })
        .attr("id", &p.id)
        .opt("name", p.name.as_deref())
        .opt("value", p.value.map(num).as_deref())
        .opt("units", p.units.as_deref());
    let t = if local {
        t
    } else {
        t.flag("constant", p.constant)
    };
    w.sbase(t, p.notes.as_deref(), None, |_| {}, false);
}

fn species_reference(w: &mut Writer, s: &SpeciesReference) {
    w.empty(
        tag("speciesReference")
            .opt("id", s.id.as_deref())
            .attr("species", &s.species)
            .opt("stoichiometry", s.stoichiometry.map(num).as_deref())
            .flag("constant", s.constant),
    );
}

fn reaction(w: &mut Writer, r: &Reaction) {
    let t = tag("reaction")
        .attr("id", &r.id)
        .opt("name", r.name.as_deref())
        .flag("reversible", r.reversible)
        .opt("compartment", r.compartment.as_deref());
    let annotate = |w: &mut Writer| {
        if let Some(x) = &r.reading {
            w.reading(x);
        }
        if r.keeps_law {
            w.empty(tag("copyloop:law").attr("xmlns:copyloop", COPYLOOP_NS));
        }
    };
    let annotation: Option<&dyn Fn(&mut Writer)> =
        (r.reading.is_some() || r.keeps_law).then_some(&annotate as _);
    w.sbase(
        t,
        r.notes.as_deref(),
        annotation,
        |w| {
            w.list("listOfReactants", &r.reactants, species_reference);
            w.list("listOfProducts", &r.products, species_reference);
            w.list("listOfModifiers", &r.modifiers, |w, m| {
                w.empty(tag("modifierSpeciesReference").attr("species", &m.species))
            });
            if let Some(k) = &r.kinetic_law {
                w.element(tag("kineticLaw"), |w| {
                    if let Some(m) = &k.math {
                        w.math(m);
                    }
                    w.list("listOfLocalParameters", &k.local_parameters, |w, p| {
                        parameter(w, p, true)
                    });
                });
            }
        },
        true,
    );
}

fn event(w: &mut Writer, e: &Event) {
    let t = tag("event")
        .opt("id", e.id.as_deref())
        .flag("useValuesFromTriggerTime", e.use_values_from_trigger_time);
    w.element(t, |w| {
        if let Some(tr) = &e.trigger {
            let t = tag("trigger")
                .flag("initialValue", tr.initial_value)
                .flag("persistent", tr.persistent);
            w.element(t, |w| {
                if let Some(m) = &tr.math {
                    w.math(m);
                }
            });
        }
        if let Some(p) = &e.priority {
            w.element(tag("priority"), |w| w.math(p));
        }
        if let Some(d) = &e.delay {
            w.element(tag("delay"), |w| w.math(d));
        }
        w.list("listOfEventAssignments", &e.assignments, |w, a| {
            w.element(tag("eventAssignment").attr("variable", &a.variable), |w| {
                if let Some(m) = &a.math {
                    w.math(m);
                }
            })
        });
    });
}

/// The document as SBML Level 3 Version 2 text (its level and version fields are not read:
/// the output is always Level 3 Version 2).
pub fn sbml(doc: &Document) -> String {
    let m = &doc.model;
    let mut w = Writer {
        out: String::from("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"),
        depth: 0,
    };
    debug_assert!(L3V2_NS.starts_with(SBML_L3_NS_PREFIX));
    let root = tag("sbml")
        .attr("xmlns", L3V2_NS)
        .attr("level", "3")
        .attr("version", "2");
    w.element(root, |w| {
        let t = tag("model")
            .opt("id", m.id.as_deref())
            .opt("name", m.name.as_deref())
            .opt("substanceUnits", m.substance_units.as_deref())
            .opt("timeUnits", m.time_units.as_deref())
            .opt("volumeUnits", m.volume_units.as_deref())
            .opt("areaUnits", m.area_units.as_deref())
            .opt("lengthUnits", m.length_units.as_deref())
            .opt("extentUnits", m.extent_units.as_deref())
            .opt("conversionFactor", m.conversion_factor.as_deref());
        w.sbase(
            t,
            m.notes.as_deref(),
            None,
            |w| {
                w.list(
                    "listOfFunctionDefinitions",
                    &m.function_definitions,
                    |w, f| {
                        w.element(tag("functionDefinition").attr("id", &f.id), |w| {
                            if let Some(b) = &f.body {
                                w.lambda(&f.params, b);
                            }
                        })
                    },
                );
                w.list("listOfUnitDefinitions", &m.unit_definitions, |w, d| {
                    w.element(tag("unitDefinition").attr("id", &d.id), |w| {
                        w.list("listOfUnits", &d.units, |w, u| {
                            w.empty(
                                tag("unit")
                                    .attr("kind", &u.kind)
                                    .attr("exponent", num(u.exponent))
                                    .attr("scale", u.scale.to_string())
                                    .attr("multiplier", num(u.multiplier)),
                            )
                        })
                    })
                });
                w.list("listOfCompartments", &m.compartments, |w, c| {
                    let t = tag("compartment")
                        .attr("id", &c.id)
                        .opt("name", c.name.as_deref())
                        .opt(
                            "spatialDimensions",
                            c.spatial_dimensions.map(num).as_deref(),
                        )
                        .opt("size", c.size.map(num).as_deref())
                        .opt("units", c.units.as_deref())
                        .flag("constant", c.constant);
                    w.sbase(t, c.notes.as_deref(), None, |_| {}, false);
                });
                w.list("listOfSpecies", &m.species, |w, s| {
                    let mut t = tag("species")
                        .attr("id", &s.id)
                        .opt("name", s.name.as_deref())
                        .attr("compartment", &s.compartment);
                    t = match s.initial {
                        Some(Initial::Amount(a)) => t.attr("initialAmount", num(a)),
                        Some(Initial::Concentration(c)) => t.attr("initialConcentration", num(c)),
                        None => t,
                    };
                    let t = t
                        .opt("substanceUnits", s.substance_units.as_deref())
                        .flag("hasOnlySubstanceUnits", s.has_only_substance_units)
                        .flag("boundaryCondition", s.boundary_condition)
                        .flag("constant", s.constant)
                        .opt("conversionFactor", s.conversion_factor.as_deref());
                    w.sbase(t, s.notes.as_deref(), None, |_| {}, false);
                });
                w.list("listOfParameters", &m.parameters, |w, p| {
                    parameter(w, p, false)
                });
                w.list(
                    "listOfInitialAssignments",
                    &m.initial_assignments,
                    |w, a| {
                        w.element(tag("initialAssignment").attr("symbol", &a.symbol), |w| {
                            if let Some(x) = &a.math {
                                w.math(x);
                            }
                        })
                    },
                );
                w.list("listOfRules", &m.rules, |w, r| {
                    let name = match r.kind {
                        RuleKind::Assignment => "assignmentRule",
                        RuleKind::Rate => "rateRule",
                        RuleKind::Algebraic => "algebraicRule",
                    };
                    w.element(tag(name).opt("variable", r.variable.as_deref()), |w| {
                        if let Some(x) = &r.math {
                            w.math(x);
                        }
                    })
                });
                w.list("listOfConstraints", &m.constraints, |w, c| {
                    w.element(tag("constraint"), |w| {
                        if let Some(x) = &c.math {
                            w.math(x);
                        }
                    })
                });
                w.list("listOfReactions", &m.reactions, reaction);
                w.list("listOfEvents", &m.events, event);
            },
            true,
        );
    });
    w.out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_back_exactly() {
        for x in [
            0.0,
            1e-12,
            3.3210781343476934e-06,
            0.05,
            2e6,
            6.02214076e23,
            std::f64::consts::LN_2 / 40.0,
            1.0 / 3.0,
            -2.5e-300,
            123456789012345.0,
        ] {
            let s = exact(x);
            assert_eq!(s.parse::<f64>().unwrap().to_bits(), x.to_bits(), "{s}");
        }
        assert_eq!(exact(1e-12), "1e-12");
        assert_eq!(exact(0.05), "0.05");
    }

    #[test]
    fn text_is_escaped() {
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
