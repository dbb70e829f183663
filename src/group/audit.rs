//! The subtraction audit: can any small group's total be worked out from the published sums?
//!
//! Every mean a group report publishes together with its n is a *sum fact*: the sum of one
//! per-person quantity (a % change, a kg change, a week's % change …) over a known set of
//! people. An SD published with it adds the sum of squares over the same set, which has exactly
//! the same structure, so auditing the sums audits the squares too. A reader can add and
//! subtract published sums at will: the two intention-to-treat lines differ only on the people
//! without a recent weigh-in, a site's line can be subtracted from the program's, last month's
//! from this month's.
//!
//! Model: each sum fact is the 0/1 indicator vector of its *atoms* over all atoms. An atom is
//! one unknown number about one person (an opaque key; the same key in two facts means the
//! same number — e.g. the same person's same value in last month's and this month's report).
//! A reader can derive exactly the linear combinations of atoms in the row space of the facts.
//! The report is safe when every non-zero vector of that row space involves at least
//! `min_cell_size` people.
//!
//! Method ([`find_leak`]), exact over the rationals (fraction-free integer elimination):
//! 1. Atoms that lie in exactly the same facts form a *class*; every vector of the row space is
//!    constant on a class, so the facts are rows over classes.
//! 2. A vector that touches a class of `min_cell_size` or more people is safe. The row-space
//!    vectors that touch only small classes form a subspace `K`: with the large classes ordered
//!    first, the rows of the reduced row echelon form whose pivot lies in a small class span it.
//! 3. The smallest-support vectors of `K` are its circuits: for `d = dim K`, each circuit is the
//!    only vector (up to scale) of `K` that vanishes on some `d − 1` coordinates. All such
//!    coordinate sets are tried (above a work cap the check gives up *conservatively*: it
//!    reports the smallest basis vector as a leak). A circuit whose classes hold fewer than
//!    `min_cell_size` distinct people is a leak.
//!
//! [`protect`] withdraws facts (lowest priority first among those that can still be withdrawn,
//! i.e. not already published in an earlier release) until no leak is left that the earlier
//! releases did not already contain.

use std::collections::{BTreeMap, BTreeSet, HashMap};

/// One published sum: the atoms it adds up.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SumFact {
    /// Atom keys (duplicates are ignored).
    pub atoms: Vec<u64>,
    /// Can still be withdrawn (a fact of the release being audited); `false` for facts
    /// published earlier.
    pub removable: bool,
    /// Lower is withdrawn first.
    pub priority: u32,
}

/// A derivable combination involving too few people.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Leak {
    /// Number of distinct people the combination involves.
    pub people: usize,
    /// The facts the combination uses (indices into the audited list); empty when the audit
    /// gave up conservatively.
    pub facts: Vec<usize>,
}

/// Most coordinate sets tried per component before the audit gives up conservatively.
const WORK_CAP: u64 = 20_000;

fn gcd(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.abs(), b.abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

fn normalise(row: &mut [i128]) {
    let g = row.iter().fold(0, |g, &v| gcd(g, v));
    if g > 1 {
        for v in row.iter_mut() {
            *v /= g;
        }
    }
}

/// Reduced row echelon form over the rationals, rows kept as primitive integer vectors
/// (fraction-free elimination, each row divided by the gcd of its entries). Returns the
/// non-zero rows and their pivot columns, or `None` on integer overflow.
fn rref(mut rows: Vec<Vec<i128>>, ncols: usize) -> Option<(Vec<Vec<i128>>, Vec<usize>)> {
    let mut pivots = Vec::new();
    let mut r0 = 0;
    for col in 0..ncols {
        let Some(p) = (r0..rows.len()).find(|&i| rows[i][col] != 0) else {
            continue;
        };
        rows.swap(r0, p);
        let pivot = rows[r0].clone();
        for (i, row) in rows.iter_mut().enumerate() {
            if i == r0 || row[col] == 0 {
                continue;
            }
            let (a, b) = (pivot[col], row[col]);
            for (v, pv) in row.iter_mut().zip(&pivot) {
                *v = v.checked_mul(a)?.checked_sub(pv.checked_mul(b)?)?;
            }
            normalise(row);
        }
        normalise(&mut rows[r0]);
        if rows[r0][col] < 0 {
            rows[r0].iter_mut().for_each(|v| *v = -*v);
        }
        pivots.push(col);
        r0 += 1;
        if r0 == rows.len() {
            break;
        }
    }
    rows.truncate(r0);
    Some((rows, pivots))
}

fn rank(rows: Vec<Vec<i128>>, ncols: usize) -> Option<usize> {
    rref(rows, ncols).map(|(r, _)| r.len())
}

/// True when `v` is a combination of `rows` (`None` on overflow).
fn in_span(rows: &[Vec<i128>], v: &[i128], ncols: usize) -> Option<bool> {
    if v.iter().all(|&x| x == 0) {
        return Some(true);
    }
    let r = rank(rows.to_vec(), ncols)?;
    let mut with = rows.to_vec();
    with.push(v.to_vec());
    Some(rank(with, ncols)? == r)
}

/// The facts split into classes of atoms with identical membership.
struct Classes {
    /// Per class: the distinct people it holds.
    people: Vec<BTreeSet<u64>>,
    /// Per fact: its row over classes.
    rows: Vec<Vec<i128>>,
}

fn classes(facts: &[&SumFact], person_of: &dyn Fn(u64) -> u64) -> Classes {
    let mut membership: BTreeMap<u64, Vec<usize>> = BTreeMap::new();
    for (i, f) in facts.iter().enumerate() {
        let uniq: BTreeSet<u64> = f.atoms.iter().copied().collect();
        for a in uniq {
            membership.entry(a).or_default().push(i);
        }
    }
    let mut by_sig: BTreeMap<Vec<usize>, BTreeSet<u64>> = BTreeMap::new();
    for (a, sig) in membership {
        by_sig.entry(sig).or_default().insert(person_of(a));
    }
    let mut rows = vec![vec![0i128; by_sig.len()]; facts.len()];
    let mut people = Vec::with_capacity(by_sig.len());
    for (c, (sig, ps)) in by_sig.into_iter().enumerate() {
        for f in sig {
            rows[f][c] = 1;
        }
        people.push(ps);
    }
    Classes { people, rows }
}

fn weight(v: &[i128], people: &[BTreeSet<u64>]) -> usize {
    let mut all = BTreeSet::new();
    for (c, &x) in v.iter().enumerate() {
        if x != 0 {
            all.extend(people[c].iter().copied());
        }
    }
    all.len()
}

/// Calls `f` with every `k`-subset of `items` until it returns false.
fn subsets(items: &[usize], k: usize, f: &mut dyn FnMut(&[usize]) -> bool) {
    fn go(
        items: &[usize],
        k: usize,
        start: usize,
        cur: &mut Vec<usize>,
        f: &mut dyn FnMut(&[usize]) -> bool,
    ) -> bool {
        if cur.len() == k {
            return f(cur);
        }
        for i in start..items.len() {
            if items.len() - i < k - cur.len() {
                break;
            }
            cur.push(items[i]);
            let go_on = go(items, k, i + 1, cur, f);
            cur.pop();
            if !go_on {
                return false;
            }
        }
        true
    }
    go(items, k, 0, &mut Vec::new(), f);
}

fn binomial(n: usize, k: usize) -> u64 {
    let k = k.min(n.saturating_sub(k));
    let mut r: u64 = 1;
    for i in 0..k {
        r = r.saturating_mul((n - i) as u64) / (i as u64 + 1);
    }
    r
}

/// Small-support vectors of the row space of one component, smallest first: `(people,
/// vector over classes)`. `Err(v)` when the work cap was hit (v: the smallest basis vector of
/// `K`, to be treated as a leak).
/// `(people, vector over classes)`.
type SupportVector = (usize, Vec<i128>);

fn small_vectors(cl: &Classes, min: usize) -> Result<Vec<SupportVector>, Option<Vec<i128>>> {
    let ncls = cl.people.len();
    let small: Vec<bool> = cl.people.iter().map(|p| p.len() < min).collect();
    if !small.iter().any(|&s| s) {
        return Ok(Vec::new());
    }
    // Columns: large classes first.
    let order: Vec<usize> = (0..ncls)
        .filter(|&c| !small[c])
        .chain((0..ncls).filter(|&c| small[c]))
        .collect();
    let permuted: Vec<Vec<i128>> = cl
        .rows
        .iter()
        .map(|r| order.iter().map(|&c| r[c]).collect())
        .collect();
    let nlarge = small.iter().filter(|&&s| !s).count();
    let Some((rr, piv)) = rref(permuted, ncls) else {
        return Err(None);
    };
    // Basis of K, back in class coordinates.
    let k: Vec<Vec<i128>> = rr
        .iter()
        .zip(&piv)
        .filter(|&(_, &p)| p >= nlarge)
        .map(|(row, _)| {
            let mut v = vec![0i128; ncls];
            for (j, &c) in order.iter().enumerate() {
                v[c] = row[j];
            }
            v
        })
        .collect();
    let d = k.len();
    if d == 0 {
        return Ok(Vec::new());
    }
    let supp: Vec<usize> = (0..ncls).filter(|&c| k.iter().any(|v| v[c] != 0)).collect();
    if binomial(supp.len(), d - 1) > WORK_CAP {
        let smallest = k.iter().min_by_key(|v| weight(v, &cl.people)).cloned();
        return Err(smallest);
    }
    let mut found: BTreeMap<Vec<i128>, usize> = BTreeMap::new();
    let mut overflow = false;
    subsets(&supp, d - 1, &mut |z| {
        // K with the coordinates z first: rows pivoting outside z vanish on z.
        let rest: Vec<usize> = (0..ncls).filter(|c| !z.contains(c)).collect();
        let ord: Vec<usize> = z.iter().copied().chain(rest).collect();
        let rows: Vec<Vec<i128>> = k
            .iter()
            .map(|v| ord.iter().map(|&c| v[c]).collect())
            .collect();
        let Some((rr, piv)) = rref(rows, ncls) else {
            overflow = true;
            return false;
        };
        for (row, &p) in rr.iter().zip(&piv) {
            if p >= z.len() {
                let mut v = vec![0i128; ncls];
                for (j, &c) in ord.iter().enumerate() {
                    v[c] = row[j];
                }
                let w = weight(&v, &cl.people);
                if w < min && w > 0 {
                    found.insert(v, w);
                }
            }
        }
        true
    });
    if overflow {
        return Err(k.first().cloned());
    }
    let mut out: Vec<(usize, Vec<i128>)> = found.into_iter().map(|(v, w)| (w, v)).collect();
    out.sort();
    Ok(out)
}

/// Groups facts into connected components (facts sharing an atom).
fn components(facts: &[SumFact], active: &[bool]) -> Vec<Vec<usize>> {
    let mut parent: Vec<usize> = (0..facts.len()).collect();
    fn find(p: &mut [usize], x: usize) -> usize {
        let mut r = x;
        while p[r] != r {
            r = p[r];
        }
        let mut y = x;
        while p[y] != r {
            let n = p[y];
            p[y] = r;
            y = n;
        }
        r
    }
    let mut owner: HashMap<u64, usize> = HashMap::new();
    for (i, f) in facts.iter().enumerate() {
        if !active[i] {
            continue;
        }
        for &a in &f.atoms {
            match owner.get(&a) {
                Some(&j) => {
                    let (ri, rj) = (find(&mut parent, i), find(&mut parent, j));
                    if ri != rj {
                        parent[ri] = rj;
                    }
                }
                None => {
                    owner.insert(a, i);
                }
            }
        }
    }
    let mut groups: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for i in (0..facts.len()).filter(|&i| active[i]) {
        let r = find(&mut parent, i);
        groups.entry(r).or_default().push(i);
    }
    groups.into_values().collect()
}

/// The first leak among the active facts that the non-removable facts alone do not already
/// contain, if any.
pub fn find_leak(
    facts: &[SumFact],
    active: &[bool],
    person_of: &dyn Fn(u64) -> u64,
    min: usize,
) -> Option<Leak> {
    for comp in components(facts, active) {
        if !comp.iter().any(|&i| facts[i].removable) {
            continue;
        }
        let refs: Vec<&SumFact> = comp.iter().map(|&i| &facts[i]).collect();
        let cl = classes(&refs, person_of);
        let ncls = cl.people.len();
        let fixed: Vec<Vec<i128>> = comp
            .iter()
            .enumerate()
            .filter(|&(_, &i)| !facts[i].removable)
            .map(|(j, _)| cl.rows[j].clone())
            .collect();
        let vectors = match small_vectors(&cl, min) {
            Ok(v) => v,
            Err(v) => {
                // Gave up: conservatively a leak through every removable fact of the component.
                let people = v.map_or(0, |v| weight(&v, &cl.people));
                return Some(Leak {
                    people,
                    facts: Vec::new(),
                });
            }
        };
        for (people, v) in vectors {
            // Already derivable from earlier releases alone: nothing this release can change.
            if in_span(&fixed, &v, ncls) != Some(false) && !fixed.is_empty() {
                continue;
            }
            // The facts it rests on: those whose removal takes v out of the span.
            let mut used = Vec::new();
            for (j, &i) in comp.iter().enumerate() {
                let others: Vec<Vec<i128>> = cl
                    .rows
                    .iter()
                    .enumerate()
                    .filter(|&(jj, _)| jj != j)
                    .map(|(_, r)| r.clone())
                    .collect();
                if in_span(&others, &v, ncls) == Some(false) {
                    used.push(i);
                }
            }
            if used.is_empty() {
                // Several ways to derive it: every fact touching its classes is involved.
                used = comp
                    .iter()
                    .enumerate()
                    .filter(|&(j, _)| cl.rows[j].iter().zip(&v).any(|(&a, &b)| a != 0 && b != 0))
                    .map(|(_, &i)| i)
                    .collect();
            }
            return Some(Leak {
                people,
                facts: used,
            });
        }
    }
    None
}

/// Withdraws facts until [`find_leak`] finds nothing new. Returns per fact whether it stays
/// published (non-removable facts always stay).
///
/// The fact withdrawn for a leak is the removable fact the leak rests on with the lowest
/// priority (ties: the lowest index); when the audit gave up conservatively, the removable
/// fact of lowest priority overall.
pub fn protect(facts: &[SumFact], person_of: &dyn Fn(u64) -> u64, min: usize) -> Vec<bool> {
    let mut active: Vec<bool> = facts.iter().map(|f| !f.atoms.is_empty()).collect();
    while let Some(leak) = find_leak(facts, &active, person_of, min) {
        let pick = |cands: &mut dyn Iterator<Item = usize>| {
            cands
                .filter(|&i| active[i] && facts[i].removable)
                .min_by_key(|&i| (facts[i].priority, i))
        };
        let chosen = pick(&mut leak.facts.iter().copied()).or_else(|| pick(&mut (0..facts.len())));
        match chosen {
            Some(i) => active[i] = false,
            None => break,
        }
    }
    // Empty facts (a sum over nobody) are published as they are: they state nothing.
    active
        .iter()
        .zip(facts)
        .map(|(&a, f)| a || f.atoms.is_empty() || !f.removable)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fact(atoms: &[u64]) -> SumFact {
        SumFact {
            atoms: atoms.to_vec(),
            removable: true,
            priority: 0,
        }
    }

    fn me(a: u64) -> u64 {
        a
    }

    #[test]
    fn nested_sums_leak_their_difference() {
        // {1..12} and {1..11}: person 12 alone.
        let a: Vec<u64> = (1..=12).collect();
        let b: Vec<u64> = (1..=11).collect();
        let facts = vec![fact(&a), fact(&b)];
        let leak = find_leak(&facts, &[true, true], &me, 11).expect("a leak");
        assert_eq!(leak.people, 1);
        let kept = protect(&facts, &me, 11);
        assert_eq!(kept.iter().filter(|&&k| k).count(), 1);
    }

    #[test]
    fn disjoint_large_sums_and_their_union_are_safe() {
        let a: Vec<u64> = (1..=12).collect();
        let b: Vec<u64> = (13..=30).collect();
        let all: Vec<u64> = (1..=30).collect();
        let facts = vec![fact(&a), fact(&b), fact(&all)];
        assert_eq!(find_leak(&facts, &[true; 3], &me, 11), None);
    }

    #[test]
    fn overlap_that_is_not_derivable_is_not_a_leak() {
        // A∪B and B∪C with |B| = 2: the sum over B is not derivable from the two alone.
        let ab: Vec<u64> = (1..=14).collect();
        let bc: Vec<u64> = (13..=26).collect();
        let facts = vec![fact(&ab), fact(&bc)];
        assert_eq!(find_leak(&facts, &[true; 2], &me, 11), None);
        // Adding A∪B∪C makes B = (A∪B) + (B∪C) − (A∪B∪C) derivable.
        let all: Vec<u64> = (1..=26).collect();
        let facts = vec![fact(&ab), fact(&bc), fact(&all)];
        let leak = find_leak(&facts, &[true; 3], &me, 11).expect("a leak");
        assert_eq!(leak.people, 2);
    }

    #[test]
    fn difference_of_two_people_counts_as_a_leak() {
        // x1 + S and x2 + S (one person swapped, S shared): x1 − x2 involves two people.
        let s: Vec<u64> = (10..=30).collect();
        let mut a = s.clone();
        a.push(1);
        let mut b = s;
        b.push(2);
        let facts = vec![fact(&a), fact(&b)];
        assert_eq!(find_leak(&facts, &[true; 2], &me, 11).unwrap().people, 2);
    }

    #[test]
    fn earlier_leaks_are_not_blamed_on_this_release() {
        let a: Vec<u64> = (1..=12).collect();
        let b: Vec<u64> = (1..=11).collect();
        let mut facts = vec![fact(&a), fact(&b)];
        facts[0].removable = false;
        facts[1].removable = false;
        let c: Vec<u64> = (40..=60).collect();
        facts.push(fact(&c));
        assert_eq!(find_leak(&facts, &[true; 3], &me, 11), None);
        assert_eq!(protect(&facts, &me, 11), vec![true; 3]);
    }

    #[test]
    fn people_not_atoms_are_counted() {
        // Two atoms per person (e.g. two values): 6 people, 12 atoms, still fewer than 11.
        let person = |a: u64| a / 2;
        let a: Vec<u64> = (0..40).collect();
        let b: Vec<u64> = (12..40).collect();
        let facts = vec![fact(&a), fact(&b)];
        assert_eq!(
            find_leak(&facts, &[true; 2], &person, 11).unwrap().people,
            6
        );
    }
}
