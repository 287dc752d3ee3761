//! Generated networks for the scale benchmarks, from a fixed linear congruential sequence so
//! that every run measures the same files.

#![allow(dead_code)]

/// The next number below `k` of a linear congruential sequence (Knuth's MMIX constants).
fn draw(s: &mut u64, k: usize) -> usize {
    *s = s
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    ((*s >> 33) as usize) % k
}

/// `m` reactions over m/2 species, every species starting at 100: three in four a first-order
/// conversion Xa -> Xb (c = 1 /s), one in four a bimolecular step Xa + Xb -> Xc
/// (c = 0.001 /s). Each species is read by about two reactions whatever the size, so the
/// number of propensities an event recomputes does not grow with `m`.
pub fn random(m: usize) -> String {
    let n = (m / 2).max(2);
    let mut s = 0x2545_F491_4F6C_DD1D;
    let mut src = String::with_capacity(40 * (n + m));
    for i in 0..n {
        src.push_str(&format!("species X{i} = 100\n"));
    }
    for j in 0..m {
        let (a, b, c) = (draw(&mut s, n), draw(&mut s, n), draw(&mut s, n));
        if j % 4 == 3 && a != b {
            src.push_str(&format!("step r{j} X{a} + X{b} -> X{c} @ 0.001\n"));
        } else {
            src.push_str(&format!("step r{j} X{a} -> X{b} @ 1\n"));
        }
    }
    src
}

/// `m` reactions over m/2 species, every species starting at `x0` (≥ 1), that stay where
/// they start: reactions come in pairs of one step and its reverse at the same rate, three in
/// four pairs first-order conversions Xa <-> Xb (c = 1 /s), one in four bimolecular exchanges
/// Xa + Xb <-> Xc + Xd (c = 1/x0 /s, so that every propensity is about x0 /s). Every pair is
/// balanced when all counts are equal, so counts fluctuate around x0 for any length of run
/// (detailed balance), and each species is read by about two reactions at every size: runs of
/// a fixed number of events meet the same propensities at every size. With `decades` > 0 each
/// pair's rate constants are also multiplied by 10^(−decades·u), u uniform on [0, 1) per pair
/// (still balanced), so that propensities spread over that many orders of magnitude.
pub fn stationary(m: usize, x0: u64, decades: f64) -> String {
    let n = (m / 2).max(4);
    let c2 = 1.0 / x0 as f64;
    let mut s = 0x2545_F491_4F6C_DD1D;
    let mut src = String::with_capacity(40 * (n + m));
    for i in 0..n {
        src.push_str(&format!("species X{i} = {x0}\n"));
    }
    for j in 0..m / 2 {
        let f = 10f64.powf(-decades * draw(&mut s, 1 << 20) as f64 / (1 << 20) as f64);
        let mut pick = |avoid: &[usize]| loop {
            let k = draw(&mut s, n);
            if !avoid.contains(&k) {
                return k;
            }
        };
        let a = pick(&[]);
        let b = pick(&[a]);
        if j % 4 == 3 {
            let c = pick(&[a, b]);
            let d = pick(&[a, b, c]);
            let k = c2 * f;
            src.push_str(&format!(
                "step r{j} X{a} + X{b} <-> X{c} + X{d} @ {k:e}, {k:e}\n"
            ));
        } else {
            src.push_str(&format!("step r{j} X{a} <-> X{b} @ {f:e}, {f:e}\n"));
        }
    }
    src
}

/// A chain X0 -> X1 -> … of `n` species, each starting at 1.
pub fn chain(n: usize) -> String {
    let mut src = String::new();
    for i in 0..n {
        src.push_str(&format!("species X{i} = 1\n"));
    }
    for i in 0..n - 1 {
        src.push_str(&format!("step s{i} X{i} -> X{} @ 1\n", i + 1));
    }
    src
}

/// `m` steps A -> Bi that all change and read A.
pub fn star(m: usize) -> String {
    let mut src = String::from("species A = 100\n");
    for i in 0..m {
        src.push_str(&format!("species B{i} = 0\n"));
    }
    for i in 0..m {
        src.push_str(&format!("step s{i} A -> B{i} @ 1\n"));
    }
    src
}

/// One step and `m` params that nothing uses.
pub fn unused_params(m: usize) -> String {
    let mut src = String::from("species A = 10\nstep d A -> 0 @ 1\n");
    for i in 0..m {
        src.push_str(&format!("param p{i} = 1 /s\n"));
    }
    src
}

/// Peak resident memory of this process so far (VmHWM, bytes), after [`reset_peak`].
pub fn peak_bytes() -> Option<u64> {
    status_kb("VmHWM:").map(|kb| kb * 1024)
}

/// Resident memory now (VmRSS, bytes).
pub fn resident_bytes() -> Option<u64> {
    status_kb("VmRSS:").map(|kb| kb * 1024)
}

/// Resets the peak to the current resident size (Linux: writing 5 to /proc/self/clear_refs).
pub fn reset_peak() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn status_kb(key: &str) -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with(key))?;
    line[key.len()..]
        .trim()
        .trim_end_matches("kB")
        .trim()
        .parse()
        .ok()
}
