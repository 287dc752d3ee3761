//! Conservation laws: integer vectors l with l·S = 0 over the non-clamped species (the left
//! null space of the stoichiometry matrix S), so that l·x stays constant along every
//! trajectory.
//!
//! The laws are chosen as follows, and this choice is what [`conservation_laws`] returns:
//!
//! 1. the minimal-support semi-positive laws (l ≥ 0), found by Fourier–Motzkin elimination
//!    over the reaction columns (the P-invariant construction of Schuster & Höfer 1991, J.
//!    Chem. Soc. Faraday Trans. 87:2561 \[M\]), sorted by support size, then by the sum of their
//!    coefficients, then by the order the elimination produced them, so that Michaelis–Menten
//!    gives E + C and S + C + P;
//! 2. then the basis of the null space read off the reduced row echelon form of Sᵀ (species in
//!    file order): one vector per non-pivot species f, with l_f ≠ 0 and l_g = 0 at every other
//!    non-pivot species g;
//!
//! each taken when it is independent of those already taken, until they span the null space.
//! Every vector is primitive (coefficients with no common divisor), with its first non-zero
//! coefficient positive.
//!
//! # How it is computed (near-linear for sparse networks)
//!
//! - Species are split into the connected components of the network (species joined by a
//!   reaction that changes both). S is block-diagonal in them, so the null space, its reduced
//!   echelon basis and the minimal semi-positive laws are unions of those of the components
//!   (a minimal-support law lies inside one component), and so is every independence test.
//! - The dimension of a component's null space comes from sparse fraction-free elimination of
//!   its equations Σᵢ S_ij·lᵢ = 0 (one per reaction), pivoting on short equations and rarely
//!   used species so that fill-in stays small (Markowitz 1957, Manage. Sci. 3:255 \[M\]). Only
//!   components with a non-zero null space go further.
//! - A basis found by back-substitution is brought to the echelon basis of step 2 exactly: the
//!   non-pivot species of the echelon form of Sᵀ are the complement of its first independent
//!   columns, i.e. the basis columns of the null space chosen greedily from the last species
//!   (the complement of a greedy basis is a greedy basis of the dual matroid, taken in the
//!   reverse order: Oxley 2011, Matroid Theory, 2nd ed., ch. 2 \[M\]; the test suite checks the
//!   result against a direct echelon computation), so the reduced echelon form of any basis
//!   with the species taken from last to first gives the same vectors.
//! - Fourier–Motzkin runs per component, on rows kept sparse. A component whose tableau grows
//!   past [`TABLEAU_LIMIT`] rows gets no semi-positive search; its laws are then those of
//!   step 2.
//!
//! All arithmetic is on i128 with overflow checks. A law that needs a coefficient beyond i64,
//! or a conserved total beyond i64, is refused with an error naming the step at fault.

use super::Network;
use crate::error::Diagnostic;
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// Rows the Fourier–Motzkin tableau of one component may hold before the semi-positive search
/// gives up on it (the count includes the rows untouched by the column at hand).
pub const TABLEAU_LIMIT: usize = 4000;

/// A sparse integer vector over the species of one component: (local index, coefficient),
/// sorted by index, no zero coefficients.
type Sparse = Vec<(u32, i128)>;

/// Why a computation stopped: an i128 overflow while handling this reaction (None where no
/// single reaction is at fault).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Overflow(Option<usize>);

fn gcd(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.unsigned_abs(), b.unsigned_abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    // The gcd of values of magnitude ≤ i128::MAX fits (only i128::MIN would not, and checked
    // arithmetic never produces it below).
    a as i128
}

/// Divides by the common divisor of the coefficients.
fn primitive(v: &mut Sparse) {
    let g = v.iter().fold(0, |g, &(_, x)| gcd(g, x));
    if g > 1 {
        v.iter_mut().for_each(|(_, x)| *x /= g);
    }
}

/// Primitive, with the first non-zero coefficient positive.
fn normalise(v: &mut Sparse) {
    primitive(v);
    if v.first().is_some_and(|&(_, x)| x < 0) {
        v.iter_mut().for_each(|(_, x)| *x = -*x);
    }
}

/// a·u + b·v, without zero coefficients.
fn combine(a: i128, u: &Sparse, b: i128, v: &Sparse) -> Option<Sparse> {
    let mut out = Vec::with_capacity(u.len() + v.len());
    let (mut i, mut k) = (0, 0);
    while i < u.len() || k < v.len() {
        let (var, x) = match (u.get(i), v.get(k)) {
            (Some(&(p, x)), Some(&(q, _))) if p < q => {
                i += 1;
                (p, a.checked_mul(x)?)
            }
            (Some(&(p, _)), Some(&(q, y))) if q < p => {
                k += 1;
                (q, b.checked_mul(y)?)
            }
            (Some(&(p, x)), Some(&(_, y))) => {
                i += 1;
                k += 1;
                (p, a.checked_mul(x)?.checked_add(b.checked_mul(y)?)?)
            }
            (Some(&(p, x)), None) => {
                i += 1;
                (p, a.checked_mul(x)?)
            }
            (None, Some(&(q, y))) => {
                k += 1;
                (q, b.checked_mul(y)?)
            }
            (None, None) => unreachable!(),
        };
        if x != 0 {
            out.push((var, x));
        }
    }
    Some(out)
}

/// Coefficient of `var` in `v`.
fn coeff(v: &Sparse, var: u32) -> i128 {
    v.binary_search_by_key(&var, |e| e.0).map_or(0, |k| v[k].1)
}

/// Eliminates `var` from `target` with `pivot` (both contain it): the fraction-free
/// combination (p/g)·target − (t/g)·pivot, g = gcd(p, t), made primitive.
fn eliminate_with(target: &Sparse, pivot: &Sparse, var: u32) -> Option<Sparse> {
    let (p, t) = (coeff(pivot, var), coeff(target, var));
    let g = gcd(p, t);
    let mut out = combine(p / g, target, -(t / g), pivot)?;
    primitive(&mut out);
    Some(out)
}

/// One connected component: its species (network indices, ascending) and its reactions'
/// equations Σᵢ S_ij·lᵢ = 0 (network reaction index, terms over local species indices).
struct Component {
    species: Vec<usize>,
    equations: Vec<(usize, Sparse)>,
}

/// Splits the free species into connected components (union–find over the reactions).
fn components(net: &Network, free: &[bool]) -> Vec<Component> {
    let n = net.species.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for r in &net.reactions {
        for w in r.change.windows(2) {
            let (a, b) = (find(&mut parent, w[0].0), find(&mut parent, w[1].0));
            parent[a.max(b)] = a.min(b);
        }
    }
    // Components in order of their first species; local indices in species order.
    let mut comp_of = vec![usize::MAX; n];
    let mut local = vec![0u32; n];
    let mut comps: Vec<Component> = Vec::new();
    for i in (0..n).filter(|&i| free[i]) {
        let root = find(&mut parent, i);
        if comp_of[root] == usize::MAX {
            comp_of[root] = comps.len();
            comps.push(Component {
                species: Vec::new(),
                equations: Vec::new(),
            });
        }
        let c = &mut comps[comp_of[root]];
        local[i] = c.species.len() as u32;
        c.species.push(i);
    }
    for (j, r) in net.reactions.iter().enumerate() {
        let Some(&(first, _)) = r.change.first() else {
            continue;
        };
        let c = comp_of[find(&mut parent, first)];
        let eq: Sparse = r
            .change
            .iter()
            .map(|&(i, d)| (local[i], i128::from(d)))
            .collect();
        comps[c].equations.push((j, eq));
    }
    comps
}

/// The outcome of eliminating a component's equations: pivot equations in the order they
/// were taken (each holds its pivot species and species pivoted later or never), and the
/// species never pivoted, ascending.
struct Echelon {
    pivots: Vec<(u32, usize, Sparse)>,
    free: Vec<u32>,
}

/// Sparse fraction-free Gaussian elimination of the equations of a component with `n`
/// species. Pivot: the shortest active equation; in it, a species with coefficient ±1 if
/// there is one (no scaling of the other equations), then the one in fewest equations.
fn eliminate(n: usize, equations: &[(usize, Sparse)]) -> Result<Echelon, Overflow> {
    let mut eqs: Vec<Sparse> = equations.iter().map(|e| e.1.clone()).collect();
    let mut active = vec![true; eqs.len()];
    let mut uses: Vec<Vec<u32>> = vec![Vec::new(); n];
    let mut heap = BinaryHeap::new();
    for (e, eq) in eqs.iter().enumerate() {
        for &(v, _) in eq {
            uses[v as usize].push(e as u32);
        }
        heap.push(Reverse((eq.len(), e)));
    }
    let mut pivoted = vec![false; n];
    let mut pivots = Vec::new();
    while let Some(Reverse((len, e))) = heap.pop() {
        if !active[e] || eqs[e].len() != len {
            continue;
        }
        active[e] = false;
        if len == 0 {
            continue;
        }
        let &(v, _) = eqs[e]
            .iter()
            .min_by_key(|&&(v, c)| (c.abs() != 1, uses[v as usize].len(), v))
            .expect("a non-empty equation");
        let pivot = std::mem::take(&mut eqs[e]);
        for f in std::mem::take(&mut uses[v as usize]) {
            let f = f as usize;
            if !active[f] || coeff(&eqs[f], v) == 0 {
                continue;
            }
            let new = eliminate_with(&eqs[f], &pivot, v).ok_or(Overflow(Some(equations[f].0)))?;
            for &(w, _) in &new {
                if coeff(&eqs[f], w) == 0 {
                    uses[w as usize].push(f as u32);
                }
            }
            eqs[f] = new;
            heap.push(Reverse((eqs[f].len(), f)));
        }
        pivoted[v as usize] = true;
        pivots.push((v, equations[e].0, pivot));
    }
    let free = (0..n as u32).filter(|&v| !pivoted[v as usize]).collect();
    Ok(Echelon { pivots, free })
}

/// A rational number num/den, den > 0, in lowest terms.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Ratio {
    num: i128,
    den: i128,
}

impl Ratio {
    const ZERO: Ratio = Ratio { num: 0, den: 1 };

    fn new(num: i128, den: i128) -> Option<Ratio> {
        let g = gcd(num, den).max(1);
        let s: i128 = if den < 0 { -1 } else { 1 };
        Some(Ratio {
            num: s.checked_mul(num / g)?,
            den: s.checked_mul(den / g)?,
        })
    }

    fn add(self, o: Ratio) -> Option<Ratio> {
        let g = gcd(self.den, o.den);
        let num = self
            .num
            .checked_mul(o.den / g)?
            .checked_add(o.num.checked_mul(self.den / g)?)?;
        Ratio::new(num, (self.den / g).checked_mul(o.den)?)
    }

    fn mul_int(self, k: i128) -> Option<Ratio> {
        let g = gcd(k, self.den).max(1);
        Ratio::new(self.num.checked_mul(k / g)?, self.den / g)
    }
}

/// One basis vector of the null space per never-pivoted species f (l_f = 1, the other free
/// species 0), by back-substitution through the pivot equations in reverse order, made
/// integer and primitive. Only the pivot equations reached from f are evaluated.
fn null_basis(n: usize, ech: &Echelon) -> Result<Vec<Sparse>, Overflow> {
    // users[w]: pivot equations in which w appears beside their pivot.
    let mut users: Vec<Vec<u32>> = vec![Vec::new(); n];
    for (k, (v, _, eq)) in ech.pivots.iter().enumerate() {
        for &(w, _) in eq.iter().filter(|t| t.0 != *v) {
            users[w as usize].push(k as u32);
        }
    }
    let mut x = vec![Ratio::ZERO; n];
    let mut touched: Vec<u32> = Vec::new();
    let mut queued = vec![false; ech.pivots.len()];
    let mut basis = Vec::with_capacity(ech.free.len());
    for &f in &ech.free {
        x[f as usize] = Ratio { num: 1, den: 1 };
        touched.push(f);
        let mut heap: BinaryHeap<u32> = BinaryHeap::new();
        for &k in &users[f as usize] {
            if !std::mem::replace(&mut queued[k as usize], true) {
                heap.push(k);
            }
        }
        while let Some(k) = heap.pop() {
            queued[k as usize] = false;
            let (v, reaction, eq) = &ech.pivots[k as usize];
            let fault = Overflow(Some(*reaction));
            let mut sum = Ratio::ZERO;
            let mut own = 0;
            for &(w, c) in eq {
                if w == *v {
                    own = c;
                } else {
                    sum = sum
                        .add(x[w as usize].mul_int(c).ok_or(fault)?)
                        .ok_or(fault)?;
                }
            }
            // own·x_v + sum = 0.
            let xv = sum
                .num
                .checked_neg()
                .zip(sum.den.checked_mul(own))
                .and_then(|(num, den)| Ratio::new(num, den))
                .ok_or(fault)?;
            if xv.num == 0 {
                continue;
            }
            x[*v as usize] = xv;
            touched.push(*v);
            for &k2 in &users[*v as usize] {
                if !std::mem::replace(&mut queued[k2 as usize], true) {
                    heap.push(k2);
                }
            }
        }
        touched.sort_unstable();
        touched.dedup();
        let lcm = touched.iter().try_fold(1i128, |l, &w| {
            let d = x[w as usize].den;
            (l / gcd(l, d)).checked_mul(d)
        });
        let lcm = lcm.ok_or(Overflow(None))?;
        let mut vec: Sparse = Vec::with_capacity(touched.len());
        for &w in &touched {
            let r = x[w as usize];
            vec.push((w, r.num.checked_mul(lcm / r.den).ok_or(Overflow(None))?));
            x[w as usize] = Ratio::ZERO;
        }
        touched.clear();
        normalise(&mut vec);
        basis.push(vec);
    }
    Ok(basis)
}

/// The reduced echelon form of a null-space basis with the species taken from last to first:
/// (pivot species, vector) pairs, the vector zero at every other pivot species, normalised.
/// These are the null-space vectors that the reduced row echelon form of Sᵀ gives (module
/// docs), one per non-pivot species of that form.
fn echelon_basis(mut rows: Vec<Sparse>) -> Result<Vec<(u32, Sparse)>, Overflow> {
    let mut done: Vec<(u32, usize)> = Vec::new();
    let mut open: Vec<usize> = (0..rows.len()).collect();
    while !open.is_empty() {
        // The largest species still present in an open row.
        let (pos, &r) = open
            .iter()
            .enumerate()
            .max_by_key(|&(_, &r)| rows[r].last().map_or(0, |t| t.0))
            .expect("open rows");
        open.swap_remove(pos);
        let Some(&(c, _)) = rows[r].last() else {
            continue;
        };
        let pivot = rows[r].clone();
        for (other, row) in rows.iter_mut().enumerate() {
            if other != r && coeff(row, c) != 0 {
                *row = eliminate_with(row, &pivot, c).ok_or(Overflow(None))?;
            }
        }
        done.push((c, r));
    }
    let mut out: Vec<(u32, Sparse)> = done
        .into_iter()
        .map(|(c, r)| {
            let mut v = std::mem::take(&mut rows[r]);
            normalise(&mut v);
            (c, v)
        })
        .collect();
    out.sort_by_key(|e| e.0);
    Ok(out)
}

/// A law found by the semi-positive search, with the place the elimination produced it:
/// (0, species) for a species no reaction changes, (1 + column, count) for a combination made
/// while eliminating that reaction column.
struct Found {
    key: (usize, usize),
    terms: Sparse,
}

/// Fourier–Motzkin elimination for the minimal-support semi-positive laws of one component
/// (module docs), or None when the tableau passes [`TABLEAU_LIMIT`] rows or a coefficient
/// passes i128.
///
/// Rows are non-negative combinations l of unit vectors, kept with their support; a row's
/// entry in reaction column j is Σᵢ S_ij·lᵢ, computed when the column is reached. At column j
/// rows with a zero entry stay, each pair (p, q) of a positive and a negative row gives
/// (−q_j)·p + p_j·q, rows with a non-zero entry go, and a new row stays only if no row has a
/// support inside its own (strictly, or equal and earlier). Rows that were already there are
/// never removed by that rule (their supports were minimal and every new support contains a
/// parent's), so only new rows are tested.
fn semipositive(species: &[usize], equations: &[(usize, Sparse)]) -> Option<Vec<Found>> {
    let n = species.len();
    let mut rows: Vec<Found> = (0..n)
        .map(|i| Found {
            key: (0, species[i]),
            terms: vec![(i as u32, 1)],
        })
        .collect();
    let mut alive = vec![true; n];
    let mut count = n;
    // Rows containing each species (may also list rows that are gone).
    let mut containing: Vec<Vec<u32>> = (0..n).map(|i| vec![i as u32]).collect();
    let mut mark = vec![0u32; n];
    let mut stamp = 0u32;
    for (j, col) in equations {
        let mut touched: Vec<u32> = Vec::new();
        for &(i, _) in col {
            let list = &mut containing[i as usize];
            list.retain(|&r| alive[r as usize]);
            touched.extend_from_slice(list);
        }
        touched.sort_unstable();
        touched.dedup();
        let entry = |r: u32| -> Option<i128> {
            col.iter().try_fold(0i128, |s, &(i, nu)| {
                s.checked_add(nu.checked_mul(coeff(&rows[r as usize].terms, i))?)
            })
        };
        let mut pos = Vec::new();
        let mut neg = Vec::new();
        for &r in &touched {
            let e = entry(r)?;
            if e > 0 {
                pos.push((r, e));
            } else if e < 0 {
                neg.push((r, e));
            }
        }
        pos.sort_by_key(|&(r, _)| rows[r as usize].key);
        neg.sort_by_key(|&(r, _)| rows[r as usize].key);
        let staying = count - pos.len() - neg.len();
        let mut made: Vec<Found> = Vec::new();
        for &(p, ep) in &pos {
            for &(q, eq) in &neg {
                let mut terms = combine(-eq, &rows[p as usize].terms, ep, &rows[q as usize].terms)?;
                primitive(&mut terms);
                made.push(Found {
                    key: (1 + j, made.len()),
                    terms,
                });
                if staying + made.len() > TABLEAU_LIMIT {
                    return None;
                }
            }
        }
        for &(r, _) in pos.iter().chain(&neg) {
            alive[r as usize] = false;
            rows[r as usize].terms = Vec::new();
            count -= 1;
        }
        // Minimality of the new rows: against the rows that stay, then among themselves.
        let mut keep = vec![true; made.len()];
        for (c, row) in made.iter().enumerate() {
            stamp += 1;
            for &(i, _) in &row.terms {
                mark[i as usize] = stamp;
            }
            let inside = |t: &Sparse| {
                t.len() <= row.terms.len() && t.iter().all(|&(i, _)| mark[i as usize] == stamp)
            };
            let mut covered = false;
            for &(s, _) in &row.terms {
                let list = &mut containing[s as usize];
                list.retain(|&r| alive[r as usize]);
                covered |= list.iter().any(|&r| {
                    let t = &rows[r as usize].terms;
                    t[0].0 == s && inside(t)
                });
                if covered {
                    break;
                }
            }
            let beaten = made.iter().enumerate().any(|(o, other)| {
                o != c && inside(&other.terms) && (other.terms.len() < row.terms.len() || o < c)
            });
            keep[c] = !(covered || beaten);
        }
        for (row, k) in made.into_iter().zip(keep) {
            if !k {
                continue;
            }
            let id = rows.len() as u32;
            for &(i, _) in &row.terms {
                containing[i as usize].push(id);
            }
            rows.push(row);
            alive.push(true);
            count += 1;
        }
    }
    Some(
        rows.into_iter()
            .zip(alive)
            .filter_map(|(r, a)| a.then_some(r))
            .collect(),
    )
}

/// The laws of one component, in component coordinates, before the choice across
/// components: candidates of the semi-positive search and the echelon basis.
struct ComponentLaws {
    found: Vec<Found>,
    basis: Vec<(u32, Sparse)>,
}

/// Independence test within one component: vectors are compared through their coordinates at
/// the echelon basis's pivot species, where the null space projects one to one.
struct Chosen {
    coords: Vec<u32>,
    /// Fraction-free echelon rows of the vectors taken, by leading coordinate.
    by_lead: Vec<Option<Sparse>>,
    taken: usize,
}

impl Chosen {
    fn new(coords: Vec<u32>) -> Chosen {
        Chosen {
            by_lead: vec![None; coords.len()],
            coords,
            taken: 0,
        }
    }

    fn full(&self) -> bool {
        self.taken == self.coords.len()
    }

    /// Adds `v` if it is independent of the vectors added so far; returns whether it was.
    fn add(&mut self, v: &Sparse) -> Result<bool, Overflow> {
        let mut p: Sparse = self
            .coords
            .iter()
            .enumerate()
            .filter_map(|(k, &c)| {
                let x = coeff(v, c);
                (x != 0).then_some((k as u32, x))
            })
            .collect();
        while let Some(&(lead, _)) = p.first() {
            match &self.by_lead[lead as usize] {
                Some(row) => p = eliminate_with(&p, row, lead).ok_or(Overflow(None))?,
                None => {
                    self.by_lead[lead as usize] = Some(p);
                    self.taken += 1;
                    return Ok(true);
                }
            }
        }
        Ok(false)
    }
}

/// The conservation laws of `net` (module docs), each with one coefficient per species (zero
/// for clamped species), or an error naming the step at fault when a law cannot be held
/// exactly in 64-bit integers.
pub fn conservation_laws(net: &Network) -> Result<Vec<Vec<i64>>, Diagnostic> {
    let free: Vec<bool> = net.species.iter().map(|s| !s.clamped).collect();
    let comps = components(net, &free);
    let mut laws: Vec<ComponentLaws> = Vec::with_capacity(comps.len());
    for c in &comps {
        let n = c.species.len();
        let fail = |o: Overflow| too_large(net, o.0, &c.species);
        let ech = eliminate(n, &c.equations).map_err(fail)?;
        if ech.free.is_empty() {
            laws.push(ComponentLaws {
                found: Vec::new(),
                basis: Vec::new(),
            });
            continue;
        }
        let basis = echelon_basis(null_basis(n, &ech).map_err(fail)?).map_err(fail)?;
        let found = semipositive(&c.species, &c.equations).unwrap_or_default();
        laws.push(ComponentLaws { found, basis });
    }
    // The candidates in the order of the module docs, across components.
    // (sort key, component, index in the component's list)
    type Order = ((usize, i128, (usize, usize)), usize, usize);
    let mut found: Vec<Order> = Vec::new();
    for (c, l) in laws.iter().enumerate() {
        for (k, f) in l.found.iter().enumerate() {
            let sum = f.terms.iter().map(|t| t.1).sum::<i128>();
            found.push(((f.terms.len(), sum, f.key), c, k));
        }
    }
    found.sort_unstable_by_key(|o| o.0);
    let mut basis: Vec<(usize, usize, usize)> = Vec::new();
    for (c, l) in laws.iter().enumerate() {
        for (k, (pivot, _)) in l.basis.iter().enumerate() {
            basis.push((comps[c].species[*pivot as usize], c, k));
        }
    }
    basis.sort_unstable();
    let mut chosen: Vec<Chosen> = laws
        .iter()
        .map(|l| Chosen::new(l.basis.iter().map(|b| b.0).collect()))
        .collect();
    let mut out: Vec<(usize, &Sparse)> = Vec::new();
    let candidates = found
        .iter()
        .map(|&(_, c, k)| (c, &laws[c].found[k].terms))
        .chain(basis.iter().map(|&(_, c, k)| (c, &laws[c].basis[k].1)));
    for (c, v) in candidates {
        if chosen[c].full() {
            continue;
        }
        if chosen[c]
            .add(v)
            .map_err(|o| too_large(net, o.0, &comps[c].species))?
        {
            out.push((c, v));
        }
    }
    out.into_iter()
        .map(|(c, v)| full_law(net, &comps[c].species, v))
        .collect()
}

/// A law with one i64 coefficient per species, checked: every coefficient and the conserved
/// total Σ|lᵢ|·xᵢ(0) fit in i64.
fn full_law(net: &Network, species: &[usize], v: &Sparse) -> Result<Vec<i64>, Diagnostic> {
    let mut full = vec![0i64; net.species.len()];
    let mut total: i128 = 0;
    for &(k, x) in v {
        let i = species[k as usize];
        let Ok(c) = i64::try_from(x) else {
            return Err(coefficient_too_large(net, i, x));
        };
        full[i] = c;
        total = x
            .checked_abs()
            .and_then(|a| a.checked_mul(i128::from(net.species[i].initial)))
            .and_then(|t| t.checked_add(total))
            .unwrap_or(i128::MAX);
    }
    if total > i128::from(i64::MAX) {
        let &(k, _) = v
            .iter()
            .max_by_key(|&&(k, x)| {
                x.unsigned_abs()
                    .saturating_mul(net.species[species[k as usize]].initial as u128)
            })
            .expect("a law has a species");
        let i = species[k as usize];
        let s = &net.species[i];
        return Err(Diagnostic::at(
            &net.file,
            &net.source.source,
            s.span,
            format!(
                "the conserved total of the law {} passes the 64-bit integers copyloop counts in",
                super::law_text(net, &full)
            ),
        )
        .with_help(format!(
            "`{}` starts at {} molecules and weighs {} in that law; start with fewer molecules",
            s.name, s.initial, full[i]
        )));
    }
    Ok(full)
}

/// The step most to blame for a law coefficient that grows too large at species `i`: among the
/// reactions that change `i`, the one with the largest stoichiometric coefficient.
fn culprit(net: &Network, i: usize) -> Option<usize> {
    net.reactions
        .iter()
        .enumerate()
        .filter(|(_, r)| r.change.iter().any(|c| c.0 == i))
        .max_by_key(|(j, r)| {
            let big = r
                .reactants
                .iter()
                .chain(&r.products)
                .map(|t| t.1)
                .max()
                .unwrap_or(0);
            (big, Reverse(*j))
        })
        .map(|(j, _)| j)
}

fn at_reaction(net: &Network, j: usize, message: String) -> Diagnostic {
    Diagnostic::at(
        &net.file,
        &net.source.source,
        net.reactions[j].span,
        message,
    )
}

const HELP_LARGE: &str =
    "steps that make many molecules of one species from another (`A -> 1000 B`) \
     multiply the weights of a conserved total along a chain; fewer of them in a row, or a \
     smaller factor, keep the law within range";

fn coefficient_too_large(net: &Network, i: usize, x: i128) -> Diagnostic {
    let name = &net.species[i].name;
    let message = format!(
        "a conservation law of this network needs the coefficient {x} on `{name}`, more than \
         the 64-bit integers copyloop computes with"
    );
    let d = match culprit(net, i) {
        Some(j) => at_reaction(
            net,
            j,
            format!("step `{}`: {message}", net.reactions[j].label),
        ),
        None => Diagnostic::at(&net.file, &net.source.source, net.species[i].span, message),
    };
    d.with_help(HELP_LARGE)
}

/// The error for an i128 overflow while computing the laws of the component of `species`.
fn too_large(net: &Network, reaction: Option<usize>, species: &[usize]) -> Diagnostic {
    let message = "the conservation laws of this network need coefficients beyond 2^127; \
                   copyloop computes them exactly or not at all";
    let j = reaction.or_else(|| species.iter().find_map(|&i| culprit(net, i)));
    let d = match j {
        Some(j) => at_reaction(
            net,
            j,
            format!("step `{}`: {message}", net.reactions[j].label),
        ),
        None => Diagnostic::at(
            &net.file,
            &net.source.source,
            net.species[species[0]].span,
            message,
        ),
    };
    d.with_help(HELP_LARGE)
}
