//! Structure of a compiled network: stoichiometry matrix, dependency graph, conservation laws
//! and carrier motifs.

use super::parser::{Ast, DoseEnd, Expr, Item, Operand, Rate};
use super::{units, Kinetics, Network};
use crate::error::Diagnostic;

/// Net stoichiometry S (species × reactions): products minus reactants.
pub fn stoichiometry(net: &Network) -> Vec<Vec<i64>> {
    let mut s = vec![vec![0i64; net.reactions.len()]; net.species.len()];
    for (j, r) in net.reactions.iter().enumerate() {
        for &(i, n) in &r.reactants {
            s[i][j] -= n as i64;
        }
        for &(i, n) in &r.products {
            s[i][j] += n as i64;
        }
    }
    s
}

/// For each reaction j, the reactions k whose propensity reads a species that j changes
/// (the dependency graph of Gibson & Bruck 2000), sorted.
pub fn dependency_graph(net: &Network) -> Vec<Vec<usize>> {
    let reads: Vec<Vec<usize>> = net.reactions.iter().map(|r| r.reads()).collect();
    net.reactions
        .iter()
        .map(|r| {
            (0..net.reactions.len())
                .filter(|&k| {
                    r.change
                        .iter()
                        .any(|&(i, _)| reads[k].binary_search(&i).is_ok())
                })
                .collect()
        })
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Conservation laws
// ---------------------------------------------------------------------------------------------

fn gcd(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.abs(), b.abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

fn normalise(v: &mut [i128]) {
    let g = v.iter().fold(0, |g, &x| gcd(g, x));
    if g > 1 {
        v.iter_mut().for_each(|x| *x /= g);
    }
    if v.iter().find(|&&x| x != 0).is_some_and(|&x| x < 0) {
        v.iter_mut().for_each(|x| *x = -*x);
    }
}

/// Rank of integer row vectors by fraction-free elimination (exact).
fn rank(rows: &[Vec<i128>]) -> usize {
    let mut m: Vec<Vec<i128>> = rows.to_vec();
    let cols = m.first().map_or(0, |r| r.len());
    let mut r = 0;
    for c in 0..cols {
        let Some(p) = (r..m.len()).find(|&i| m[i][c] != 0) else {
            continue;
        };
        m.swap(r, p);
        for i in 0..m.len() {
            if i != r && m[i][c] != 0 {
                let (a, b) = (m[r][c], m[i][c]);
                let pivot = m[r].clone();
                for (x, y) in m[i].iter_mut().zip(pivot) {
                    *x = a * *x - b * y;
                }
                normalise(&mut m[i]);
            }
        }
        r += 1;
    }
    r
}

/// A basis of the integer null space {l : Aᵀl = 0} of the n × m matrix `a` (rows = species),
/// from the reduced row echelon form of Aᵀ in exact integer arithmetic.
fn null_space_basis(a: &[Vec<i128>]) -> Vec<Vec<i128>> {
    let n = a.len();
    let m = a.first().map_or(0, |r| r.len());
    let mut t: Vec<Vec<i128>> = (0..m).map(|j| (0..n).map(|i| a[i][j]).collect()).collect();
    let mut pivots: Vec<(usize, usize)> = Vec::new();
    let mut r = 0;
    for c in 0..n {
        let Some(p) = (r..t.len()).find(|&i| t[i][c] != 0) else {
            continue;
        };
        t.swap(r, p);
        for i in 0..t.len() {
            if i != r && t[i][c] != 0 {
                let (pa, b) = (t[r][c], t[i][c]);
                let pivot = t[r].clone();
                for (x, y) in t[i].iter_mut().zip(pivot) {
                    *x = pa * *x - b * y;
                }
                normalise(&mut t[i]);
            }
        }
        pivots.push((r, c));
        r += 1;
    }
    let pivot_cols: Vec<usize> = pivots.iter().map(|p| p.1).collect();
    let mut basis = Vec::new();
    for f in (0..n).filter(|c| !pivot_cols.contains(c)) {
        let lcm = pivots.iter().fold(1i128, |l, &(row, col)| {
            l / gcd(l, t[row][col]) * t[row][col].abs()
        });
        let mut v = vec![0i128; n];
        v[f] = lcm;
        for &(row, col) in &pivots {
            v[col] = -t[row][f] * lcm / t[row][col];
        }
        normalise(&mut v);
        basis.push(v);
    }
    basis
}

/// Minimal-support semi-positive vectors l ≥ 0 with Aᵀl = 0, by Fourier–Motzkin elimination
/// over the reaction columns (the classic P-invariant construction; Schuster & Höfer 1991).
/// Returns `None` if the tableau grows past a fixed size.
fn semipositive_laws(a: &[Vec<i128>]) -> Option<Vec<Vec<i128>>> {
    const LIMIT: usize = 4000;
    let n = a.len();
    let m = a.first().map_or(0, |r| r.len());
    // Each row: (remaining columns of A, identity part).
    let mut rows: Vec<(Vec<i128>, Vec<i128>)> = (0..n)
        .map(|i| {
            let mut e = vec![0; n];
            e[i] = 1;
            (a[i].clone(), e)
        })
        .collect();
    for j in 0..m {
        let mut next: Vec<(Vec<i128>, Vec<i128>)> =
            rows.iter().filter(|r| r.0[j] == 0).cloned().collect();
        let pos: Vec<&(Vec<i128>, Vec<i128>)> = rows.iter().filter(|r| r.0[j] > 0).collect();
        let neg: Vec<&(Vec<i128>, Vec<i128>)> = rows.iter().filter(|r| r.0[j] < 0).collect();
        for p in &pos {
            for q in &neg {
                let (wp, wq) = (-q.0[j], p.0[j]);
                let mut row: Vec<i128> =
                    p.0.iter().zip(&q.0).map(|(x, y)| wp * x + wq * y).collect();
                let mut id: Vec<i128> =
                    p.1.iter().zip(&q.1).map(|(x, y)| wp * x + wq * y).collect();
                let mut all: Vec<i128> = row.iter().chain(id.iter()).copied().collect();
                let g = all.iter().fold(0, |g, &x| gcd(g, x));
                if g > 1 {
                    all.iter_mut().for_each(|x| *x /= g);
                    row = all[..m].to_vec();
                    id = all[m..].to_vec();
                }
                next.push((row, id));
                if next.len() > LIMIT {
                    return None;
                }
            }
        }
        // Keep only rows of minimal support.
        let supports: Vec<Vec<bool>> = next
            .iter()
            .map(|r| r.1.iter().map(|&x| x != 0).collect())
            .collect();
        let mut keep = vec![true; next.len()];
        for i in 0..next.len() {
            for k in 0..next.len() {
                if i == k || !keep[k] {
                    continue;
                }
                let sub = supports[k].iter().zip(&supports[i]).all(|(a, b)| !a || *b);
                if sub && (supports[k] != supports[i] || k < i) {
                    keep[i] = false;
                    break;
                }
            }
        }
        rows = next
            .into_iter()
            .zip(keep)
            .filter_map(|(r, k)| k.then_some(r))
            .collect();
    }
    Some(rows.into_iter().map(|r| r.1).collect())
}

/// Integer vectors l spanning {l : l·S = 0} over the non-clamped species, each with entries for
/// every species (zero for clamped ones). Semi-positive, minimal-support laws are preferred (so
/// Michaelis–Menten gives E + C and S + C + P); a basis of the exact null space completes the
/// set when they do not span it.
pub fn conservation_laws(net: &Network) -> Vec<Vec<i64>> {
    let free: Vec<usize> = (0..net.species.len())
        .filter(|&i| !net.species[i].clamped)
        .collect();
    if free.is_empty() {
        return Vec::new();
    }
    let a: Vec<Vec<i128>> = free
        .iter()
        .map(|&i| net.stoichiometry[i].iter().map(|&x| x as i128).collect())
        .collect();
    let basis = null_space_basis(&a);
    let dim = basis.len();
    let mut chosen: Vec<Vec<i128>> = Vec::new();
    let mut candidates = semipositive_laws(&a).unwrap_or_default();
    candidates.sort_by_key(|v| {
        (
            v.iter().filter(|&&x| x != 0).count(),
            v.iter().sum::<i128>(),
        )
    });
    for v in candidates.into_iter().chain(basis) {
        if chosen.len() == dim {
            break;
        }
        let mut trial = chosen.clone();
        trial.push(v.clone());
        if rank(&trial) > chosen.len() {
            chosen.push(v);
        }
    }
    chosen
        .into_iter()
        .map(|v| {
            let mut full = vec![0i64; net.species.len()];
            for (k, &i) in free.iter().enumerate() {
                full[i] = v[k] as i64;
            }
            full
        })
        .collect()
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

/// Finds every carrier motif (DESIGN.md, "Carrier motifs").
pub fn motifs(net: &Network) -> Vec<Motif> {
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
        let exits: Vec<usize> = (0..net.reactions.len())
            .filter(|&j| j != b && change_of(net, j, cx) != 0)
            .collect();
        let clean = exits.iter().all(|&j| {
            net.reactions[j].reactants == [(cx, 1)]
                && change_of(net, j, cx) == -1
                && mass_action_c(net, j).is_some()
        });
        if !clean {
            continue;
        }
        let conserved = |x: usize| {
            !net.species[x].clamped
                && (0..net.reactions.len())
                    .all(|j| change_of(net, j, x) + change_of(net, j, cx) == 0)
        };
        let signals: Vec<usize> = (0..net.reactions.len())
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

fn names_in(e: &Expr, out: &mut Vec<String>) {
    match e {
        Expr::Number(_) => {}
        Expr::Name(n) => out.push(n.text.clone()),
        Expr::Neg(a, _) => names_in(a, out),
        Expr::Binary(_, a, b, _) => {
            names_in(a, out);
            names_in(b, out);
        }
        Expr::Call(_, args, _) => args.iter().for_each(|a| names_in(a, out)),
    }
}

/// Warns about params no step uses and species no step touches.
pub fn usage_warnings(net: &mut Network, ast: &Ast) {
    let mut used: Vec<String> = Vec::new();
    let mut in_laws: Vec<String> = Vec::new();
    let operand = |o: &Operand, used: &mut Vec<String>| {
        if let Operand::Param(n) = o {
            used.push(n.text.clone());
        }
    };
    for item in &ast.items {
        match item {
            Item::Dose(d) => {
                used.push(d.species.text.clone());
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
                used.push(f.species.text.clone());
                for o in [&f.rate, &f.from, &f.to] {
                    operand(o, &mut used);
                }
            }
            Item::When(w) => {
                names_in(&w.condition, &mut used);
                for a in &w.assignments {
                    used.push(a.target.text.clone());
                    names_in(&a.value, &mut used);
                }
            }
            _ => {}
        }
        let Item::Step(s) = item else { continue };
        for rate in std::iter::once(&s.forward).chain(s.reverse.as_ref()) {
            match rate {
                Rate::Law(e) => names_in(e, &mut in_laws),
                Rate::Constant(o)
                | Rate::HalfLife(o, _)
                | Rate::Kd(o, _)
                | Rate::Clearance(o, _) => operand(o, &mut used),
            }
        }
        for t in s.reactants.iter().chain(&s.products) {
            used.push(t.species.text.clone());
        }
    }
    used.extend(in_laws.iter().cloned());
    let mut warnings = Vec::new();
    in_laws.sort();
    in_laws.dedup();
    for name in in_laws.iter().filter(|n| units::is_unit(n)) {
        let span = net
            .species
            .iter()
            .map(|s| (&s.name, s.span))
            .chain(net.params.iter().map(|p| (&p.name, p.span)))
            .find(|(n, _)| *n == name)
            .map(|(_, s)| s);
        if let Some(span) = span {
            warnings.push(Diagnostic::at(
                &ast.file,
                &ast.source,
                span,
                format!("`{name}` is also a unit: right after a number in a law it reads as the unit; write `2 * {name}` there to mean the name"),
            ));
        }
    }
    for p in &net.params {
        if !used.contains(&p.name) {
            warnings.push(Diagnostic::at(
                &ast.file,
                &ast.source,
                p.span,
                format!("param `{}` is never used", p.name),
            ));
        }
    }
    for s in &net.species {
        if !used.contains(&s.name) {
            warnings.push(Diagnostic::at(
                &ast.file,
                &ast.source,
                s.span,
                format!("species `{}` takes part in no step", s.name),
            ));
        }
    }
    net.warnings.extend(warnings);
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
    // (Briggs & Haldane 1925 [M]; REFERENCES §6: E_T = E + C, S_T = S + C + P).
    #[test]
    fn michaelis_menten_conservation() {
        let n = net(MM);
        let mut laws = laws_by_name(&n);
        laws.sort();
        assert_eq!(laws, vec!["E+C", "S+C+P"]);
        for l in &n.conservation_laws {
            for j in 0..n.reactions.len() {
                let s: i64 = (0..n.species.len())
                    .map(|i| l[i] * n.stoichiometry[i][j])
                    .sum();
                assert_eq!(s, 0);
            }
        }
    }

    // Briggs–Haldane: K = (k₋₁ + k₂)/k₁ (Briggs & Haldane 1925 [M], REFERENCES §6 [verified formula]).
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
        assert_eq!(n.dependents[0], vec![0, 1, 2]);
        // cat changes C, E, P: bind reads E, unbind and cat read C.
        assert_eq!(n.dependents[2], vec![0, 1, 2]);
        let n = net("species A = 5\nspecies B = 0\nstep a A -> B @ 1\nstep b 0 -> A @ 2\n");
        assert_eq!(n.dependents[1], vec![0]);
        assert_eq!(n.dependents[0], vec![0]);
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
