//! Structure of a compiled network: stoichiometry matrix, dependency graph, carrier motifs and
//! warnings about unused declarations. Conservation laws are in [`super::laws`].
//!
//! Everything here is built from per-species indices in time and memory linear in the size
//! of the file (the number of species, reactions and their terms), never in species ×
//! reactions.

use super::parser::{Ast, DoseEnd, Expr, Item, Operand, Rate};
use super::{units, Kinetics, Network};
use crate::error::Diagnostic;
use std::collections::HashSet;

/// Rows of a flat table: row k is `values[start[k]..start[k + 1]]`.
#[derive(Clone, Debug, Default, PartialEq)]
struct Rows<T> {
    start: Vec<usize>,
    values: Vec<T>,
}

impl<T: Copy + Default> Rows<T> {
    /// Rows from (row, value) pairs; within a row, values keep the order given.
    fn from_pairs(rows: usize, pairs: &[(usize, T)]) -> Rows<T> {
        let mut start = vec![0usize; rows + 1];
        for &(r, _) in pairs {
            start[r + 1] += 1;
        }
        for r in 0..rows {
            start[r + 1] += start[r];
        }
        let mut fill = start.clone();
        let mut values = vec![T::default(); pairs.len()];
        for &(r, v) in pairs {
            values[fill[r]] = v;
            fill[r] += 1;
        }
        Rows { start, values }
    }

    fn row(&self, r: usize) -> &[T] {
        &self.values[self.start[r]..self.start[r + 1]]
    }
}

/// Net stoichiometry S (species × reactions): products minus reactants, as written (rows of
/// clamped species show what the reaction would do, although the count is held fixed).
///
/// Stored sparse, by reaction and by species, so that its memory grows with the number of
/// non-zero entries; [`Stoichiometry::dense_row`] and the JSON form give the full matrix.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Stoichiometry {
    species: usize,
    reactions: usize,
    /// Column j: (species, S_ij ≠ 0), by species.
    by_reaction: Rows<(usize, i64)>,
    /// Row i: (reaction, S_ij ≠ 0), by reaction.
    by_species: Rows<(usize, i64)>,
}

impl Stoichiometry {
    /// Number of rows (species).
    pub fn species(&self) -> usize {
        self.species
    }

    /// Number of columns (reactions).
    pub fn reactions(&self) -> usize {
        self.reactions
    }

    /// S_ij.
    pub fn get(&self, i: usize, j: usize) -> i64 {
        let row = self.by_species.row(i);
        row.binary_search_by_key(&j, |e| e.0)
            .map_or(0, |k| row[k].1)
    }

    /// The non-zero entries of column j: (species, S_ij).
    pub fn column(&self, j: usize) -> &[(usize, i64)] {
        self.by_reaction.row(j)
    }

    /// The non-zero entries of row i: (reaction, S_ij).
    pub fn row(&self, i: usize) -> &[(usize, i64)] {
        self.by_species.row(i)
    }

    /// Row i with one entry per reaction.
    pub fn dense_row(&self, i: usize) -> Vec<i64> {
        let mut out = vec![0; self.reactions];
        for &(j, v) in self.row(i) {
            out[j] = v;
        }
        out
    }
}

/// The full matrix, one array per species.
impl serde::Serialize for Stoichiometry {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeSeq;
        let mut seq = s.serialize_seq(Some(self.species))?;
        for i in 0..self.species {
            seq.serialize_element(&self.dense_row(i))?;
        }
        seq.end()
    }
}

/// Net stoichiometry S of `net` (products minus reactants).
pub fn stoichiometry(net: &Network) -> Stoichiometry {
    let mut by_reaction: Vec<(usize, (usize, i64))> = Vec::new();
    let mut column: Vec<(usize, i64)> = Vec::new();
    for (j, r) in net.reactions.iter().enumerate() {
        column.clear();
        column.extend(r.reactants.iter().map(|&(i, n)| (i, -(n as i64))));
        column.extend(r.products.iter().map(|&(i, n)| (i, n as i64)));
        column.sort_unstable_by_key(|e| e.0);
        let mut k = 0;
        while k < column.len() {
            let i = column[k].0;
            let mut v = 0;
            while k < column.len() && column[k].0 == i {
                v += column[k].1;
                k += 1;
            }
            if v != 0 {
                by_reaction.push((j, (i, v)));
            }
        }
    }
    let by_species: Vec<(usize, (usize, i64))> =
        by_reaction.iter().map(|&(j, (i, v))| (i, (j, v))).collect();
    Stoichiometry {
        species: net.species.len(),
        reactions: net.reactions.len(),
        by_reaction: Rows::from_pairs(net.reactions.len(), &by_reaction),
        by_species: Rows::from_pairs(net.species.len(), &by_species),
    }
}

/// The dependency graph of Gibson & Bruck (2000, J. Phys. Chem. A 104:1876 \[verified\]): reaction
/// k depends on reaction j when k's propensity reads a species that j changes.
///
/// It is kept as its two halves, per species: the reactions that read it, and per reaction the
/// species it changes. Its size is linear in the network even where the graph itself is not
/// (40,000 steps that all change and read one species make 1.6·10⁹ edges):
/// [`DependencyGraph::of`] lists one reaction's dependents, and a kernel for a large network
/// may walk [`DependencyGraph::changed`] and [`DependencyGraph::readers`] instead.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DependencyGraph {
    /// Per species, the reactions whose propensity reads it, ascending.
    readers: Rows<usize>,
    /// Per reaction, the non-clamped species it changes, ascending.
    changed: Rows<usize>,
}

impl DependencyGraph {
    /// Number of reactions.
    pub fn reactions(&self) -> usize {
        self.changed.start.len() - 1
    }

    /// The reactions whose propensity can change when j fires, ascending.
    pub fn of(&self, j: usize) -> Vec<usize> {
        let mut out: Vec<usize> = self
            .changed(j)
            .iter()
            .flat_map(|&i| self.readers(i).iter().copied())
            .collect();
        out.sort_unstable();
        out.dedup();
        out
    }

    /// The reactions whose propensity reads species i, ascending.
    pub fn readers(&self, i: usize) -> &[usize] {
        self.readers.row(i)
    }

    /// The non-clamped species reaction j changes, ascending.
    pub fn changed(&self, j: usize) -> &[usize] {
        self.changed.row(j)
    }

    /// Σ over reactions j of Σ over the species j changes of their readers: the work of
    /// walking the graph by species once for every reaction (an upper bound on the number of
    /// edges, which lists each dependent once).
    pub fn walk_size(&self) -> usize {
        (0..self.reactions())
            .map(|j| {
                self.changed(j)
                    .iter()
                    .map(|&i| self.readers(i).len())
                    .sum::<usize>()
            })
            .sum()
    }
}

/// The dependency graph of `net`.
pub fn dependency_graph(net: &Network) -> DependencyGraph {
    let mut reads: Vec<(usize, usize)> = Vec::new();
    let mut changed: Vec<(usize, usize)> = Vec::new();
    for (j, r) in net.reactions.iter().enumerate() {
        reads.extend(r.reads().into_iter().map(|i| (i, j)));
        changed.extend(r.change.iter().map(|&(i, _)| (j, i)));
    }
    DependencyGraph {
        readers: Rows::from_pairs(net.species.len(), &reads),
        changed: Rows::from_pairs(net.reactions.len(), &changed),
    }
}

/// `E + C`, `S + C + P`, `P + 2 P2`.
pub fn law_text(net: &Network, law: &[i64]) -> String {
    let mut s = String::new();
    for (i, &c) in law.iter().enumerate().filter(|(_, &c)| c != 0) {
        let name = &net.species[i].name;
        let term = if c.abs() == 1 {
            name.clone()
        } else {
            format!("{} {name}", c.abs())
        };
        if s.is_empty() {
            s = if c < 0 { format!("-{term}") } else { term };
        } else {
            s.push_str(if c < 0 { " - " } else { " + " });
            s.push_str(&term);
        }
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Carrier motifs
// ---------------------------------------------------------------------------------------------

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MotifKind {
    /// `C -> X + products`: the carrier is freed (enzyme turnover, transport).
    Enzyme,
    /// `C -> C + M`: the bound complex keeps signalling.
    Receptor,
}

impl MotifKind {
    pub fn as_str(self) -> &'static str {
        match self {
            MotifKind::Enzyme => "enzyme",
            MotifKind::Receptor => "receptor",
        }
    }
}

/// A carrier X cycling between free X and one complex C = X·L: `X + L -> C` (bind), optionally
/// `C -> X + L` (unbind), and an output step: turnover `C -> X + …` or signal `C -> C + M`.
/// X + C is conserved.
#[derive(Clone, Debug, PartialEq)]
pub struct Motif {
    pub kind: MotifKind,
    pub carrier: usize,
    pub ligand: usize,
    pub complex: usize,
    pub bind: usize,
    pub unbind: Option<usize>,
    /// The turnover (enzyme) or signal (receptor) reaction.
    pub output: usize,
    /// Every reaction that frees the carrier from the complex other than `unbind`.
    pub turnovers: Vec<usize>,
    /// Stochastic constants (molecules, seconds).
    pub c_on: f64,
    pub c_off: f64,
    pub c_out: f64,
    /// K = (k_off + Σ k_cat)/k_on in molecules (Briggs & Haldane 1925).
    pub k_half: f64,
}

fn mass_action_c(net: &Network, j: usize) -> Option<f64> {
    match net.reactions[j].kinetics {
        Kinetics::MassAction { c, .. } => Some(c),
        Kinetics::Law { .. } => None,
    }
}

fn change_of(net: &Network, j: usize, i: usize) -> i64 {
    net.reactions[j]
        .change
        .iter()
        .find(|e| e.0 == i)
        .map_or(0, |e| e.1)
}

fn has_product(net: &Network, j: usize, i: usize, n: u32) -> bool {
    net.reactions[j].products.contains(&(i, n))
}

/// Finds every carrier motif: a carrier X cycling between free X and one complex C = X·L,
/// with X + C conserved (see [`Motif`]).
pub fn motifs(net: &Network) -> Vec<Motif> {
    let n = net.species.len();
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    let mut consumers: Vec<(usize, usize)> = Vec::new();
    for (j, r) in net.reactions.iter().enumerate() {
        pairs.extend(r.change.iter().map(|&(i, _)| (i, j)));
        consumers.extend(r.reactants.iter().map(|&(i, _)| (i, j)));
    }
    // Per species, the reactions that change it and the reactions that consume it, ascending.
    let changing = Rows::from_pairs(n, &pairs);
    let consuming = Rows::from_pairs(n, &consumers);
    let mut out = Vec::new();
    for (b, bind) in net.reactions.iter().enumerate() {
        let Some(c_on) = mass_action_c(net, b) else {
            continue;
        };
        let [(x0, 1), (x1, 1)] = bind.reactants[..] else {
            continue;
        };
        let [(cx, 1)] = bind.products[..] else {
            continue;
        };
        if net.species[cx].clamped || c_on <= 0.0 {
            continue;
        }
        // Every reaction that changes C must be the bind step, or first order in C alone.
        let exits: Vec<usize> = changing
            .row(cx)
            .iter()
            .copied()
            .filter(|&j| j != b)
            .collect();
        let clean = exits.iter().all(|&j| {
            net.reactions[j].reactants == [(cx, 1)]
                && change_of(net, j, cx) == -1
                && mass_action_c(net, j).is_some()
        });
        if !clean {
            continue;
        }
        // Only reactions that change x or C can break x + C.
        let conserved = |x: usize| {
            !net.species[x].clamped
                && changing
                    .row(x)
                    .iter()
                    .chain(changing.row(cx))
                    .all(|&j| change_of(net, j, x) + change_of(net, j, cx) == 0)
        };
        let signals: Vec<usize> = consuming
            .row(cx)
            .iter()
            .copied()
            .filter(|&j| {
                net.reactions[j].reactants == [(cx, 1)]
                    && has_product(net, j, cx, 1)
                    && net.reactions[j].products.len() > 1
                    && mass_action_c(net, j).is_some()
            })
            .collect();
        for (carrier, ligand) in [(x0, x1), (x1, x0)] {
            if !conserved(carrier) {
                continue;
            }
            let frees = |j: usize| has_product(net, j, carrier, 1);
            if !exits.iter().all(|&j| frees(j)) {
                continue;
            }
            let unbind = exits.iter().copied().find(|&j| {
                let mut p = net.reactions[j].products.clone();
                p.sort_unstable();
                let mut want = vec![(carrier, 1), (ligand, 1)];
                want.sort_unstable();
                p == want
            });
            let turnovers: Vec<usize> = exits
                .iter()
                .copied()
                .filter(|&j| Some(j) != unbind)
                .collect();
            let c_off = unbind.and_then(|j| mass_action_c(net, j)).unwrap_or(0.0);
            let c_exit: f64 = turnovers
                .iter()
                .filter_map(|&j| mass_action_c(net, j))
                .sum();
            let k_half = (c_off + c_exit) / c_on;
            let outputs = turnovers
                .iter()
                .map(|&j| (MotifKind::Enzyme, j))
                .chain(signals.iter().map(|&j| (MotifKind::Receptor, j)));
            for (kind, output) in outputs {
                out.push(Motif {
                    kind,
                    carrier,
                    ligand,
                    complex: cx,
                    bind: b,
                    unbind,
                    output,
                    turnovers: turnovers.clone(),
                    c_on,
                    c_off,
                    c_out: mass_action_c(net, output).unwrap_or(0.0),
                    k_half,
                });
            }
            // The first-written reactant wins when both could be the carrier.
            break;
        }
    }
    out
}

/// Motifs in series: maximal paths m₁ → m₂ → … where the output step of mᵢ makes the ligand
/// of mᵢ₊₁ (a transporter feeding an enzyme feeding a receptor). Each chain has at least two
/// stages and lists motif indices in order.
pub fn motif_chains(net: &Network) -> Vec<Vec<usize>> {
    let ms = &net.motifs;
    let feeds = |a: usize, b: usize| {
        a != b
            && ms[a].complex != ms[b].complex
            && net.reactions[ms[a].output]
                .products
                .iter()
                .any(|&(i, _)| i == ms[b].ligand && i != ms[a].carrier && i != ms[a].complex)
    };
    let has_pred = |b: usize| (0..ms.len()).any(|a| feeds(a, b));
    let mut chains = Vec::new();
    for start in (0..ms.len()).filter(|&m| !has_pred(m)) {
        let mut stack = vec![vec![start]];
        while let Some(path) = stack.pop() {
            let last = *path.last().unwrap();
            let next: Vec<usize> = (0..ms.len())
                .filter(|&b| feeds(last, b) && !path.contains(&b))
                .collect();
            if next.is_empty() {
                if path.len() > 1 {
                    chains.push(path);
                }
                continue;
            }
            for b in next {
                let mut p = path.clone();
                p.push(b);
                stack.push(p);
            }
        }
    }
    chains.sort();
    chains
}

// ---------------------------------------------------------------------------------------------
// Warnings about unused declarations
// ---------------------------------------------------------------------------------------------

/// The names `e` reads, by a walk with its own stack (a long chain `a + b + …` is a tree as
/// deep as it is long).
fn names_in(e: &Expr, out: &mut Vec<String>) {
    let mut todo = vec![e];
    while let Some(e) = todo.pop() {
        match e {
            Expr::Number(_) => {}
            Expr::Name(n) => out.push(n.text.clone()),
            Expr::Neg(a, _) => todo.push(a),
            Expr::Binary(_, a, b, _) => todo.extend([&**b, &**a]),
            Expr::Call(_, args, _) => todo.extend(args.iter().rev()),
        }
    }
}

/// The lines of a source text, found once.
struct Lines<'a> {
    source: &'a str,
    starts: Vec<usize>,
}

impl<'a> Lines<'a> {
    fn new(source: &'a str) -> Lines<'a> {
        let mut starts = vec![0];
        starts.extend(source.match_indices('\n').map(|(k, _)| k + 1));
        Lines { source, starts }
    }

    /// Line `line` (1-based) without its line break, as `str::lines` gives it.
    fn line(&self, line: u32) -> &'a str {
        let k = line.saturating_sub(1) as usize;
        let (Some(&a), b) = (self.starts.get(k), self.starts.get(k + 1)) else {
            return "";
        };
        let text = &self.source[a..b.map_or(self.source.len(), |&b| b - 1)];
        text.strip_suffix('\r').unwrap_or(text)
    }
}

/// Warns about params no step uses and species no step touches.
pub fn usage_warnings(net: &mut Network, ast: &Ast) {
    let mut used: HashSet<&str> = HashSet::new();
    let mut law_names: Vec<String> = Vec::new();
    let mut input_names: Vec<String> = Vec::new();
    fn operand<'a>(o: &'a Operand, used: &mut HashSet<&'a str>) {
        if let Operand::Param(n) = o {
            used.insert(&n.text);
        }
    }
    for item in &ast.items {
        match item {
            Item::Dose(d) => {
                used.insert(&d.species.text);
                for o in [Some(&d.amount), Some(&d.at), d.every.as_ref()]
                    .into_iter()
                    .flatten()
                {
                    operand(o, &mut used);
                }
                match &d.end {
                    Some(DoseEnd::Until(o)) | Some(DoseEnd::Times(o)) => operand(o, &mut used),
                    None => {}
                }
            }
            Item::Infuse(f) => {
                used.insert(&f.species.text);
                for o in [&f.rate, &f.from, &f.to] {
                    operand(o, &mut used);
                }
            }
            Item::When(w) => {
                names_in(&w.condition, &mut input_names);
                for a in &w.assignments {
                    used.insert(&a.target.text);
                    names_in(&a.value, &mut input_names);
                }
            }
            _ => {}
        }
        let Item::Step(s) = item else { continue };
        for rate in std::iter::once(&s.forward).chain(s.reverse.as_ref()) {
            match rate {
                Rate::Law(e) => names_in(e, &mut law_names),
                Rate::Constant(o)
                | Rate::HalfLife(o, _)
                | Rate::Kd(o, _)
                | Rate::Clearance(o, _) => operand(o, &mut used),
            }
        }
        for t in s.reactants.iter().chain(&s.products) {
            used.insert(&t.species.text);
        }
    }
    used.extend(input_names.iter().map(String::as_str));
    law_names.sort();
    law_names.dedup();
    used.extend(law_names.iter().map(String::as_str));
    let lines = Lines::new(&ast.source);
    let at = |span: crate::error::Span, message: String| {
        Diagnostic::on_line(&ast.file, lines.line(span.line), span, message)
    };
    let mut warnings = Vec::new();
    let declared: std::collections::HashMap<&str, crate::error::Span> = net
        .params
        .iter()
        .map(|p| (p.name.as_str(), p.span))
        .chain(net.species.iter().map(|s| (s.name.as_str(), s.span)))
        .collect();
    for name in law_names.iter().filter(|n| units::is_unit(n)) {
        if let Some(&span) = declared.get(name.as_str()) {
            warnings.push(at(
                span,
                format!("`{name}` is also a unit: right after a number in a law it reads as the unit; write `2 * {name}` there to mean the name"),
            ));
        }
    }
    for p in &net.params {
        if !used.contains(p.name.as_str()) {
            warnings.push(at(p.span, format!("param `{}` is never used", p.name)));
        }
    }
    for s in &net.species {
        if !used.contains(s.name.as_str()) {
            warnings.push(at(
                s.span,
                format!("species `{}` takes part in no step", s.name),
            ));
        }
    }
    // A constant or half-saturation constant past f64's range reads as infinity and every
    // engine then divides by it: say so where the file is still at hand.
    for r in &net.reactions {
        if let Some(c) = r.stochastic_constant().filter(|c| !c.is_finite()) {
            warnings.push(at(
                r.span,
                format!(
                    "the constant of `{}` overflows to {} (past 1.8e308): no engine can use it; give a finite constant",
                    r.label,
                    crate::numbers::short(c)
                ),
            ));
        }
    }
    for m in net.motifs.iter().filter(|m| !m.k_half.is_finite()) {
        let r = &net.reactions[m.unbind.unwrap_or(m.output)];
        warnings.push(at(
            r.span,
            format!(
                "the half-saturation constant K of motif {}·{} overflows (K = (unbind + output constant) / bind is {}): its fluxes cannot be reconciled; give `{}` a constant below 1e300",
                net.species[m.carrier].name,
                net.species[m.ligand].name,
                crate::numbers::short(m.k_half),
                r.label
            ),
        ));
    }
    net.warnings
        .extend(warnings.into_iter().map(crate::error::Diagnostic::warning));
}

#[cfg(test)]
mod tests {
    use crate::network::{load_source, Network, Overrides};

    fn net(src: &str) -> Network {
        load_source("t.crn", src.as_bytes(), &Overrides::default())
            .unwrap_or_else(|e| panic!("{e}"))
    }

    fn laws_by_name(n: &Network) -> Vec<String> {
        n.conservation_laws
            .iter()
            .map(|l| {
                l.iter()
                    .enumerate()
                    .filter(|(_, &c)| c != 0)
                    .map(|(i, &c)| {
                        if c == 1 {
                            n.species[i].name.clone()
                        } else {
                            format!("{c}{}", n.species[i].name)
                        }
                    })
                    .collect::<Vec<_>>()
                    .join("+")
            })
            .collect()
    }

    const MM: &str = "species E = 10\nspecies S = 100\nspecies C = 0\nspecies P = 0\n\
                      step bind E + S <-> C @ 1, 1\nstep cat C -> E + P @ 1\n";

    // Michaelis–Menten scheme E + S <-> C -> E + P conserves E + C and S + C + P
    // (Briggs & Haldane 1925 [M]; docs/references.md §6: E_T = E + C, S_T = S + C + P).
    #[test]
    fn michaelis_menten_conservation() {
        let n = net(MM);
        let mut laws = laws_by_name(&n);
        laws.sort();
        assert_eq!(laws, vec!["E+C", "S+C+P"]);
        for l in &n.conservation_laws {
            for j in 0..n.reactions.len() {
                let s: i64 = (0..n.species.len())
                    .map(|i| l[i] * n.stoichiometry.get(i, j))
                    .sum();
                assert_eq!(s, 0);
            }
        }
    }

    // Briggs–Haldane: K = (k₋₁ + k₂)/k₁ (Briggs & Haldane 1925 [M], docs/references.md §6 [verified formula]).
    #[test]
    fn enzyme_motif_and_k_half() {
        let src = "volume 1 fL\nspecies E = 100 molecules\nspecies S = 5 uM clamped\nspecies C = 0\nspecies P = 0\n\
                   step bind E + S <-> C @ 1e6 /M/s, 3 /s\nstep cat C -> E + P @ 2 /s\n";
        let n = net(src);
        assert_eq!(n.motifs.len(), 1);
        let m = &n.motifs[0];
        assert_eq!(m.kind.as_str(), "enzyme");
        assert_eq!(n.species[m.carrier].name, "E");
        assert_eq!(n.species[m.ligand].name, "S");
        let k_half_molar = (3.0 + 2.0) / 1e6;
        assert!((m.k_half / n.omega - k_half_molar).abs() < 1e-15 * k_half_molar * 10.0);
        // S clamped: only E + C is conserved.
        assert_eq!(laws_by_name(&n), vec!["E+C"]);
    }

    // Langmuir isotherm: receptor R + L <-> RL, RL -> RL + M; K_d = k_off/k_on (common practice).
    #[test]
    fn receptor_motif() {
        let src = "species L = 50 clamped\nspecies R = 20\nspecies RL = 0\nspecies M = 0\n\
                   step bind R + L <-> RL @ 0.01, 0.5\nstep sig RL -> RL + M @ 3\nstep deg M -> 0 @ 1\n";
        let n = net(src);
        assert_eq!(n.motifs.len(), 1);
        let m = &n.motifs[0];
        assert_eq!(m.kind.as_str(), "receptor");
        assert_eq!(n.species[m.carrier].name, "R");
        assert!((m.k_half - 50.0).abs() < 1e-12);
    }

    #[test]
    fn dependency_graph_follows_changed_species() {
        let n = net(MM);
        // bind changes E, S, C: every reaction reads one of them.
        assert_eq!(n.dependents.of(0), vec![0, 1, 2]);
        // cat changes C, E, P: bind reads E, unbind and cat read C.
        assert_eq!(n.dependents.of(2), vec![0, 1, 2]);
        let n = net("species A = 5\nspecies B = 0\nstep a A -> B @ 1\nstep b 0 -> A @ 2\n");
        assert_eq!(n.dependents.of(1), vec![0]);
        assert_eq!(n.dependents.of(0), vec![0]);
    }

    #[test]
    fn motifs_in_series() {
        // transporter T moves A_out into the cell as A; enzyme E turns A into P; receptor R binds P.
        let src = "species Aout = 100 clamped\nspecies T = 10\nspecies TA = 0\nspecies A = 0\n\
                   species E = 10\nspecies EA = 0\nspecies P = 0\nspecies R = 10\nspecies RP = 0\nspecies Q = 0\n\
                   step tb T + Aout <-> TA @ 0.01, 1\nstep tt TA -> T + A @ 5\n\
                   step eb E + A <-> EA @ 0.01, 1\nstep ec EA -> E + P @ 2\n\
                   step rb R + P <-> RP @ 0.01, 1\nstep rs RP -> RP + Q @ 1\n\
                   step pd P -> 0 @ 0.1\nstep qd Q -> 0 @ 1\n";
        let n = net(src);
        assert_eq!(n.motifs.len(), 3);
        let chains = super::motif_chains(&n);
        assert_eq!(chains.len(), 1);
        let carriers: Vec<&str> = chains[0]
            .iter()
            .map(|&m| n.species[n.motifs[m].carrier].name.as_str())
            .collect();
        assert_eq!(carriers, ["T", "E", "R"]);
    }

    #[test]
    fn dimerisation_law_with_coefficient() {
        let n = net("species P = 100\nspecies P2 = 0\nstep d 2 P <-> P2 @ 0.001, 0.01\n");
        assert_eq!(laws_by_name(&n), vec!["P+2P2"]);
    }
}
