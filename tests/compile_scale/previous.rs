//! The compiler's analysis as it was before it was made near-linear (dense stoichiometry,
//! quadratic dependency graph, dense exact elimination and a dense Fourier–Motzkin tableau),
//! kept verbatim as the reference the new one must reproduce. Only `net.stoichiometry` is
//! replaced by this module's own dense matrix.
#![allow(dead_code)]

use copyloop::network::Network;

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
    let s = stoichiometry(net);
    let a: Vec<Vec<i128>> = free
        .iter()
        .map(|&i| s[i].iter().map(|&x| x as i128).collect())
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
