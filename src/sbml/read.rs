//! XML tree → the typed [`Document`], with each level's defaults applied.
//!
//! Levels and versions: Level 2 Versions 1–5 and Level 3 Versions 1–2 core. Where Level 3
//! requires an attribute (`constant`, `hasOnlySubstanceUnits`, `boundaryCondition`,
//! `reversible`, a species reference's `constant`, an event's `useValuesFromTriggerTime`, a
//! trigger's `persistent` and `initialValue`, a unit's four attributes), its absence is an error;
//! Level 2 supplies its defaults (compartment `spatialDimensions` 3, `size` 1 for a compartment
//! with dimensions, `constant` true; species `hasOnlySubstanceUnits`, `boundaryCondition` and
//! `constant` false; parameter `constant` true; reaction `reversible` true, `fast` false;
//! stoichiometry 1; `useValuesFromTriggerTime` true; Level 2 triggers are persistent and count
//! as true before t = 0).
//!
//! Elements of a declared Level 3 package are skipped here (the validator decides whether the
//! package can be ignored); `notes` and `annotation` are skipped everywhere; any other element
//! outside the SBML namespace of the file, or out of place, is an error.

use super::error::{ErrorKind, Loc, SbmlError};
use super::math::{self, is_sid, parse_double, Math};
use super::model::*;
use super::xml::{self, Node, Xml, MATHML_NS};

const L3_PREFIX: &str = "http://www.sbml.org/sbml/level3/";

/// The SBML namespace of a level and version.
pub fn namespace(level: u32, version: u32) -> Option<&'static str> {
    Some(match (level, version) {
        (2, 1) => "http://www.sbml.org/sbml/level2",
        (2, 2) => "http://www.sbml.org/sbml/level2/version2",
        (2, 3) => "http://www.sbml.org/sbml/level2/version3",
        (2, 4) => "http://www.sbml.org/sbml/level2/version4",
        (2, 5) => "http://www.sbml.org/sbml/level2/version5",
        (3, 1) => "http://www.sbml.org/sbml/level3/version1/core",
        (3, 2) => "http://www.sbml.org/sbml/level3/version2/core",
        _ => return None,
    })
}

/// Reads the document from a parsed XML tree.
pub fn document(xml: &Xml) -> Result<Document, SbmlError> {
    let root = xml.doc.root_element();
    let loc = xml.loc(root);
    let ns_err = |message: String| {
        SbmlError::new(ErrorKind::Namespace { message }, xml::name(root), None, loc)
    };
    if xml::name(root) != "sbml" {
        return Err(ns_err(format!(
            "the root element is <{}>, not <sbml>: this is not an SBML file",
            xml::name(root)
        )));
    }
    let uri = xml::ns(root);
    if uri.starts_with("http://www.sbml.org/sbml/level1") {
        return Err(SbmlError::new(
            ErrorKind::Unsupported {
                construct: super::error::Construct::Level1,
            },
            "sbml",
            None,
            loc,
        ));
    }
    let (level, version) = (2..=3)
        .flat_map(|l| (1..=5).map(move |v| (l, v)))
        .find(|&(l, v)| namespace(l, v) == Some(uri))
        .ok_or_else(|| {
            ns_err(if uri.is_empty() {
                "the <sbml> element has no namespace; SBML needs xmlns=\"http://www.sbml.org/sbml/level3/version2/core\" or the namespace of its level".into()
            } else {
                format!("unknown SBML namespace \"{uri}\"; copyloop reads Level 2 Versions 1-5 and Level 3 Versions 1-2")
            })
        })?;
    for (attr, want) in [("level", level), ("version", version)] {
        let got = xml::attr(root, attr);
        if got.map(str::trim) != Some(want.to_string().as_str()) {
            return Err(ns_err(format!(
                "the namespace is that of Level {level} Version {version}, but {attr}=\"{}\"",
                got.unwrap_or("")
            )));
        }
    }
    let packages = packages(root);
    if let Some(e) = super::validate::refused_package(&packages, loc) {
        return Err(e);
    }
    let r = Reader {
        xml,
        level,
        version,
        ns: uri,
    };
    let mut model = None;
    for c in r.children(root, None)? {
        match xml::name(c) {
            "model" if model.is_none() => model = Some(r.model(c)?),
            other => return Err(r.unexpected(c, other, root, None)),
        }
    }
    let model = model.ok_or_else(|| {
        SbmlError::new(
            ErrorKind::MissingElement {
                element: "model".into(),
            },
            "sbml",
            None,
            loc,
        )
    })?;
    Ok(Document {
        level,
        version,
        packages,
        model,
        loc,
    })
}

/// Level 3 packages declared on the root: every SBML namespace other than core.
fn packages(root: Node) -> Vec<Package> {
    let mut out: Vec<Package> = Vec::new();
    for ns in root.namespaces() {
        let uri = ns.uri();
        let Some(rest) = uri.strip_prefix(L3_PREFIX) else {
            continue;
        };
        let mut parts = rest.split('/');
        let (_lv, Some(name)) = (parts.next(), parts.next()) else {
            continue;
        };
        if name == "core" || out.iter().any(|p| p.uri == uri) {
            continue;
        }
        let required = root
            .attributes()
            .find(|a| a.name() == "required" && a.namespace() == Some(uri))
            .map(|a| a.value().trim() == "true");
        out.push(Package {
            name: name.to_string(),
            uri: uri.to_string(),
            required,
        });
    }
    out
}

struct Reader<'x, 'a> {
    xml: &'x Xml<'a>,
    level: u32,
    version: u32,
    ns: &'a str,
}

impl<'a> Reader<'_, 'a> {
    fn l3(&self) -> bool {
        self.level == 3
    }

    fn loc(&self, n: Node) -> Loc {
        self.xml.loc(n)
    }

    fn err(&self, n: Node, kind: ErrorKind, id: Option<&str>) -> SbmlError {
        SbmlError::new(kind, xml::name(n), id, self.loc(n))
    }

    fn unexpected(&self, c: Node, name: &str, parent: Node, id: Option<&str>) -> SbmlError {
        SbmlError::new(
            ErrorKind::UnexpectedElement {
                element: name.to_string(),
            },
            xml::name(parent),
            id,
            self.loc(c),
        )
    }

    /// Element children in the file's SBML namespace, without `notes` and `annotation`.
    /// Elements of a Level 3 package are skipped; any other namespace is an error.
    fn children<'i>(
        &self,
        node: Node<'a, 'i>,
        id: Option<&str>,
    ) -> Result<Vec<Node<'a, 'i>>, SbmlError> {
        let mut out = Vec::new();
        for c in xml::elements(node) {
            let ns = xml::ns(c);
            if ns == self.ns {
                if !matches!(xml::name(c), "notes" | "annotation") {
                    out.push(c);
                }
            } else if !(self.l3() && ns.starts_with(L3_PREFIX)) {
                return Err(self.err(
                    c,
                    ErrorKind::Namespace {
                        message: format!(
                            "element in namespace \"{ns}\" inside <{}>, expected the file's SBML namespace {}",
                            xml::name(node),
                            self.ns
                        ),
                    },
                    id,
                ));
            }
        }
        Ok(out)
    }

    /// Checks that `n` has no SBML children (only notes, annotation or package elements).
    fn leaf(&self, n: Node, id: Option<&str>) -> Result<(), SbmlError> {
        match self.children(n, id)?.first() {
            Some(c) => Err(self.unexpected(*c, xml::name(*c), n, id)),
            None => Ok(()),
        }
    }

    /// The items of a `listOf…` element, each checked to be named `item`.
    fn list<'i>(&self, list: Node<'a, 'i>, item: &[&str]) -> Result<Vec<Node<'a, 'i>>, SbmlError> {
        let items = self.children(list, None)?;
        for c in &items {
            if !item.contains(&xml::name(*c)) {
                return Err(self.unexpected(*c, xml::name(*c), list, None));
            }
        }
        Ok(items)
    }

    fn str_attr(&self, n: Node<'a, '_>, name: &str) -> Option<String> {
        xml::attr(n, name).map(|s| s.trim().to_string())
    }

    fn sid_attr(&self, n: Node, name: &str, id: Option<&str>) -> Result<Option<String>, SbmlError> {
        match xml::attr(n, name).map(str::trim) {
            None => Ok(None),
            Some(v) if is_sid(v) => Ok(Some(v.to_string())),
            Some(v) => Err(self.bad(
                n,
                name,
                v,
                "an SBML identifier (a letter or _, then letters, digits or _)",
                id,
            )),
        }
    }

    fn required_sid(&self, n: Node, name: &str, id: Option<&str>) -> Result<String, SbmlError> {
        self.sid_attr(n, name, id)?
            .ok_or_else(|| self.missing(n, name, id))
    }

    fn missing(&self, n: Node, name: &str, id: Option<&str>) -> SbmlError {
        self.err(
            n,
            ErrorKind::MissingAttribute {
                attribute: name.to_string(),
            },
            id,
        )
    }

    fn bad(&self, n: Node, name: &str, value: &str, expected: &str, id: Option<&str>) -> SbmlError {
        self.err(
            n,
            ErrorKind::BadAttribute {
                attribute: name.to_string(),
                value: value.to_string(),
                expected: expected.to_string(),
            },
            id,
        )
    }

    fn f64_attr(&self, n: Node, name: &str, id: Option<&str>) -> Result<Option<f64>, SbmlError> {
        match xml::attr(n, name) {
            None => Ok(None),
            Some(v) => parse_double(v)
                .map(Some)
                .ok_or_else(|| self.bad(n, name, v, "a number", id)),
        }
    }

    fn bool_attr(&self, n: Node, name: &str, id: Option<&str>) -> Result<Option<bool>, SbmlError> {
        match xml::attr(n, name).map(str::trim) {
            None => Ok(None),
            Some("true" | "1") => Ok(Some(true)),
            Some("false" | "0") => Ok(Some(false)),
            Some(v) => Err(self.bad(n, name, v, "true or false", id)),
        }
    }

    /// A boolean that Level 3 requires and Level 2 defaults to `l2_default`.
    fn flag(
        &self,
        n: Node,
        name: &str,
        id: Option<&str>,
        l2_default: bool,
    ) -> Result<bool, SbmlError> {
        match self.bool_attr(n, name, id)? {
            Some(v) => Ok(v),
            None if self.l3() => Err(self.missing(n, name, id)),
            None => Ok(l2_default),
        }
    }

    /// The formula in the `<math>` child of `n`, if there is one.
    fn math(&self, n: Node, id: Option<&str>) -> Result<Option<Math>, SbmlError> {
        match self.math_node(n, id)? {
            Some(m) => math::read(self.xml, m, id),
            None => Ok(None),
        }
    }

    fn math_node<'i>(
        &self,
        n: Node<'a, 'i>,
        id: Option<&str>,
    ) -> Result<Option<Node<'a, 'i>>, SbmlError> {
        let mut found = None;
        for c in xml::elements(n) {
            if xml::name(c) == "math" {
                if xml::ns(c) != MATHML_NS {
                    return Err(self.err(
                        c,
                        ErrorKind::Namespace {
                            message: format!(
                                "<math> must be in the MathML namespace {MATHML_NS}, found \"{}\"",
                                xml::ns(c)
                            ),
                        },
                        id,
                    ));
                }
                if found.is_some() {
                    return Err(self.unexpected(c, "math", n, id));
                }
                found = Some(c);
            }
        }
        Ok(found)
    }

    /// Children of `n` other than its `<math>` (which `children` would reject as foreign).
    fn non_math_children<'i>(
        &self,
        n: Node<'a, 'i>,
        id: Option<&str>,
    ) -> Result<Vec<Node<'a, 'i>>, SbmlError> {
        let mut out = Vec::new();
        for c in xml::elements(n) {
            if xml::name(c) == "math" && xml::ns(c) == MATHML_NS {
                continue;
            }
            let ns = xml::ns(c);
            if ns == self.ns {
                if !matches!(xml::name(c), "notes" | "annotation") {
                    out.push(c);
                }
            } else if !(self.l3() && ns.starts_with(L3_PREFIX)) {
                return Err(self.err(
                    c,
                    ErrorKind::Namespace {
                        message: format!(
                            "element in namespace \"{ns}\" inside <{}>, expected {} or MathML",
                            xml::name(n),
                            self.ns
                        ),
                    },
                    id,
                ));
            }
        }
        Ok(out)
    }

    fn model(&self, n: Node) -> Result<Model, SbmlError> {
        let id = self.sid_attr(n, "id", None)?;
        let idr = id.as_deref();
        let mut m = Model {
            id: id.clone(),
            name: self.str_attr(n, "name"),
            loc: self.loc(n),
            ..Model::default()
        };
        if self.l3() {
            m.substance_units = self.str_attr(n, "substanceUnits");
            m.time_units = self.str_attr(n, "timeUnits");
            m.volume_units = self.str_attr(n, "volumeUnits");
            m.area_units = self.str_attr(n, "areaUnits");
            m.length_units = self.str_attr(n, "lengthUnits");
            m.extent_units = self.str_attr(n, "extentUnits");
            m.conversion_factor = self.sid_attr(n, "conversionFactor", idr)?;
        }
        let mut seen: Vec<&str> = Vec::new();
        for c in self.children(n, idr)? {
            let name = xml::name(c);
            if seen.contains(&name) {
                return Err(self.unexpected(c, name, n, idr));
            }
            seen.push(name);
            match name {
                "listOfFunctionDefinitions" => {
                    for f in self.list(c, &["functionDefinition"])? {
                        m.function_definitions.push(self.function_definition(f)?);
                    }
                }
                "listOfUnitDefinitions" => {
                    for u in self.list(c, &["unitDefinition"])? {
                        m.unit_definitions.push(self.unit_definition(u)?);
                    }
                }
                // Level 2 types carry no mathematics.
                "listOfCompartmentTypes" | "listOfSpeciesTypes" if !self.l3() => {}
                "listOfCompartments" => {
                    for x in self.list(c, &["compartment"])? {
                        m.compartments.push(self.compartment(x)?);
                    }
                }
                "listOfSpecies" => {
                    for x in self.list(c, &["species"])? {
                        m.species.push(self.species(x)?);
                    }
                }
                "listOfParameters" => {
                    for x in self.list(c, &["parameter"])? {
                        m.parameters.push(self.parameter(x, true)?);
                    }
                }
                "listOfInitialAssignments" => {
                    for x in self.list(c, &["initialAssignment"])? {
                        let symbol = self.required_sid(x, "symbol", None)?;
                        let math = self.math(x, Some(&symbol))?;
                        self.non_math_children(x, Some(&symbol))?;
                        m.initial_assignments.push(InitialAssignment {
                            symbol,
                            math,
                            loc: self.loc(x),
                        });
                    }
                }
                "listOfRules" => {
                    for x in self.list(c, &["algebraicRule", "assignmentRule", "rateRule"])? {
                        m.rules.push(self.rule(x)?);
                    }
                }
                "listOfConstraints" => {
                    for x in self.list(c, &["constraint"])? {
                        m.constraints.push(Constraint {
                            math: self.math(x, None)?,
                            loc: self.loc(x),
                        });
                    }
                }
                "listOfReactions" => {
                    for x in self.list(c, &["reaction"])? {
                        m.reactions.push(self.reaction(x)?);
                    }
                }
                "listOfEvents" => {
                    for x in self.list(c, &["event"])? {
                        m.events.push(self.event(x)?);
                    }
                }
                other => return Err(self.unexpected(c, other, n, idr)),
            }
        }
        Ok(m)
    }

    fn function_definition(&self, n: Node) -> Result<FunctionDefinition, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        self.non_math_children(n, Some(&id))?;
        let (params, body) = match self.math_node(n, Some(&id))? {
            Some(m) => math::read_lambda(self.xml, m, Some(&id))?.unwrap_or_default(),
            None => (Vec::new(), None),
        };
        Ok(FunctionDefinition {
            id,
            params,
            body,
            loc: self.loc(n),
        })
    }

    fn unit_definition(&self, n: Node) -> Result<UnitDefinition, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        let mut units = Vec::new();
        for c in self.children(n, Some(&id))? {
            if xml::name(c) != "listOfUnits" {
                return Err(self.unexpected(c, xml::name(c), n, Some(&id)));
            }
            for u in self.list(c, &["unit"])? {
                let kind = self
                    .str_attr(u, "kind")
                    .ok_or_else(|| self.missing(u, "kind", Some(&id)))?;
                let num = |name: &str, default: f64| -> Result<f64, SbmlError> {
                    match self.f64_attr(u, name, Some(&id))? {
                        Some(v) => Ok(v),
                        None if self.l3() => Err(self.missing(u, name, Some(&id))),
                        None => Ok(default),
                    }
                };
                let exponent = num("exponent", 1.0)?;
                let scale = num("scale", 0.0)?;
                let multiplier = num("multiplier", 1.0)?;
                if scale.fract() != 0.0 {
                    return Err(self.bad(u, "scale", &scale.to_string(), "an integer", Some(&id)));
                }
                if self.f64_attr(u, "offset", Some(&id))?.unwrap_or(0.0) != 0.0 {
                    return Err(self.err(
                        u,
                        ErrorKind::NotYet {
                            message: "units with an offset (Level 2 Version 1 Celsius-style units)"
                                .into(),
                        },
                        Some(&id),
                    ));
                }
                units.push(Unit {
                    kind,
                    exponent,
                    scale: scale as i32,
                    multiplier,
                });
            }
        }
        Ok(UnitDefinition {
            id,
            units,
            loc: self.loc(n),
        })
    }

    fn compartment(&self, n: Node) -> Result<Compartment, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        let idr = Some(id.as_str());
        self.leaf(n, idr)?;
        let dims = match self.f64_attr(n, "spatialDimensions", idr)? {
            Some(d) => Some(d),
            None if self.l3() => None,
            None => Some(3.0),
        };
        let mut size = self.f64_attr(n, "size", idr)?;
        if !self.l3() {
            if size.is_none() {
                size = self.f64_attr(n, "volume", idr)?;
            }
            if size.is_none() && dims != Some(0.0) {
                size = Some(1.0);
            }
        }
        Ok(Compartment {
            name: self.str_attr(n, "name"),
            spatial_dimensions: dims,
            size,
            units: self.str_attr(n, "units"),
            constant: self.flag(n, "constant", idr, true)?,
            loc: self.loc(n),
            id,
        })
    }

    fn species(&self, n: Node) -> Result<Species, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        let idr = Some(id.as_str());
        self.leaf(n, idr)?;
        let amount = self.f64_attr(n, "initialAmount", idr)?;
        let conc = self.f64_attr(n, "initialConcentration", idr)?;
        let initial =
            match (amount, conc) {
                (Some(_), Some(_)) => return Err(self.err(
                    n,
                    ErrorKind::Invalid {
                        message:
                            "both initialAmount and initialConcentration are set; SBML allows one"
                                .into(),
                    },
                    idr,
                )),
                (Some(a), None) => Some(Initial::Amount(a)),
                (None, Some(c)) => Some(Initial::Concentration(c)),
                (None, None) => None,
            };
        Ok(Species {
            name: self.str_attr(n, "name"),
            compartment: self.required_sid(n, "compartment", idr)?,
            initial,
            substance_units: self.str_attr(n, "substanceUnits"),
            has_only_substance_units: self.flag(n, "hasOnlySubstanceUnits", idr, false)?,
            boundary_condition: self.flag(n, "boundaryCondition", idr, false)?,
            constant: self.flag(n, "constant", idr, false)?,
            conversion_factor: if self.l3() {
                self.sid_attr(n, "conversionFactor", idr)?
            } else {
                None
            },
            loc: self.loc(n),
            id,
        })
    }

    /// A global parameter, or (`global` false) a kinetic law's local one.
    fn parameter(&self, n: Node, global: bool) -> Result<Parameter, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        let idr = Some(id.as_str());
        self.leaf(n, idr)?;
        let constant = if global {
            self.flag(n, "constant", idr, true)?
        } else {
            // Level 2 local parameters may say constant="true"; they can never vary.
            if self.bool_attr(n, "constant", idr)? == Some(false) {
                return Err(self.bad(
                    n,
                    "constant",
                    "false",
                    "true for a kinetic law's local parameter",
                    idr,
                ));
            }
            true
        };
        Ok(Parameter {
            name: self.str_attr(n, "name"),
            value: self.f64_attr(n, "value", idr)?,
            units: self.str_attr(n, "units"),
            constant,
            loc: self.loc(n),
            id,
        })
    }

    fn rule(&self, n: Node) -> Result<Rule, SbmlError> {
        let kind = match xml::name(n) {
            "algebraicRule" => RuleKind::Algebraic,
            "assignmentRule" => RuleKind::Assignment,
            _ => RuleKind::Rate,
        };
        let variable = match kind {
            RuleKind::Algebraic => None,
            _ => Some(self.required_sid(n, "variable", None)?),
        };
        self.non_math_children(n, variable.as_deref())?;
        Ok(Rule {
            math: self.math(n, variable.as_deref())?,
            kind,
            variable,
            loc: self.loc(n),
        })
    }

    fn reaction(&self, n: Node) -> Result<Reaction, SbmlError> {
        let id = self.required_sid(n, "id", None)?;
        let idr = Some(id.as_str());
        let fast = match self.bool_attr(n, "fast", idr)? {
            Some(v) => v,
            None if self.level == 3 && self.version == 1 => {
                return Err(self.missing(n, "fast", idr))
            }
            None => false,
        };
        let mut r = Reaction {
            name: self.str_attr(n, "name"),
            reversible: self.flag(n, "reversible", idr, true)?,
            fast,
            compartment: if self.l3() {
                self.sid_attr(n, "compartment", idr)?
            } else {
                None
            },
            reactants: Vec::new(),
            products: Vec::new(),
            modifiers: Vec::new(),
            kinetic_law: None,
            loc: self.loc(n),
            id: id.clone(),
        };
        let mut seen: Vec<&str> = Vec::new();
        for c in self.children(n, idr)? {
            let name = xml::name(c);
            if seen.contains(&name) {
                return Err(self.unexpected(c, name, n, idr));
            }
            seen.push(name);
            match name {
                "listOfReactants" => {
                    for s in self.list(c, &["speciesReference"])? {
                        r.reactants.push(self.species_reference(s, &id)?);
                    }
                }
                "listOfProducts" => {
                    for s in self.list(c, &["speciesReference"])? {
                        r.products.push(self.species_reference(s, &id)?);
                    }
                }
                "listOfModifiers" => {
                    for s in self.list(c, &["modifierSpeciesReference"])? {
                        r.modifiers.push(ModifierReference {
                            species: self.required_sid(s, "species", idr)?,
                            loc: self.loc(s),
                        });
                    }
                }
                "kineticLaw" => r.kinetic_law = Some(self.kinetic_law(c, &id)?),
                other => return Err(self.unexpected(c, other, n, idr)),
            }
        }
        Ok(r)
    }

    fn species_reference(&self, n: Node, reaction: &str) -> Result<SpeciesReference, SbmlError> {
        let own = self.sid_attr(n, "id", Some(reaction))?;
        let idr = Some(own.as_deref().unwrap_or(reaction));
        let mut stoichiometry = self.f64_attr(n, "stoichiometry", idr)?;
        let mut stoichiometry_math = None;
        for c in self.children(n, idr)? {
            match xml::name(c) {
                "stoichiometryMath" if !self.l3() => {
                    self.non_math_children(c, idr)?;
                    stoichiometry_math = self.math(c, idr)?;
                }
                other => return Err(self.unexpected(c, other, n, idr)),
            }
        }
        let constant = if self.l3() {
            self.flag(n, "constant", idr, true)?
        } else {
            if stoichiometry.is_none() && stoichiometry_math.is_none() {
                stoichiometry = Some(1.0);
            }
            stoichiometry_math.is_none()
        };
        if !self.l3() && stoichiometry_math.is_some() && stoichiometry.is_some() {
            return Err(self.err(
                n,
                ErrorKind::Invalid {
                    message: "both stoichiometry and stoichiometryMath are set".into(),
                },
                idr,
            ));
        }
        Ok(SpeciesReference {
            species: self.required_sid(n, "species", idr)?,
            id: own,
            stoichiometry,
            stoichiometry_math,
            constant,
            loc: self.loc(n),
        })
    }

    fn kinetic_law(&self, n: Node, reaction: &str) -> Result<KineticLaw, SbmlError> {
        let idr = Some(reaction);
        let mut local_parameters = Vec::new();
        let list_name = if self.l3() {
            "listOfLocalParameters"
        } else {
            "listOfParameters"
        };
        let item = if self.l3() {
            "localParameter"
        } else {
            "parameter"
        };
        for c in self.non_math_children(n, idr)? {
            if xml::name(c) != list_name {
                return Err(self.unexpected(c, xml::name(c), n, idr));
            }
            for p in self.list(c, &[item])? {
                local_parameters.push(self.parameter(p, false)?);
            }
        }
        Ok(KineticLaw {
            math: self.math(n, idr)?,
            local_parameters,
            loc: self.loc(n),
        })
    }

    fn event(&self, n: Node) -> Result<Event, SbmlError> {
        let id = self.sid_attr(n, "id", None)?;
        let idr = id.as_deref();
        let use_values = match self.bool_attr(n, "useValuesFromTriggerTime", idr)? {
            Some(v) => v,
            None if self.l3() => return Err(self.missing(n, "useValuesFromTriggerTime", idr)),
            None => true,
        };
        let mut e = Event {
            id: id.clone(),
            use_values_from_trigger_time: use_values,
            trigger: None,
            delay: None,
            priority: None,
            assignments: Vec::new(),
            loc: self.loc(n),
        };
        let mut seen: Vec<&str> = Vec::new();
        for c in self.children(n, idr)? {
            let name = xml::name(c);
            if seen.contains(&name) {
                return Err(self.unexpected(c, name, n, idr));
            }
            seen.push(name);
            match name {
                "trigger" => {
                    self.non_math_children(c, idr)?;
                    e.trigger = Some(Trigger {
                        math: self.math(c, idr)?,
                        persistent: self.flag(c, "persistent", idr, true)?,
                        initial_value: self.flag(c, "initialValue", idr, true)?,
                        loc: self.loc(c),
                    });
                }
                "delay" => {
                    self.non_math_children(c, idr)?;
                    e.delay = self.math(c, idr)?;
                }
                "priority" if self.l3() => {
                    self.non_math_children(c, idr)?;
                    e.priority = self.math(c, idr)?;
                }
                "listOfEventAssignments" => {
                    for a in self.list(c, &["eventAssignment"])? {
                        let variable = self.required_sid(a, "variable", idr)?;
                        self.non_math_children(a, Some(&variable))?;
                        e.assignments.push(EventAssignment {
                            math: self.math(a, Some(&variable))?,
                            variable,
                            loc: self.loc(a),
                        });
                    }
                }
                other => return Err(self.unexpected(c, other, n, idr)),
            }
        }
        if e.trigger.is_none() && !(self.level == 3 && self.version == 2) {
            return Err(self.err(
                n,
                ErrorKind::MissingElement {
                    element: "trigger".into(),
                },
                idr,
            ));
        }
        Ok(e)
    }
}
