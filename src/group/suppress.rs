//! Small-cell suppression for count tables linked by additive relations.
//!
//! A group report is, for this purpose, a set of count *cells* (enrolled, withdrawn, people
//! reaching 5 % loss, people in a histogram bin, …) and a set of *relations* `total = Σ parts`
//! that a reader can use to recover a hidden cell by subtraction (enrolled = active + withdrawn;
//! the histogram bins add up to the number started; the program's count is the sum over the
//! sites' counts; …). The policy follows the CMS Cell Size Suppression Policy (Centers for
//! Medicare & Medicaid Services, 2017 version):
//! no count from 1 to `min_cell_size − 1` is shown, 0 may be shown, and no hidden count may be
//! derivable from the shown ones. One narrowing of "0 may be shown" (project rule): a 0 counted
//! among a group whose own size is hidden as small ([`CellTable::set_group`]: "0 not on a
//! plateau" of the 1 … min − 1 with a plateau verdict) is hidden too, since it says the same of
//! every one of those few people (attribute disclosure by homogeneity); a 0 among a group of
//! min or more stays shown.
//!
//! The algorithm ([`CellTable::apply`]):
//! 1. *Primary suppression*: hide every cell with `1 ≤ value < min_cell_size`, and every 0
//!    whose group is such a cell (a *guarded zero*).
//! 2. *Complementary suppression*: in every relation with exactly one hidden member, hide one
//!    more member, repeated until no relation has exactly one hidden member.
//! 3. *Linear check*: a hidden cell can also be recovered by combining several relations (the
//!    program total from one split, then a site count by subtracting the others). The hidden
//!    cells are treated as unknowns of the linear system formed by all relations; a hidden
//!    non-zero cell or guarded zero whose value the system determines (Gaussian elimination,
//!    reduced row echelon form) gets one more complement, and steps 2–3 repeat. Each round
//!    hides at least one more cell, so the loop ends.
//!
//! The complement is the shown member with the lowest *priority* (callers rank cells so that
//! key denominators such as "started" survive), then the first registered, preferring non-zero
//! cells (a hidden zero protects little). Not the smallest value, the usual "next-smallest
//! cell" rule (common practice): the algorithm is published, and a complement known to be the
//! smallest candidate is known to be no larger than any candidate left shown, a bound that
//! narrowed the small cell beside it ([`CellTable::rank`]). A shown 0 is taken only where no non-zero cell is left to
//! take: a guarded zero found from shown zeros alone (its program's count 0, every other
//! section's 0) can only be covered by one of them.

/// Handle to one cell of a [`CellTable`].
pub type CellId = usize;

#[derive(Debug, Clone)]
struct Cell {
    value: u64,
    priority: u8,
    suppressed: bool,
    /// A primary cell whose "1 to min − 1" bound is not printed (see `apply_with_ranges`).
    unbounded: bool,
    /// Never printed, but derivable in principle: the difference of two printed counts whose
    /// people are nested (see [`CellTable::add_difference`]). Always hidden, never a
    /// complement, and never given a printed "1 to min − 1" bound.
    phantom: bool,
    /// A band the report prints for this hidden cell whatever the other figures give (see
    /// [`CellTable::set_band`]): the reader knows the count lies in it, so the range programs
    /// do too.
    band: Option<(u64, u64)>,
    /// The cell counting the people this cell counts a share of (see [`CellTable::set_group`]).
    group: Option<CellId>,
}

/// One additive relation `total = Σ parts` between cells.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Relation {
    /// The cell that is the sum.
    pub total: CellId,
    /// The cells that add up to it.
    pub parts: Vec<CellId>,
}

impl Relation {
    fn members(&self) -> impl Iterator<Item = CellId> + '_ {
        std::iter::once(self.total).chain(self.parts.iter().copied())
    }
}

/// Count cells plus the relations between them, and which cells are hidden.
#[derive(Debug, Clone, Default)]
pub struct CellTable {
    cells: Vec<Cell>,
    relations: Vec<Relation>,
    /// Per cell: the smallest and largest value seen at a point the reader cannot rule out
    /// (a solution of a range program; at first the true values), see
    /// [`CellTable::apply_with_ranges`].
    seen: Vec<(f64, f64)>,
    /// Work spent on this table's linear algebra and range programs, in [`WORK_LIMIT`]'s units.
    work: f64,
    /// Whether [`WORK_LIMIT`] was reached: every cell is then hidden and no range is given.
    exhausted: bool,
    /// Whether the relations left with one hidden member take their complement by looking
    /// ahead ([`CellTable::lookahead_complement`]) rather than each its own best.
    lookahead: bool,
    /// Cells of this rank and above are the report's headline counts (enrolment, the
    /// denominators): see [`CellTable::set_headline_rank`]. `None`: no such variant is run.
    headline_rank: Option<u8>,
    /// Whether complements are chosen by what hiding them costs in headline counts
    /// ([`CellTable::cost`]) rather than by each cell's own rank.
    protect: bool,
    /// Each cell's cost as a complement while `protect` is set: the highest rank among the
    /// shown cells its hiding forces through relations whose other members are shown zeros
    /// (refreshed by [`CellTable::refresh_costs`]).
    cost: Vec<u8>,
    /// Set while [`CellTable::ranges`] computes the printed ranges: every hidden cell is then
    /// boxed as a reader knows it (0 or more, or its printed band), never by the primary
    /// rule's 1 … min − 1, which only the primary cells have and so would tell which they are.
    printing: bool,
    /// Cells taken as complements only when no other cell will do (empty: none), set by the
    /// search of [`CellTable::apply_with_ranges`] for a result that shows a headline count the
    /// greedy choices hid.
    keep: Vec<bool>,
    /// Per cell, whether the relations alone determine it (every cell hidden), computed when
    /// first needed by [`CellTable::guarded_zeros`]; reset when a relation is added.
    fixed: Option<Vec<bool>>,
}

/// Most work the suppression of one table may take, in multiply-adds as counted by
/// [`CellTable::spend`]: rows × hidden cells² for each elimination that finds the cells the
/// shown ones determine, and relations × cells² for each range program (an upper bound of a
/// dense elimination; the simplex's real work is usually less). About 10–40 s on one core of
/// the 2-core benchmark machine (program choice: a monthly cron run must end). A program split
/// so finely that its table needs more (220 people in 20 sites of 11: 2,090 cells, 14,249
/// relations, 1.5 s per elimination and one more hidden cell per elimination, hours in all) has
/// nearly every count hidden anyway; past the limit every count of the table is withheld,
/// which is always safe, and the group report says why. Counted, not timed, so a run's output
/// does not depend on the machine.
pub const WORK_LIMIT: f64 = 2.0e11;

/// Most hidden counts [`CellTable::apply_with_ranges`] tries to keep shown, one at a time,
/// after the greedy choices hid them (each try is two more runs of the suppression). Program
/// choice: the highest ranked are enrolment, started and with a recent weigh-in of the program
/// and the sections; twelve covers those of the program and three sections, or reaches the
/// milestones and bins when the headline is shown.
const KEEP_TRIES: usize = 12;

impl CellTable {
    /// An empty table.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds a count cell. Lower `priority` cells are chosen first as complements.
    pub fn add_cell(&mut self, value: u64, priority: u8) -> CellId {
        self.cells.push(Cell {
            value,
            priority,
            suppressed: false,
            unbounded: false,
            phantom: false,
            band: None,
            group: None,
        });
        self.seen.push((value as f64, value as f64));
        self.cells.len() - 1
    }

    /// Says that cell `c` counts some of the people cell `group` counts ("on a plateau" among
    /// those "with a plateau verdict"; "reached 5 % loss" among those "started"). When the
    /// group's own count is hidden as small (1 … min − 1), a 0 in `c` is hidden too: printed,
    /// it would tell the sponsor that none of those few people is counted in `c` (a site of 5
    /// people with "0 reached 5 % loss" says something of each of the 5). Such a *guarded zero*
    /// is then treated like a hidden non-zero count: it gets complements when the shown cells
    /// determine it, and its range must leave at least three values. A 0 whose group is 0 or
    /// at least min stays shown (CMS Cell Size Suppression Policy 2017: 0 may be shown).
    pub fn set_group(&mut self, c: CellId, group: CellId) {
        self.cells[c].group = Some(group);
    }

    /// Whether cell `c` is 0 and its group's count ([`CellTable::set_group`]) is 1 … min − 1:
    /// such a 0 is hidden.
    fn zero_in_small_group(&self, c: CellId, min_cell_size: u32) -> bool {
        let cell = &self.cells[c];
        cell.value == 0
            && cell.group.is_some_and(|g| {
                let group = &self.cells[g];
                !group.phantom && group.value >= 1 && group.value < u64::from(min_cell_size)
            })
    }

    /// Per cell, whether it is a *guarded zero*: a 0 in a small group
    /// ([`CellTable::zero_in_small_group`]) that the relations alone do not fix. Such a 0 is
    /// kept unknown like a hidden non-zero count (complements when the shown cells determine
    /// it, a range of at least three values). A 0 that the relations give whatever is shown —
    /// "on a plateau" linked as the same people as "with a plateau verdict", so "not on a
    /// plateau" is their difference — is hidden but needs no complement: no printed figure
    /// tells it, and no cell hidden could untell it (its range is not printed either, see
    /// [`CellTable::ranges`]).
    fn guarded_zeros(&mut self, min_cell_size: u32) -> Vec<bool> {
        let mut out: Vec<bool> = (0..self.cells.len())
            .map(|c| self.zero_in_small_group(c, min_cell_size))
            .collect();
        if out.iter().any(|&g| g) {
            if self.fixed.is_none() {
                let n = self.cells.len() as f64;
                self.spend(self.relations.len() as f64 * n * n);
                self.fixed = Some(determined(&vec![true; self.cells.len()], &self.relations));
            }
            let fixed = self.fixed.as_ref().expect("just computed");
            for (g, &f) in out.iter_mut().zip(fixed) {
                *g &= !f;
            }
        }
        out
    }

    /// Links two cells whose people are nested (`inner`'s people are all counted in `outer`)
    /// by a hidden difference cell, `outer = inner + difference`, so that the difference — a
    /// count of people a reader gets by subtraction ("enrolled" minus "with adherence data")
    /// — is protected like any other count. The difference cell is never printed.
    ///
    /// # Panics
    /// If `inner` is larger than `outer`.
    pub fn add_difference(&mut self, outer: CellId, inner: CellId) -> CellId {
        let value = self.cells[outer].value - self.cells[inner].value;
        self.cells.push(Cell {
            value,
            priority: 0,
            suppressed: true,
            unbounded: true,
            phantom: true,
            band: None,
            group: None,
        });
        self.seen.push((value as f64, value as f64));
        let d = self.cells.len() - 1;
        self.add_relation(outer, vec![inner, d]);
        d
    }

    /// The complement rank given to a cell.
    pub fn priority(&self, c: CellId) -> u8 {
        self.cells[c].priority
    }

    /// Marks cells of rank `rank` and above as the report's headline counts. The suppression
    /// then also tries choosing every complement so that these are hidden only when no other
    /// cell will do, and keeps that result when it hides fewer important counts (see
    /// [`CellTable::apply_with_ranges`]). Only the choice of complements changes: every result
    /// passes the same checks.
    pub fn set_headline_rank(&mut self, rank: u8) {
        self.headline_rank = Some(rank);
    }

    /// What hiding `c` as a complement costs: its own rank, or while `protect` is set, the
    /// highest rank among the cells it is tied to (see [`CellTable::refresh_costs`]).
    fn cost(&self, c: CellId) -> u8 {
        if self.protect {
            self.cost.get(c).copied().unwrap_or(self.cells[c].priority)
        } else {
            self.cells[c].priority
        }
    }

    /// Whether `c` is taken as a complement only when no other cell will do (see
    /// [`CellTable::apply_with_ranges`]'s search).
    fn kept(&self, c: CellId) -> bool {
        self.keep.get(c).copied().unwrap_or(false)
    }

    /// Order in which shown cells are taken as complements (least first): a kept cell last,
    /// then a headline cell while `protect` is set, then non-zero before zero, then cost and
    /// id. Not the value: a complement taken as the smallest candidate is known to be no larger
    /// than any candidate left shown, and that bound narrowed the small cell beside it
    /// (`[10, 11, 11 | 32]`: hidden 10 and 11, the other 11 shown, so the two hidden cells
    /// were 10 + 11 or 11 + 10, and the small one 10 or 11).
    fn rank(&self, c: CellId) -> (bool, bool, bool, u8, CellId) {
        let cell = &self.cells[c];
        let cost = self.cost(c);
        let headline = self.protect && self.headline_rank.is_some_and(|h| cost >= h);
        (self.kept(c), headline, cell.value == 0, cost, c)
    }

    /// Recomputes each cell's cost for `protect`. A relation whose members other than two
    /// shown cells are all shown zeros makes the two equal: hiding either one alone would let
    /// a reader read it off the other, so hiding one hides both (a site's "did not reach 5 %"
    /// when nobody there reached it is its number started). Cells so tied (transitively) cost
    /// the highest rank among them.
    fn refresh_costs(&mut self) {
        if !self.protect {
            return;
        }
        let n = self.cells.len();
        let mut parent: Vec<usize> = (0..n).collect();
        fn find(p: &mut [usize], mut x: usize) -> usize {
            while p[x] != x {
                p[x] = p[p[x]];
                x = p[x];
            }
            x
        }
        for r in &self.relations {
            let open: Vec<CellId> = r
                .members()
                .filter(|&m| self.cells[m].suppressed || self.cells[m].value != 0)
                .collect();
            if open.len() == 2 && open.iter().all(|&m| !self.cells[m].suppressed) {
                let (a, b) = (find(&mut parent, open[0]), find(&mut parent, open[1]));
                if a != b {
                    parent[a] = b;
                }
            }
        }
        let mut top = vec![0u8; n];
        for c in 0..n {
            let root = find(&mut parent, c);
            top[root] = top[root].max(self.cells[c].priority);
        }
        self.cost = (0..n).map(|c| top[find(&mut parent, c)]).collect();
    }

    /// Adds the relation `total = Σ parts`.
    ///
    /// # Panics
    /// In debug builds, if the values do not add up (a bug in the caller's bookkeeping).
    pub fn add_relation(&mut self, total: CellId, parts: Vec<CellId>) {
        debug_assert_eq!(
            self.cells[total].value,
            parts.iter().map(|&p| self.cells[p].value).sum::<u64>(),
            "relation does not add up"
        );
        self.relations.push(Relation { total, parts });
        self.fixed = None;
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.cells.len()
    }

    /// Adds `units` of work; false (and the table marked exhausted) once [`WORK_LIMIT`] is
    /// passed.
    fn spend(&mut self, units: f64) -> bool {
        self.work += units;
        if self.work > WORK_LIMIT {
            self.exhausted = true;
        }
        !self.exhausted
    }

    /// Whether the suppression gave up at [`WORK_LIMIT`] and withheld every count.
    pub fn exhausted(&self) -> bool {
        self.exhausted
    }

    /// Past [`WORK_LIMIT`]: every cell hidden, no range given.
    fn give_up(&mut self) -> Vec<Option<(u64, u64)>> {
        self.exhausted = true;
        self.hide_all();
        vec![None; self.cells.len()]
    }

    /// Hides every cell (the safe answer when the suppression cannot finish).
    fn hide_all(&mut self) {
        for c in &mut self.cells {
            c.suppressed = true;
        }
    }

    /// True when the table has no cells.
    pub fn is_empty(&self) -> bool {
        self.cells.is_empty()
    }

    /// The value of a cell (shown or not).
    pub fn value(&self, c: CellId) -> u64 {
        self.cells[c].value
    }

    /// True when the cell must not be shown.
    pub fn is_suppressed(&self, c: CellId) -> bool {
        self.cells[c].suppressed
    }

    /// The relations of the table.
    pub fn relations(&self) -> &[Relation] {
        &self.relations
    }

    /// Marks a cell hidden before (or between runs of) [`CellTable::apply`], e.g. because an
    /// earlier release would give it away by subtraction.
    pub fn force_hide(&mut self, c: CellId) {
        self.cells[c].suppressed = true;
    }

    /// Hides cell `c` and publishes the band `lo ..= hi` (which must hold its value) in its
    /// place: the range programs then take it as known, so every range and the narrow check
    /// allow for it, and [`CellTable::apply_with_ranges`] drops it again when it narrows a
    /// hidden count to fewer than three values. The points seen before are forgotten (a band
    /// can rule them out).
    pub fn set_band(&mut self, c: CellId, lo: u64, hi: u64) {
        debug_assert!(lo <= self.cells[c].value && self.cells[c].value <= hi);
        self.cells[c].suppressed = true;
        self.cells[c].band = Some((lo, hi));
        for (s, cell) in self.seen.iter_mut().zip(&self.cells) {
            *s = (cell.value as f64, cell.value as f64);
        }
    }

    /// Takes back the band of cell `c` ([`CellTable::set_band`]): the reader is no longer
    /// told it.
    pub fn drop_band(&mut self, c: CellId) {
        self.cells[c].band = None;
    }

    /// True when the cell is hidden because its own value is 1 … min − 1 (primary
    /// suppression), so that "1 to min − 1" may be printed for it.
    pub fn is_primary(&self, c: CellId, min_cell_size: u32) -> bool {
        let v = self.cells[c].value;
        self.cells[c].suppressed && !self.cells[c].phantom && v >= 1 && v < u64::from(min_cell_size)
    }

    /// Suppression plus the interval audit: [`CellTable::apply`], then the range every hidden
    /// cell can take given the shown cells, the relations and the published rule that a
    /// primary-suppressed cell lies in 1 … min − 1 (the printed ranges, [`CellTable::ranges`],
    /// leave that rule out: it would tell which cells are primary). When a hidden
    /// non-zero cell is narrowed to fewer than three possible values, the "1 … min − 1" bound
    /// of the primary cells sharing a relation with it is no longer used (their ranges then
    /// follow from the other figures alone); if there is none, the cell gets one more
    /// complement. The whole check repeats until no cell is narrowed. Returns the ranges
    /// (`None` for shown cells).
    ///
    /// Work saved (the result is the same as solving two programs per hidden cell each round):
    /// every solution of a program is a point the reader cannot rule out, so each cell keeps
    /// the smallest and largest value seen at such points (the true values are one). A cell
    /// seen at two values three whole numbers apart is proven wide without a program of its
    /// own. Each round only hides more cells or drops bounds, so the set of points the reader
    /// cannot rule out only grows and what was seen stays valid for every later round (and
    /// for later calls on this table). Programs are solved only for cells not yet proven
    /// wide: first one program pushing all of them up and one pushing them down, repeated
    /// while that proves some, then one cell at a time.
    pub fn apply_with_ranges(&mut self, min_cell_size: u32) -> Vec<Option<(u64, u64)>> {
        // Two ways of choosing the complements of the relations left with one hidden member;
        // each result passes the whole audit, and the one that hides less (fewer cells of the
        // highest rank, then of the next …) is kept. Neither is better on every table: looking
        // ahead kept the 300-person demo in five sites' enrolment and weight change (each
        // relation's own best hid them), and lost the 1000-person one's.
        //
        // With a headline rank set, two more runs choose every complement by what hiding it
        // costs in headline counts ([`CellTable::rank`]): each relation's cheapest cell by
        // its own rank had, in a first month where everyone was still active and nobody in a
        // site had reached 5 %, hidden that site's "did not reach 5 %" — its number started —
        // and through it the whole program's enrolment. They too are kept only when they hide
        // fewer important counts, so the result is never worse by that measure.
        let base = self.work;
        let (lookahead, protect) = (self.lookahead, self.protect);
        let mut modes = vec![(lookahead, false), (!lookahead, false)];
        if self.headline_rank.is_some() {
            modes.extend([(false, true), (true, true)]);
        }
        let mut work = base;
        type Ranges = Vec<Option<(u64, u64)>>;
        let mut best: Option<(CellTable, Ranges)> = None;
        for (la, pr) in modes {
            let mut t = self.clone();
            t.lookahead = la;
            t.protect = pr;
            let ranges = t.apply_with_ranges_once(min_cell_size);
            work += t.work - base;
            let better = match &best {
                None => true,
                Some((b, _)) => match (b.exhausted, t.exhausted) {
                    (true, false) => true,
                    (false, false) => t.hidden_score() < b.hidden_score(),
                    _ => false,
                },
            };
            if better {
                best = Some((t, ranges));
            }
        }
        let (mut t, mut ranges) = best.expect("at least one mode");
        // Then a search over counts the chosen result hides though they are not small
        // themselves: each in turn (highest rank first, at most `KEEP_TRIES`) is kept — taken
        // as a complement only when no other cell will do — together with those kept before
        // and every count of its rank or above the chosen result shows (not to lose one for
        // another), and the suppression runs again both ways by headline cost. A result that
        // hides fewer cells of the highest rank, then of the next … (`hidden_score`) replaces
        // the chosen one. The greedy choices cannot trade one headline count for several lower
        // ones: in a month with 8 active people without a recent weigh-in (active 277, with
        // one 269, withdrawn 23), keeping "with a recent weigh-in" means hiding "active",
        // "withdrawn" and the adherence n (the same people as active) instead, and every greedy
        // way hid it through started = with + without. Only the choice changes: every result
        // passes the same checks. The search stops once it has spent twice the work of the
        // four runs above, and is skipped once the work spent nears the limit, so a large
        // table keeps its budget for the checks.
        let modes_work = work - base;
        if self.headline_rank.is_some() && !t.exhausted && work < WORK_LIMIT / 8.0 {
            let mut order: Vec<CellId> = (0..self.cells.len())
                .filter(|&c| {
                    let cell = &self.cells[c];
                    !cell.suppressed && !cell.phantom && cell.value >= u64::from(min_cell_size)
                })
                .collect();
            order.sort_by_key(|&c| (std::cmp::Reverse(self.cells[c].priority), c));
            let mut keep = t.keep.clone();
            keep.resize(self.cells.len(), false);
            let mut tries = 0;
            for c in order {
                if !t.cells[c].suppressed {
                    continue;
                }
                if tries == KEEP_TRIES
                    || work - base - modes_work >= (2.0 * modes_work).max(WORK_LIMIT / 1000.0)
                    || work >= WORK_LIMIT / 8.0
                {
                    break;
                }
                tries += 1;
                let p = self.cells[c].priority;
                let mut trial = keep.clone();
                trial[c] = true;
                for (x, k) in trial.iter_mut().enumerate() {
                    if self.cells[x].priority >= p && !t.cells[x].suppressed {
                        *k = true;
                    }
                }
                self.close_keep(&mut trial, min_cell_size);
                for la in [false, true] {
                    let mut u = self.clone();
                    u.keep = trial.clone();
                    u.lookahead = la;
                    u.protect = true;
                    let r = u.apply_with_ranges_once(min_cell_size);
                    work += u.work - base;
                    if !u.exhausted && u.hidden_score() < t.hidden_score() {
                        keep = trial.clone();
                        (t, ranges) = (u, r);
                    }
                }
            }
        }
        *self = t;
        self.lookahead = lookahead;
        self.protect = protect;
        self.work = work;
        ranges
    }

    /// Adds to `keep` every cell whose hiding would force hiding a kept one: a relation none
    /// of whose members is hidden now or small (1 … min − 1, hidden by the primary rule) and
    /// whose members other than that cell are all kept and non-zero (no zero there to take as
    /// the complement instead). "Without a recent weigh-in" beside a kept number started and a
    /// kept "with a recent weigh-in" (started = with + without) is kept too: hidden, it would
    /// take one of them. Repeated until nothing is added.
    fn close_keep(&self, keep: &mut [bool], min_cell_size: u32) {
        let min = u64::from(min_cell_size);
        let closed = |c: &Cell| c.suppressed || (c.value >= 1 && c.value < min);
        loop {
            let mut added = false;
            for r in &self.relations {
                if r.members().any(|m| closed(&self.cells[m])) {
                    continue;
                }
                let open: Vec<CellId> = r.members().filter(|&m| !keep[m]).collect();
                if let [x] = open[..]
                    && r.members().all(|m| m == x || self.cells[m].value != 0)
                {
                    keep[x] = true;
                    added = true;
                }
            }
            if !added {
                break;
            }
        }
    }

    /// Hidden cells (not differences) by rank, highest rank first: compared lexicographically,
    /// less is better.
    fn hidden_score(&self) -> Vec<usize> {
        let top = self.cells.iter().map(|c| c.priority).max().unwrap_or(0);
        (0..=top)
            .rev()
            .map(|p| {
                self.cells
                    .iter()
                    .filter(|c| c.suppressed && !c.phantom && c.priority == p)
                    .count()
            })
            .collect()
    }

    fn apply_with_ranges_once(&mut self, min_cell_size: u32) -> Vec<Option<(u64, u64)>> {
        loop {
            self.apply(min_cell_size);
            if self.exhausted {
                return self.give_up();
            }
            let narrow = self.first_narrow(min_cell_size);
            // A program cut short proves nothing wide: give up rather than trust it.
            if self.exhausted {
                return self.give_up();
            }
            let Some(u) = narrow else {
                let ranges = self.ranges(min_cell_size);
                return if self.exhausted {
                    self.give_up()
                } else {
                    ranges
                };
            };
            // First stop printing "1 to min − 1" for the primary cells linked to it through
            // hidden cells (their bounds add up); only then hide one more cell.
            let around: Vec<CellId> = self
                .hidden_component(u)
                .into_iter()
                .filter(|&m| self.is_primary(m, min_cell_size) && !self.cells[m].unbounded)
                .collect();
            if !around.is_empty() {
                for m in around {
                    self.cells[m].unbounded = true;
                }
                continue;
            }
            // Then the printed bands linked to it.
            let banded: Vec<CellId> = self
                .hidden_component(u)
                .into_iter()
                .filter(|&m| self.cells[m].band.is_some())
                .collect();
            if !banded.is_empty() {
                for m in banded {
                    self.cells[m].band = None;
                }
                continue;
            }
            self.refresh_costs();
            match self.complement_near(u) {
                Some(c) => self.cells[c].suppressed = true,
                None => {
                    // Nothing left to hide near it: show no range for anything linked.
                    return vec![None; self.cells.len()];
                }
            }
        }
    }

    /// The groups of hidden cells linked by relations, each with the relations it is in.
    fn hidden_components(&self) -> Vec<(Vec<CellId>, Vec<usize>)> {
        let rels_of = self.relations_of();
        let mut done = vec![false; self.cells.len()];
        let mut out = Vec::new();
        for start in 0..self.cells.len() {
            if done[start] || !self.cells[start].suppressed {
                continue;
            }
            let mut comp = self.hidden_component_with(start, &rels_of);
            comp.sort_unstable();
            for &c in &comp {
                done[c] = true;
            }
            let mut rels: Vec<usize> = comp
                .iter()
                .flat_map(|&c| rels_of[c].iter().copied())
                .collect();
            rels.sort_unstable();
            rels.dedup();
            out.push((comp, rels));
        }
        out
    }

    /// Optimises `Σ weight · x` over the hidden cells `comp` (relations `rels`, shown cells
    /// at their values, non-negative counts, `1 ≤ x ≤ min − 1` for bounded primary cells).
    /// Every solution's values are recorded in the cells' seen extremes.
    ///
    /// `rels` is the component's relations as [`Relations`]: the program is built from its
    /// linearly independent ones, and a solution is kept only if it satisfies all of them
    /// (otherwise the program is solved again with every relation).
    fn optimise(
        &mut self,
        comp: &[CellId],
        rels: &Relations,
        weight: &dyn Fn(CellId) -> f64,
        dir: microlp::OptimizationDirection,
        min_cell_size: u32,
        seen: &mut [(f64, f64)],
    ) -> Lp {
        let n = comp.len() as f64;
        if !self.spend(rels.independent.len() as f64 * n * n) {
            return Lp::Failed;
        }
        match self.optimise_with(comp, &rels.independent, weight, dir, min_cell_size) {
            Some((Lp::Unbounded, _)) => Lp::Unbounded,
            Some((lp, x)) if self.satisfies(comp, &x, &rels.all) => self.record(comp, lp, &x, seen),
            _ => match self.optimise_with(comp, &rels.all, weight, dir, min_cell_size) {
                Some((lp, x)) => self.record(comp, lp, &x, seen),
                None => Lp::Failed,
            },
        }
    }

    /// Records a solution's values in the cells' seen extremes and returns its optimum.
    fn record(&self, comp: &[CellId], lp: Lp, x: &[f64], seen: &mut [(f64, f64)]) -> Lp {
        for (&c, &v) in comp.iter().zip(x) {
            seen[c].0 = seen[c].0.min(v);
            seen[c].1 = seen[c].1.max(v);
        }
        lp
    }

    /// Whether values `x` of the hidden cells `comp` satisfy every relation in `rels` (shown
    /// cells at their values), to the solver's tolerance.
    fn satisfies(&self, comp: &[CellId], x: &[f64], rels: &[usize]) -> bool {
        let value: std::collections::HashMap<CellId, f64> =
            comp.iter().copied().zip(x.iter().copied()).collect();
        let of = |c: CellId| value.get(&c).copied().unwrap_or(self.cells[c].value as f64);
        rels.iter().all(|&r| {
            let r = &self.relations[r];
            let total = of(r.total);
            let sum: f64 = r.parts.iter().map(|&p| of(p)).sum();
            (total - sum).abs() <= 1e-6 * (1.0 + total.abs())
        })
    }

    /// The relations among `rels` that are linearly independent as equations in the hidden
    /// cells `comp` (shown cells are constants), found by Gaussian elimination with the
    /// largest pivot of each row (floating point; a row whose remainder is below 1e-9 of its
    /// largest coefficient is dependent). The others follow from these, so the programs have
    /// the same solutions with fewer rows: in a split group report most relations are sums of
    /// others (150 participants in five sites: 1,652 relations over 369 hidden cells), and
    /// the simplex's work grows with the rows. [`CellTable::optimise`] checks each solution
    /// against every relation, so a row wrongly taken as dependent cannot widen a range.
    fn independent_relations(&self, comp: &[CellId], rels: &[usize]) -> Vec<usize> {
        let mut col_of = vec![usize::MAX; self.cells.len()];
        for (i, &c) in comp.iter().enumerate() {
            col_of[c] = i;
        }
        // Basis rows, each normalised to 1 at its pivot column.
        let mut basis: Vec<(usize, Vec<f64>)> = Vec::new();
        let mut out = Vec::new();
        for &r in rels {
            let Some(mut row) = relation_row(&self.relations[r], &col_of, comp.len()) else {
                continue;
            };
            let scale = row.iter().fold(0.0_f64, |a, x| a.max(x.abs()));
            if scale == 0.0 {
                continue;
            }
            for (pivot, b) in &basis {
                let f = row[*pivot];
                if f != 0.0 {
                    for (x, y) in row.iter_mut().zip(b) {
                        *x -= f * y;
                    }
                }
            }
            let (pivot, max) = row
                .iter()
                .enumerate()
                .fold((0, 0.0_f64), |(bi, bm), (i, x)| {
                    if x.abs() > bm { (i, x.abs()) } else { (bi, bm) }
                });
            if max <= 1e-9 * scale {
                continue;
            }
            let p = row[pivot];
            for x in &mut row {
                *x /= p;
            }
            basis.push((pivot, row));
            out.push(r);
        }
        out
    }

    /// Builds and solves the range program over `comp` with the relations `rels`: the optimum
    /// and the hidden cells' values at it, `None` when it has no finite optimum.
    fn optimise_with(
        &self,
        comp: &[CellId],
        rels: &[usize],
        weight: &dyn Fn(CellId) -> f64,
        dir: microlp::OptimizationDirection,
        min_cell_size: u32,
    ) -> Option<(Lp, Vec<f64>)> {
        use microlp::{ComparisonOp, Problem, SolveOutcome};
        let mut p = Problem::new(dir);
        let mut var = std::collections::HashMap::new();
        let mut vars = Vec::with_capacity(comp.len());
        for &c in comp {
            let (lo, hi) = self.box_of(c, min_cell_size);
            let v = p.add_var(weight(c), (lo, hi));
            var.insert(c, v);
            vars.push(v);
        }
        for &r in rels {
            let r = &self.relations[r];
            // total − Σ parts = 0, shown cells moved to the right-hand side.
            let mut terms: Vec<(microlp::Variable, f64)> = Vec::new();
            let mut rhs = 0.0;
            for (m, sign) in
                std::iter::once((r.total, 1.0)).chain(r.parts.iter().map(|&p| (p, -1.0)))
            {
                match var.get(&m) {
                    Some(&v) => terms.push((v, sign)),
                    None => rhs -= sign * self.cells[m].value as f64,
                }
            }
            if !terms.is_empty() {
                p.add_constraint(terms.as_slice(), ComparisonOp::Eq, rhs);
            }
        }
        match p.solve() {
            Ok(SolveOutcome::Solution(s)) => {
                let x: Vec<f64> = vars.iter().map(|&v| s.var_value(v)).collect();
                Some((Lp::Optimum(s.objective()), x))
            }
            Err(microlp::Error::Unbounded) => Some((Lp::Unbounded, Vec::new())),
            _ => None,
        }
    }

    /// The bounds a hidden cell's variable has in the range programs. For the narrowness
    /// check, a hidden cell that is not 0 is at least 1: zeros are shown, and the complements
    /// are non-zero cells wherever one is left, so a reader takes a hidden cell for 1 or more.
    /// Two small cells of one row, hidden beside its shown total and its other shown cell,
    /// [1, 21, 1 | 23], held 2 together and printed "0–2" each, but were 1 each. (The printed
    /// ranges keep 0: a hidden zero is possible, and a looser range tells nothing.)
    fn box_of(&self, c: CellId, min_cell_size: u32) -> (f64, f64) {
        let nonzero = !self.printing && self.cells[c].value != 0 && !self.cells[c].phantom;
        if let Some((lo, hi)) = self.cells[c].band {
            ((lo.max(u64::from(nonzero))) as f64, hi as f64)
        } else if !self.printing && self.is_primary(c, min_cell_size) && !self.cells[c].unbounded {
            (1.0, f64::from(min_cell_size) - 1.0)
        } else if nonzero {
            (1.0, f64::INFINITY)
        } else {
            (0.0, f64::INFINITY)
        }
    }

    /// The lowest-numbered hidden non-zero cell or guarded zero ([`CellTable::set_group`])
    /// whose whole-number range has fewer than three values (as [`CellTable::ranges`] would
    /// give it), if any.
    fn first_narrow(&mut self, min_cell_size: u32) -> Option<CellId> {
        use microlp::OptimizationDirection::{Maximize, Minimize};
        let guarded = self.guarded_zeros(min_cell_size);
        let mut seen = std::mem::take(&mut self.seen);
        let mut first = None;
        for (comp, rels) in self.hidden_components() {
            let rels = Relations {
                independent: self.independent_relations(&comp, &rels),
                all: rels,
            };
            let mut open: Vec<CellId> = comp
                .iter()
                .copied()
                .filter(|&c| (self.cells[c].value != 0 || guarded[c]) && !proven_wide(seen[c]))
                .collect();
            // Push every open cell up, then down, while that proves some of them wide.
            while !open.is_empty() {
                let before = open.len();
                for dir in [Maximize, Minimize] {
                    let set: std::collections::HashSet<CellId> = open.iter().copied().collect();
                    let w = |c: CellId| if set.contains(&c) { 1.0 } else { 0.0 };
                    self.optimise(&comp, &rels, &w, dir, min_cell_size, &mut seen);
                }
                open.retain(|&c| !proven_wide(seen[c]));
                if open.len() == before {
                    break;
                }
            }
            // Then directions that push some open cells up and others down (a fixed
            // pseudo-random sign per cell and round), while that proves some.
            for round in 0..8u64 {
                if open.len() < 4 {
                    break;
                }
                let before = open.len();
                let set: std::collections::HashSet<CellId> = open.iter().copied().collect();
                let w = |c: CellId| {
                    if !set.contains(&c) {
                        return 0.0;
                    }
                    let h = (c as u64 ^ round.wrapping_mul(0x9e37_79b9_7f4a_7c15))
                        .wrapping_mul(0xbf58_476d_1ce4_e5b9);
                    if h >> 63 == 0 { 1.0 } else { -1.0 }
                };
                self.optimise(&comp, &rels, &w, Maximize, min_cell_size, &mut seen);
                open.retain(|&c| !proven_wide(seen[c]));
                if open.len() == before {
                    break;
                }
            }
            // Then one cell at a time: its own two programs give its exact range.
            for &c in &open {
                if first.is_some_and(|f| f < c) {
                    break;
                }
                if proven_wide(seen[c]) {
                    continue;
                }
                let w = |x: CellId| if x == c { 1.0 } else { 0.0 };
                let hi = self.optimise(&comp, &rels, &w, Maximize, min_cell_size, &mut seen);
                if proven_wide(seen[c]) {
                    continue;
                }
                let lo = self.optimise(&comp, &rels, &w, Minimize, min_cell_size, &mut seen);
                // A cell no relation bounds, or whose programs fail, gets no range (and is
                // not narrow).
                if let (Lp::Optimum(lo), Lp::Optimum(hi)) = (lo, hi) {
                    let (lo, hi) = whole(lo, hi);
                    if hi < lo + 2 {
                        first = Some(c);
                        break;
                    }
                }
            }
        }
        self.seen = seen;
        first
    }

    /// For every hidden cell, the smallest and largest value (whole numbers, widened to the
    /// nearest integers outward) consistent with the shown cells, the relations, non-negative
    /// counts and the printed bands. Not the primary cells' `1 ≤ x ≤ min − 1`: a reader knows
    /// the rule but not which hidden cells it hid, and ranges bounded by it told them. Beside
    /// 13 shown, a small cell of 1 printed "1–10" and its complement of 12 "3–12"; a range
    /// reaching past min − 1 is no primary's, so the 12 was a complement, at least min, and
    /// the small cell 1 or 2. (The check that nothing is narrowed, [`CellTable::first_narrow`],
    /// keeps the bound: its ranges are narrower, the safe side.) Two linear programs per
    /// hidden cell, solved with `microlp` 0.7 (simplex),
    /// except where a point already seen reaches the variable's own bound (then that bound is
    /// the answer). `None` for shown cells, for never-printed differences
    /// ([`CellTable::add_difference`]) and for a hidden cell whose programs cannot be solved
    /// or which no relation bounds (no range is then printed).
    pub fn ranges(&mut self, min_cell_size: u32) -> Vec<Option<(u64, u64)>> {
        // The points these programs reach are not kept: without the primary cells' bound they
        // lie outside what the narrowness check ([`CellTable::first_narrow`]) allows, and kept
        // as seen they would prove a cell wide there that its own programs find narrow (a
        // primary at 0, its complement at the relation's total: [1, 12 | 13] left the 12
        // "seen" from 0 to 13 where the check's bound allows 3 to 12).
        let kept = self.seen.clone();
        self.printing = true;
        let out = self.ranges_printed(min_cell_size);
        self.printing = false;
        self.seen = kept;
        out
    }

    /// [`CellTable::ranges`] with `printing` set.
    fn ranges_printed(&mut self, min_cell_size: u32) -> Vec<Option<(u64, u64)>> {
        use microlp::OptimizationDirection::{Maximize, Minimize};
        let mut seen = std::mem::take(&mut self.seen);
        let mut out = vec![None; self.cells.len()];
        let implied = self.implied_bounds(min_cell_size);
        // A whole-number end is settled when a point seen reaches the implied bound: the
        // program's optimum lies between the two.
        let hi_settled = |c: CellId, seen: &[(f64, f64)]| {
            implied[c].1.is_finite() && whole_hi(seen[c].1) >= whole_hi(implied[c].1)
        };
        let lo_settled =
            |c: CellId, seen: &[(f64, f64)]| whole_lo(seen[c].0) <= whole_lo(implied[c].0);
        for (comp, rels) in self.hidden_components() {
            let rels = Relations {
                independent: self.independent_relations(&comp, &rels),
                all: rels,
            };
            // Differences are never printed: they need no range of their own.
            let printed: Vec<CellId> = comp
                .iter()
                .copied()
                .filter(|&c| !self.cells[c].phantom)
                .collect();
            // Push every unsettled end at once, while that settles some.
            loop {
                let up: std::collections::HashSet<CellId> = printed
                    .iter()
                    .copied()
                    .filter(|&c| implied[c].1.is_finite() && !hi_settled(c, &seen))
                    .collect();
                let down: std::collections::HashSet<CellId> = printed
                    .iter()
                    .copied()
                    .filter(|&c| !lo_settled(c, &seen))
                    .collect();
                if up.is_empty() && down.is_empty() {
                    break;
                }
                let before = up.len() + down.len();
                if !up.is_empty() {
                    let w = |c: CellId| if up.contains(&c) { 1.0 } else { 0.0 };
                    self.optimise(&comp, &rels, &w, Maximize, min_cell_size, &mut seen);
                }
                if !down.is_empty() {
                    let w = |c: CellId| if down.contains(&c) { 1.0 } else { 0.0 };
                    self.optimise(&comp, &rels, &w, Minimize, min_cell_size, &mut seen);
                }
                let after = printed
                    .iter()
                    .filter(|&&c| implied[c].1.is_finite() && !hi_settled(c, &seen))
                    .count()
                    + printed.iter().filter(|&&c| !lo_settled(c, &seen)).count();
                if after == before {
                    break;
                }
            }
            // Then one program per unsettled end.
            for &c in &printed {
                let w = |x: CellId| if x == c { 1.0 } else { 0.0 };
                let hi = if hi_settled(c, &seen) {
                    Lp::Optimum(seen[c].1)
                } else {
                    self.optimise(&comp, &rels, &w, Maximize, min_cell_size, &mut seen)
                };
                let lo = if lo_settled(c, &seen) {
                    Lp::Optimum(seen[c].0)
                } else {
                    self.optimise(&comp, &rels, &w, Minimize, min_cell_size, &mut seen)
                };
                if let (Lp::Optimum(lo), Lp::Optimum(hi)) = (lo, hi)
                    && hi.is_finite()
                {
                    let (lo, hi) = whole(lo, hi);
                    // A 0 hidden for its small group is never printed as a range that pins it
                    // (one the relations alone fix is "0–0").
                    if !(self.zero_in_small_group(c, min_cell_size) && hi < lo + 2) {
                        out[c] = Some((lo.min(hi), hi));
                    }
                }
            }
        }
        self.seen = seen;
        out
    }

    /// Bounds every hidden cell's range program respects, by interval propagation: each
    /// relation bounds each of its hidden members by the bounds of the others (rounds until
    /// nothing moves by more than 0.001, at most 100). Valid outer bounds on the programs'
    /// optima, never tighter than them.
    fn implied_bounds(&self, min_cell_size: u32) -> Vec<(f64, f64)> {
        let mut b: Vec<(f64, f64)> = (0..self.cells.len())
            .map(|c| {
                if self.cells[c].suppressed {
                    self.box_of(c, min_cell_size)
                } else {
                    let v = self.cells[c].value as f64;
                    (v, v)
                }
            })
            .collect();
        for _ in 0..100 {
            let mut moved = false;
            for r in &self.relations {
                // total − Σ parts = 0: each member m with sign s is
                // s·m = −Σ_{others} s'·x', bounded by the others' bounds.
                let members: Vec<(CellId, f64)> = std::iter::once((r.total, 1.0))
                    .chain(r.parts.iter().map(|&p| (p, -1.0)))
                    .collect();
                let term = |(c, s): (CellId, f64), b: &[(f64, f64)]| {
                    if s > 0.0 { b[c] } else { (-b[c].1, -b[c].0) }
                };
                let (mut lo_sum, mut hi_sum) = (0.0, 0.0);
                for &m in &members {
                    let (l, h) = term(m, &b);
                    lo_sum += l;
                    hi_sum += h;
                }
                for &(c, s) in &members {
                    if !self.cells[c].suppressed {
                        continue;
                    }
                    let (l, h) = term((c, s), &b);
                    // Σ of the others lies in [lo_sum − l, hi_sum − h] (when finite); the
                    // member's term is minus that.
                    let others_lo = if l.is_finite() {
                        lo_sum - l
                    } else {
                        f64::NEG_INFINITY
                    };
                    let others_hi = if h.is_finite() {
                        hi_sum - h
                    } else {
                        f64::INFINITY
                    };
                    let (tl, th) = (-others_hi, -others_lo);
                    let (nl, nh) = if s > 0.0 { (tl, th) } else { (-th, -tl) };
                    if nl > b[c].0 + 1e-3 {
                        b[c].0 = nl;
                        moved = true;
                    }
                    if nh < b[c].1 - 1e-3 {
                        b[c].1 = nh;
                        moved = true;
                    }
                }
            }
            if !moved {
                break;
            }
        }
        b
    }

    /// For each cell, the relations it is a member of.
    fn relations_of(&self) -> Vec<Vec<usize>> {
        let mut out = vec![Vec::new(); self.cells.len()];
        for (i, r) in self.relations.iter().enumerate() {
            for m in r.members() {
                if out[m].last() != Some(&i) {
                    out[m].push(i);
                }
            }
        }
        out
    }

    fn hidden_component_with(&self, u: CellId, rels_of: &[Vec<usize>]) -> Vec<CellId> {
        let mut seen = vec![false; self.cells.len()];
        seen[u] = true;
        let mut stack = vec![u];
        let mut out = vec![u];
        while let Some(c) = stack.pop() {
            for &r in &rels_of[c] {
                for m in self.relations[r].members() {
                    if self.cells[m].suppressed && !seen[m] {
                        seen[m] = true;
                        stack.push(m);
                        out.push(m);
                    }
                }
            }
        }
        out
    }

    /// Runs primary and complementary suppression for the given minimum cell size.
    pub fn apply(&mut self, min_cell_size: u32) {
        let min = u64::from(min_cell_size);
        let small_group: Vec<bool> = (0..self.cells.len())
            .map(|c| self.zero_in_small_group(c, min_cell_size))
            .collect();
        for (c, &z) in self.cells.iter_mut().zip(&small_group) {
            if (c.value >= 1 && c.value < min) || z {
                c.suppressed = true;
            }
        }
        let guarded = self.guarded_zeros(min_cell_size);
        loop {
            self.single_relation_pass();
            let suppressed: Vec<bool> = self.cells.iter().map(|c| c.suppressed).collect();
            let hidden = suppressed.iter().filter(|&&h| h).count() as f64;
            if !self.spend(self.relations.len() as f64 * hidden * hidden) {
                self.hide_all();
                break;
            }
            let det = determined(&suppressed, &self.relations);
            // A determined zero tells nothing that a shown zero would not, unless it is a
            // guarded zero: hidden because its group is small, so it must stay unknown.
            let leak =
                (0..self.cells.len()).find(|&i| det[i] && (self.cells[i].value != 0 || guarded[i]));
            let Some(u) = leak else { break };
            self.refresh_costs();
            match self.complement_for(u, &suppressed) {
                Some(c) => self.cells[c].suppressed = true,
                None => {
                    // Unreachable for consistent tables: a determined cell needs a shown cell
                    // somewhere in its relations. Hide everything linked.
                    debug_assert!(false, "no complement found for a determined cell");
                    self.hide_all();
                    break;
                }
            }
        }
    }

    /// The hidden cells linked to `u` through relations and other hidden cells (with `u`).
    fn hidden_component(&self, u: CellId) -> Vec<CellId> {
        self.hidden_component_with(u, &self.relations_of())
    }

    /// Step 2: every relation with exactly one hidden member gets a complement.
    fn single_relation_pass(&mut self) {
        loop {
            self.refresh_costs();
            let mut changed = false;
            for r in 0..self.relations.len() {
                let hidden = self.relations[r]
                    .members()
                    .filter(|&m| self.cells[m].suppressed)
                    .count();
                if hidden != 1 {
                    continue;
                }
                let pick = if self.lookahead {
                    self.lookahead_complement(r)
                } else {
                    self.best_complement(&[r])
                };
                if let Some(c) = pick {
                    self.cells[c].suppressed = true;
                    changed = true;
                }
            }
            if !changed {
                break;
            }
        }
    }

    /// The complement for relation `r`, which has one hidden member: of its shown non-zero
    /// members, the one after whose hiding the rest of this pass (each relation left with one
    /// hidden member taking [`CellTable::best_complement`]) hides the least important cells —
    /// the lowest highest rank, then the fewest cells — then [`CellTable::best_complement`]'s
    /// order. Taking each relation's own best alone had, for the few active people without a
    /// recent weigh-in (active = with a recent weigh-in + them, without a recent weigh-in =
    /// withdrawn + them), hidden "active" for the one relation and "without a recent weigh-in"
    /// for the other, and so, through enrolled = active + withdrawn and started = with + without,
    /// all four counts (retention and the adherence n), where "active" and "withdrawn" do.
    fn lookahead_complement(&self, r: usize) -> Option<CellId> {
        let first = self.best_complement(&[r])?;
        let mut candidates: Vec<CellId> = self.relations[r]
            .members()
            .filter(|&m| !self.cells[m].suppressed && self.cells[m].value != 0)
            .collect();
        candidates.sort_unstable();
        candidates.dedup();
        if candidates.len() < 2 {
            return Some(first);
        }
        let rank = |c: CellId| self.rank(c);
        // Whether the candidate is kept, (highest rank hidden, cells hidden), the candidate's
        // own rank, the candidate: a kept cell only when every candidate is.
        type Choice = (bool, (u8, usize), (bool, bool, bool, u8, CellId), CellId);
        let mut best: Option<Choice> = None;
        for c in candidates {
            let key = (self.kept(c), self.cascade(c), rank(c), c);
            if best
                .as_ref()
                .is_none_or(|b| (key.0, key.1, key.2) < (b.0, b.1, b.2))
            {
                best = Some(key);
            }
        }
        best.map(|b| b.3)
    }

    /// What hiding `c` forces through relations left with one hidden member, each taking its
    /// cheapest shown member ([`CellTable::rank`]): the highest rank hidden and the number of
    /// cells hidden (with `c`).
    fn cascade(&self, c: CellId) -> (u8, usize) {
        let mut hidden: Vec<bool> = self.cells.iter().map(|x| x.suppressed).collect();
        hidden[c] = true;
        let mut top = self.cells[c].priority;
        let mut count = 1;
        loop {
            let mut changed = false;
            for rel in &self.relations {
                if rel.members().filter(|&m| hidden[m]).count() != 1 {
                    continue;
                }
                let Some(d) = rel
                    .members()
                    .filter(|&m| !hidden[m])
                    .min_by_key(|&m| self.rank(m))
                else {
                    continue;
                };
                hidden[d] = true;
                top = top.max(self.cells[d].priority);
                count += 1;
                changed = true;
            }
            if !changed || count > self.cells.len() {
                break;
            }
        }
        (top, count)
    }

    /// The shown member of the given relations to hide next: lowest priority, preferring
    /// non-zero values, then the lowest id, never the value ([`CellTable::rank`]: while
    /// `protect` is set, headline counts last and by cost).
    fn best_complement(&self, relations: &[usize]) -> Option<CellId> {
        relations
            .iter()
            .flat_map(|&r| self.relations[r].members())
            .filter(|&m| !self.cells[m].suppressed)
            .min_by_key(|&m| self.rank(m))
    }

    /// The complement for a determined cell `u` ([`CellTable::apply`]): the cell of lowest
    /// complement rank (then nearest `u`, then first registered) among the shown non-zero cells of the
    /// relations reached from `u` through hidden cells, whose hiding leaves `u` undetermined;
    /// when no cell ranked below [`CellTable::complement_near`]'s choice does, that choice.
    /// Searching only the relations next to `u` had hidden, for a site's "reached 10 % loss"
    /// found from the others, the program's number started (the one shown cell left there)
    /// where a site's histogram bin a step further would have done, and with it the program's
    /// enrolment and weight change.
    fn complement_for(&mut self, u: CellId, suppressed: &[bool]) -> Option<CellId> {
        let near = self.complement_near(u)?;
        // A kept cell is taken only when nothing else will do: every other cell is cheaper.
        let bar = if self.kept(near) {
            u8::MAX
        } else {
            self.cost(near)
        };
        let mut seen_cells = vec![false; self.cells.len()];
        let mut seen_rel = vec![false; self.relations.len()];
        let mut frontier = vec![u];
        seen_cells[u] = true;
        let mut candidates: Vec<(u8, usize, CellId)> = Vec::new();
        let mut level = 0;
        while !frontier.is_empty() {
            let rels: Vec<usize> = (0..self.relations.len())
                .filter(|&r| {
                    !seen_rel[r] && self.relations[r].members().any(|m| frontier.contains(&m))
                })
                .collect();
            let mut next = Vec::new();
            for &r in &rels {
                seen_rel[r] = true;
                for m in self.relations[r].members() {
                    if seen_cells[m] {
                        continue;
                    }
                    seen_cells[m] = true;
                    let c = &self.cells[m];
                    if c.suppressed {
                        next.push(m);
                    } else if c.value != 0 && self.cost(m) < bar && !self.kept(m) {
                        candidates.push((self.cost(m), level, m));
                    }
                }
            }
            frontier = next;
            level += 1;
        }
        candidates.sort_unstable();
        let mut trial = suppressed.to_vec();
        for &(_, _, c) in candidates.iter().take(64) {
            let hidden = trial.iter().filter(|&&h| h).count() as f64 + 1.0;
            if !self.spend(self.relations.len() as f64 * hidden * hidden) {
                return Some(near);
            }
            trial[c] = true;
            if !determined(&trial, &self.relations)[u] {
                return Some(c);
            }
            trial[c] = false;
        }
        Some(near)
    }

    /// Step 3 complement for a determined cell `u`: searched first in the relations containing
    /// `u`, then breadth-first in relations reached through other hidden cells, a shown
    /// non-zero cell before a shown 0 in each. A shown 0 is taken only for a hidden 0 (a
    /// guarded zero, [`CellTable::set_group`]: what pins it is a shown 0, as in "program 0 =
    /// this site + another site's 0"), or when no shown non-zero cell is reached at all.
    pub fn complement_near(&self, u: CellId) -> Option<CellId> {
        let mut seen_cells = vec![false; self.cells.len()];
        let mut seen_rel = vec![false; self.relations.len()];
        let mut frontier = vec![u];
        seen_cells[u] = true;
        let mut zero = None;
        while !frontier.is_empty() {
            let level: Vec<usize> = (0..self.relations.len())
                .filter(|&r| {
                    !seen_rel[r] && self.relations[r].members().any(|m| frontier.contains(&m))
                })
                .collect();
            if level.is_empty() {
                return zero;
            }
            for &r in &level {
                seen_rel[r] = true;
            }
            match self.best_complement(&level) {
                // A hidden 0 (a guarded zero) is pinned by shown zeros (a sum shown as 0 holds
                // only zeros): the nearest one is its complement.
                Some(c) if self.cells[c].value != 0 || self.cells[u].value == 0 => return Some(c),
                Some(c) => {
                    zero.get_or_insert(c);
                }
                None => {}
            }
            let mut next = Vec::new();
            for &r in &level {
                for m in self.relations[r].members() {
                    if self.cells[m].suppressed && !seen_cells[m] {
                        seen_cells[m] = true;
                        next.push(m);
                    }
                }
            }
            frontier = next;
        }
        zero
    }
}

/// The result of one range program.
enum Lp {
    Optimum(f64),
    Unbounded,
    Failed,
}

/// A relation `total − Σ parts = 0` as a row over the columns `col_of` gives its hidden cells
/// (`usize::MAX`: shown, a constant), `None` when no member is hidden.
fn relation_row(r: &Relation, col_of: &[usize], ncols: usize) -> Option<Vec<f64>> {
    let mut row = vec![0.0; ncols];
    let mut any = false;
    for (m, sign) in std::iter::once((r.total, 1.0)).chain(r.parts.iter().map(|&p| (p, -1.0))) {
        if col_of[m] != usize::MAX {
            row[col_of[m]] += sign;
            any = true;
        }
    }
    any.then_some(row)
}

/// A component's relations for the range programs ([`CellTable::optimise`]).
struct Relations {
    /// Every relation with a hidden member in the component.
    all: Vec<usize>,
    /// The linearly independent ones among them ([`CellTable::independent_relations`]).
    independent: Vec<usize>,
}

/// Whole numbers inside an LP range: they contain every whole-number solution (1e-6 absorbs
/// the solver's feasibility tolerance).
fn whole(lo: f64, hi: f64) -> (u64, u64) {
    (whole_lo(lo), whole_hi(hi))
}

fn whole_lo(lo: f64) -> u64 {
    (lo - 1e-6).ceil().max(0.0) as u64
}

fn whole_hi(hi: f64) -> u64 {
    (hi + 1e-6).floor().max(0.0) as u64
}

/// True when values seen at points the reader cannot rule out already span three whole
/// numbers, so the cell's range does too.
fn proven_wide((lo, hi): (f64, f64)) -> bool {
    if !hi.is_finite() {
        return true;
    }
    let (lo, hi) = whole(lo, hi);
    hi >= lo + 2
}

/// Which hidden cells the relations determine, given which cells are hidden.
///
/// # Formula
/// Hidden cells are the unknowns `x`; each relation `total − Σ parts = 0` with the shown cells
/// moved to the right-hand side is one row of `A·x = b`. After reduction to row echelon form, an
/// unknown is determined exactly when it is a pivot and its row has no entries in free columns
/// (then `x_u = b'_row` whatever the free unknowns are).
///
/// Returns one flag per cell (false for shown cells).
pub fn determined(suppressed: &[bool], relations: &[Relation]) -> Vec<bool> {
    let mut col_of = vec![usize::MAX; suppressed.len()];
    let mut cell_of = Vec::new();
    for (i, &s) in suppressed.iter().enumerate() {
        if s {
            col_of[i] = cell_of.len();
            cell_of.push(i);
        }
    }
    let ncols = cell_of.len();
    let mut out = vec![false; suppressed.len()];
    if ncols == 0 {
        return out;
    }
    let mut rows: Vec<Vec<f64>> = relations
        .iter()
        .filter_map(|r| relation_row(r, &col_of, ncols))
        .collect();
    // Entries are small integers combined by ±1 steps, so 1e-9 separates zero from non-zero.
    const EPS: f64 = 1e-9;
    let mut pivots = Vec::new(); // (row, col)
    let mut r0 = 0;
    for col in 0..ncols {
        if r0 == rows.len() {
            break;
        }
        let Some(p) =
            (r0..rows.len()).max_by(|&a, &b| rows[a][col].abs().total_cmp(&rows[b][col].abs()))
        else {
            break;
        };
        if rows[p][col].abs() < EPS {
            continue;
        }
        rows.swap(r0, p);
        // Every row from r0 on is zero (below EPS) in the columns before `col`: a pivot column
        // was cleared, a skipped one had nothing to pivot on, and only such rows were
        // subtracted from them since. So the pivot row is too, and the work starts at `col`
        // (it halves the elimination, which the range audit runs thousands of times a report).
        let piv = rows[r0][col];
        for v in rows[r0][col..].iter_mut() {
            *v /= piv;
        }
        let pivot_row = rows[r0][col..].to_vec();
        for (i, row) in rows.iter_mut().enumerate() {
            if i != r0 && row[col].abs() >= EPS {
                let f = row[col];
                for (v, pv) in row[col..].iter_mut().zip(&pivot_row) {
                    *v -= f * pv;
                }
            }
        }
        pivots.push((r0, col));
        r0 += 1;
    }
    for (r, c) in pivots {
        let alone = rows[r]
            .iter()
            .enumerate()
            .all(|(j, v)| j == c || v.abs() < EPS);
        if alone {
            out[cell_of[c]] = true;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(values: &[u64], total: u64) -> (CellTable, Vec<CellId>, CellId) {
        let mut t = CellTable::new();
        let parts: Vec<CellId> = values.iter().map(|&v| t.add_cell(v, 0)).collect();
        let tot = t.add_cell(total, 0);
        t.add_relation(tot, parts.clone());
        (t, parts, tot)
    }

    /// 220 people in 20 sites of 11 made a table of 2,090 cells and 14,249 relations whose
    /// suppression took hours (one more hidden cell per 1.5 s elimination). A table whose work
    /// passes `WORK_LIMIT` now gives up: every cell hidden, no range, `exhausted`. This one,
    /// 2,000 rows of 5 small cells and their total (12,000 cells, all hidden at once), passes
    /// the limit before its first elimination, so the test is quick.
    #[test]
    fn a_table_past_the_work_limit_withholds_every_cell() {
        let mut t = CellTable::new();
        for _ in 0..2_000 {
            let parts: Vec<CellId> = (0..5).map(|_| t.add_cell(2, 0)).collect();
            let total = t.add_cell(10, 0);
            t.add_relation(total, parts);
        }
        let ranges = t.apply_with_ranges(11);
        assert!(t.exhausted());
        assert!(ranges.iter().all(Option::is_none));
        assert!((0..t.len()).all(|c| t.is_suppressed(c)));
        // A small table is far from it.
        let (mut small, _, _) = row(&[3, 25, 40], 68);
        small.apply_with_ranges(11);
        assert!(!small.exhausted());
    }

    #[test]
    fn reference_row_hides_the_small_cell_and_a_complement() {
        // Complementary-suppression test: the row [3, 25, 40, total 68] must not display 3, and
        // must also hide 25 (or the total) (CMS Cell Size Suppression Policy, complementary
        // suppression).
        let (mut t, parts, tot) = row(&[3, 25, 40], 68);
        t.apply(11);
        assert!(t.is_suppressed(parts[0]));
        assert!(t.is_suppressed(parts[1]) || t.is_suppressed(tot));
        // Our rule picks the next-smallest cell, and nothing else.
        assert!(t.is_suppressed(parts[1]));
        assert!(!t.is_suppressed(parts[2]) && !t.is_suppressed(tot));
    }

    #[test]
    fn zeros_are_shown_and_nothing_big_is_hidden() {
        // CMS policy: 0 may be shown.
        let (mut t, parts, tot) = row(&[0, 25, 40], 65);
        t.apply(11);
        assert!(parts.iter().chain([&tot]).all(|&c| !t.is_suppressed(c)));
    }

    #[test]
    fn a_zero_is_not_the_first_choice_of_complement() {
        let (mut t, parts, tot) = row(&[4, 0, 30], 34);
        t.apply(11);
        assert!(t.is_suppressed(parts[0]));
        assert!(!t.is_suppressed(parts[1]), "the zero stays shown");
        assert!(t.is_suppressed(parts[2]) || t.is_suppressed(tot));
    }

    /// One section's plateau counts: enrolled = with a verdict + too little data, with a
    /// verdict = on a plateau + not, each share given its group; each cell of the rank the
    /// group report gives it (`Kind::priority`: enrolled 3, with a verdict 2, on a plateau or
    /// not 1, too little data 0).
    fn plateau_section(t: &mut CellTable, counts: [u64; 5]) -> [CellId; 5] {
        let [enrolled, verdict, insufficient, yes, no] = [
            (counts[0], 3),
            (counts[1], 2),
            (counts[2], 0),
            (counts[3], 1),
            (counts[4], 1),
        ]
        .map(|(v, p)| t.add_cell(v, p));
        t.add_relation(enrolled, vec![verdict, insufficient]);
        t.add_relation(verdict, vec![yes, no]);
        for c in [verdict, insufficient] {
            t.set_group(c, enrolled);
        }
        for c in [yes, no] {
            t.set_group(c, verdict);
        }
        [enrolled, verdict, insufficient, yes, no]
    }

    /// A site of 20 where 4 have a plateau verdict and none of them is on a plateau: "0 on a
    /// plateau" beside the hidden 4 told the sponsor that each of those 4 was not on one. The
    /// 0 is hidden, and since the program's 0 and the other site's 0 give it by subtraction
    /// (program = Σ sites), one of those two shown zeros is hidden as its complement: no
    /// non-zero cell is left to take. The other site's 0 among its 30 with a verdict is a 0 in
    /// a group of at least min and needs no hiding of its own.
    #[test]
    fn a_zero_among_a_small_group_is_hidden_and_gets_a_complement() {
        let mut t = CellTable::new();
        let a = plateau_section(&mut t, [20, 4, 16, 0, 4]);
        let b = plateau_section(&mut t, [40, 30, 10, 0, 30]);
        let p = plateau_section(&mut t, [60, 34, 26, 0, 34]);
        for k in 0..5 {
            t.add_relation(p[k], vec![a[k], b[k]]);
        }
        let mut bare = t.clone();
        for c in &mut bare.cells {
            c.group = None;
        }
        bare.apply(11);
        assert!(!bare.is_suppressed(a[3]), "without groups the 0 is shown");

        let ranges = t.apply_with_ranges(11);
        assert!(t.is_suppressed(a[3]), "the site's 0 on a plateau is hidden");
        assert!(
            t.is_suppressed(p[3]) || t.is_suppressed(b[3]),
            "a shown zero is taken as its complement"
        );
        let hidden: Vec<bool> = t.cells.iter().map(|c| c.suppressed).collect();
        assert!(!determined(&hidden, &t.relations)[a[3]]);
        // Its printed range leaves at least three values and holds the truth.
        let (lo, hi) = ranges[a[3]].expect("a range is printed");
        assert!(lo == 0 && hi >= 2, "{lo}–{hi}");
        // Enrolment stays shown.
        for c in [a[0], b[0], p[0]] {
            assert!(!t.is_suppressed(c), "cell {c} hidden");
        }
    }

    /// A 0 that the relations give whatever is shown (a group linked as the same people as
    /// one of its shares, so the other share is their difference) is hidden for its small
    /// group, takes no complement — none could help — and gets no range ("0–0" would print
    /// it).
    #[test]
    fn a_zero_the_relations_alone_fix_is_hidden_without_complements_or_range() {
        let mut t = CellTable::new();
        let a = plateau_section(&mut t, [20, 4, 16, 4, 0]);
        t.add_relation(a[1], vec![a[3]]);
        let ranges = t.apply_with_ranges(11);
        assert!(t.is_suppressed(a[4]));
        assert_eq!(ranges[a[4]], None);
        assert!(!t.is_suppressed(a[0]), "enrolment stays shown");
    }

    #[test]
    fn priority_protects_a_key_total() {
        // started = 2 (low priority) + 40; total "enrolled" has a high priority: the complement
        // must be the other part even though the total is smaller than nothing else.
        let mut t = CellTable::new();
        let a = t.add_cell(2, 0);
        let b = t.add_cell(40, 0);
        let tot = t.add_cell(42, 9);
        t.add_relation(tot, vec![a, b]);
        t.apply(11);
        assert!(t.is_suppressed(a) && t.is_suppressed(b) && !t.is_suppressed(tot));
    }

    #[test]
    fn recovery_through_two_relations_is_blocked() {
        // Two splits of the same 40 people: sites {A: 5, B: 35} and teams {X: 20, Y: 20}.
        // Primary hides A (5); the single-relation rule then hides B or the program total. If it
        // hid the total, the teams would give it back (20 + 20) and then A = 40 − 35: the linear
        // check has to catch that.
        let mut t = CellTable::new();
        let a = t.add_cell(5, 0);
        let b = t.add_cell(35, 0);
        let x = t.add_cell(20, 0);
        let y = t.add_cell(20, 0);
        let total = t.add_cell(40, 0); // lowest priority would not matter: values decide
        t.add_relation(total, vec![a, b]);
        t.add_relation(total, vec![x, y]);
        t.apply(11);
        let s: Vec<bool> = [a, b, x, y, total]
            .iter()
            .map(|&c| t.is_suppressed(c))
            .collect();
        let det = determined(
            &(0..5).map(|c| t.is_suppressed(c)).collect::<Vec<_>>(),
            t.relations(),
        );
        assert!(s[0]);
        assert!(!det[a], "A must not be determined: {s:?}");
    }

    #[test]
    fn linear_check_catches_what_single_relations_miss() {
        // total T hidden, A hidden; parts of a second split of T all shown → T known → A known.
        let suppressed = [true, false, false, false, true]; // A, B, X, Y, T
        let rels = vec![
            Relation {
                total: 4,
                parts: vec![0, 1],
            },
            Relation {
                total: 4,
                parts: vec![2, 3],
            },
        ];
        let det = determined(&suppressed, &rels);
        assert!(det[0] && det[4]);
        // Hiding X as well leaves T and A undetermined (one equation, three unknowns... A, T, X).
        let suppressed = [true, false, true, false, true];
        let det = determined(&suppressed, &rels);
        assert!(!det[0] && !det[2] && !det[4]);
    }

    #[test]
    fn cross_table_with_four_hidden_cells_is_safe() {
        // 2 × 2 table of hidden cells with all margins shown: rank 3 for 4 unknowns.
        let suppressed = [true, true, true, true, false, false, false, false];
        let rels = vec![
            Relation {
                total: 4,
                parts: vec![0, 1],
            },
            Relation {
                total: 5,
                parts: vec![2, 3],
            },
            Relation {
                total: 6,
                parts: vec![0, 2],
            },
            Relation {
                total: 7,
                parts: vec![1, 3],
            },
        ];
        assert!(determined(&suppressed, &rels).iter().all(|d| !d));
    }

    /// The range of every hidden cell by two programs per cell over every relation and
    /// nothing else (the method before the work was saved and before dependent relations were
    /// dropped), for comparison.
    fn plain_ranges(t: &CellTable, min: u32) -> Vec<Option<(u64, u64)>> {
        use microlp::OptimizationDirection::{Maximize, Minimize};
        // As printed: without the primary cells' 1 … min − 1 (see `CellTable::ranges`).
        let t = &CellTable {
            printing: true,
            ..t.clone()
        };
        let mut out = vec![None; t.len()];
        for (comp, rels) in t.hidden_components() {
            for &c in &comp {
                let w = |x: CellId| if x == c { 1.0 } else { 0.0 };
                let solve = |dir| {
                    t.optimise_with(&comp, &rels, &w, dir, min)
                        .map_or(Lp::Failed, |(lp, _)| lp)
                };
                let hi = solve(Maximize);
                let lo = solve(Minimize);
                if let (Lp::Optimum(lo), Lp::Optimum(hi)) = (lo, hi)
                    && hi.is_finite()
                {
                    let (lo, hi) = whole(lo, hi);
                    out[c] = Some((lo.min(hi), hi));
                }
            }
        }
        out
    }

    #[test]
    fn saved_work_gives_the_ranges_of_two_programs_per_cell() {
        // Random report-like tables: sections of enrolled = active + withdrawn and
        // enrolled = a + b + c, the program's cells the sum of the sections', and a
        // never-printed difference where one count is nested in another.
        let mut state = 0x9e37_79b9_7f4a_7c15_u64;
        let mut next = |n: u64| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) % n
        };
        let mut compared = 0;
        for _ in 0..40 {
            let mut t = CellTable::new();
            let sections = 2 + next(4) as usize;
            let mut kinds: Vec<Vec<CellId>> = vec![Vec::new(); 6];
            for _ in 0..sections {
                let (act, wd) = (next(40), next(12));
                let (a, b) = (next(act + wd + 1), 0);
                let b = b + next(act + wd - a + 1);
                let c = act + wd - a - b;
                let ids: Vec<CellId> = [act + wd, act, wd, a, b, c]
                    .iter()
                    .enumerate()
                    .map(|(k, &v)| t.add_cell(v, if k == 0 { 3 } else { 1 }))
                    .collect();
                t.add_relation(ids[0], vec![ids[1], ids[2]]);
                t.add_relation(ids[0], vec![ids[3], ids[4], ids[5]]);
                if t.value(ids[1]) > t.value(ids[3]) && next(2) == 0 {
                    // Pretend a's people are among the active ones.
                    t.add_difference(ids[1], ids[3]);
                }
                for (k, id) in ids.into_iter().enumerate() {
                    kinds[k].push(id);
                }
            }
            let program: Vec<CellId> = kinds
                .iter()
                .map(|ids| {
                    let v = ids.iter().map(|&c| t.value(c)).sum();
                    let p = t.add_cell(v, 4);
                    t.add_relation(p, ids.clone());
                    p
                })
                .collect();
            t.add_relation(program[0], vec![program[1], program[2]]);
            t.add_relation(program[0], vec![program[3], program[4], program[5]]);
            let got = t.apply_with_ranges(11);
            if got.iter().all(Option::is_none) {
                // Nothing left to hide near a narrowed cell: no range is printed at all.
                continue;
            }
            let plain = plain_ranges(&t, 11);
            for c in 0..t.len() {
                if t.cells[c].phantom {
                    assert_eq!(got[c], None);
                } else {
                    assert_eq!(got[c], plain[c], "cell {c}");
                    compared += usize::from(got[c].is_some());
                }
                // Nothing non-zero is left narrowed to fewer than three values.
                if let Some((lo, hi)) = plain[c] {
                    assert!(t.value(c) == 0 || hi >= lo + 2, "cell {c}: {lo}..{hi}");
                }
                if let Some((lo, hi)) = plain[c] {
                    assert!(
                        lo <= t.value(c) && t.value(c) <= hi,
                        "the truth is in range"
                    );
                }
            }
        }
        assert!(compared > 100, "{compared} ranges compared");
    }
    /// What a reader who knows the published algorithm can tell of each hidden cell of a
    /// one-relation table `total = Σ parts` (every cell of `priority`): every assignment of
    /// the hidden cells that agrees with the shown ones and the relation is run through the
    /// same suppression, and kept when it prints exactly what the true one printed (the same
    /// cells hidden, the same ranges). Returns, per cell, the values it takes in the kept
    /// assignments.
    fn reader_values(parts: &[u64], min: u32) -> Vec<std::collections::BTreeSet<u64>> {
        let total: u64 = parts.iter().sum();
        let printed = |values: &[u64]| {
            let (mut t, _, _) = row(values, values.iter().sum());
            let ranges = t.apply_with_ranges(min);
            let hidden: Vec<bool> = (0..t.len()).map(|c| t.is_suppressed(c)).collect();
            (hidden, ranges)
        };
        let truth = printed(parts);
        let hidden: Vec<usize> = (0..parts.len()).filter(|&c| truth.0[c]).collect();
        assert!(
            !truth.0[parts.len()],
            "the total stays shown in these tables"
        );
        let free = total
            - (0..parts.len())
                .filter(|c| !hidden.contains(c))
                .map(|c| parts[c])
                .sum::<u64>();
        let mut out = vec![std::collections::BTreeSet::new(); parts.len()];
        // Every split of `free` over the hidden cells.
        let mut split = vec![0u64; hidden.len()];
        fn each(free: u64, k: usize, split: &mut Vec<u64>, f: &mut dyn FnMut(&[u64])) {
            if k + 1 == split.len() {
                split[k] = free;
                f(split);
                return;
            }
            for v in 0..=free {
                split[k] = v;
                each(free - v, k + 1, split, f);
            }
        }
        each(free, 0, &mut split, &mut |s| {
            let mut values = parts.to_vec();
            for (&c, &v) in hidden.iter().zip(s) {
                values[c] = v;
            }
            if printed(&values) == truth {
                for (c, &v) in values.iter().enumerate() {
                    out[c].insert(v);
                }
            }
        });
        out
    }

    /// The printed ranges leave out the primary cells' 1 … min − 1; the points their programs
    /// reach must not be kept as "seen" for the narrowness check, which keeps that bound: a
    /// point outside its bounds would prove a cell wide without a program of its own on the
    /// next call (after a cell is forced hidden, say), where the check's own programs can find
    /// it narrow. [1, 12 | 13], min 11: within the check's bounds the 12 lies in 3 … 12, the 1
    /// in 1 … 10; the printed ranges' programs reach 0 … 13 for both.
    #[test]
    fn the_printed_ranges_leave_no_points_outside_the_narrowness_checks_bounds() {
        let (mut t, parts, _) = row(&[1, 12], 13);
        let ranges = t.apply_with_ranges(11);
        assert_eq!(ranges[parts[0]], Some((0, 13)));
        assert_eq!(ranges[parts[1]], Some((0, 13)));
        let (small, other) = (t.seen[parts[0]], t.seen[parts[1]]);
        assert!(small.0 >= 1.0 && small.1 <= 10.0, "{small:?}");
        assert!(other.0 >= 3.0 && other.1 <= 12.0, "{other:?}");
    }

    /// A reader who knows that the complement is the smallest shown candidate knows it is no
    /// larger than any candidate left shown. [10, 11, 11 | 32], min 11: the 10 is hidden, the
    /// first 11 is its complement, the second stays shown; the two hidden cells hold 21, and a
    /// complement of 11 or less beside a small cell of 10 or less leaves only 10 + 11 or
    /// 11 + 10: the small cell was 10 or 11. The complement's choice must rest on nothing the
    /// reader cannot see.
    #[test]
    fn the_choice_of_complement_does_not_tell_a_reader_the_hidden_values() {
        for parts in [
            &[10, 11, 11][..],
            &[11, 10, 11],
            &[10, 11, 12, 11],
            &[9, 11, 12, 11],
        ] {
            let parts = parts.to_vec();
            let seen = reader_values(&parts, 11);
            for (c, &v) in parts.iter().enumerate() {
                if (1..11).contains(&v) {
                    assert!(
                        seen[c].len() >= 3,
                        "{parts:?}: cell {c} ({v}) narrowed to {:?}",
                        seen[c]
                    );
                }
            }
        }
    }

    /// A 2 × 3 table with its row, column and grand totals (cells 0–5 the inner cells by row,
    /// 6–7 the rows, 8–10 the columns, 11 the whole), every cell of one rank.
    fn cross(v: &[u64]) -> CellTable {
        let mut t = CellTable::new();
        let inner: Vec<CellId> = v.iter().map(|&x| t.add_cell(x, 0)).collect();
        let rows: Vec<CellId> = (0..2)
            .map(|r| t.add_cell(v[3 * r..3 * r + 3].iter().sum(), 1))
            .collect();
        let cols: Vec<CellId> = (0..3).map(|c| t.add_cell(v[c] + v[c + 3], 1)).collect();
        let all = t.add_cell(v.iter().sum(), 2);
        for r in 0..2 {
            t.add_relation(rows[r], inner[3 * r..3 * r + 3].to_vec());
        }
        for c in 0..3 {
            t.add_relation(cols[c], vec![inner[c], inner[c + 3]]);
        }
        t.add_relation(all, rows);
        t.add_relation(all, cols);
        t
    }

    /// What a reader who knows the algorithm can tell of each inner cell of [`cross`]: every
    /// assignment of the hidden cells (0 … the whole each) that meets the relations is run
    /// through the suppression and kept when it prints what the truth printed.
    fn cross_reader(v: &[u64], min: u32) -> Vec<std::collections::BTreeSet<u64>> {
        let printed = |values: &[u64]| {
            let mut t = cross(values);
            let ranges = t.apply_with_ranges(min);
            let hidden: Vec<bool> = (0..t.len()).map(|c| t.is_suppressed(c)).collect();
            (hidden, ranges)
        };
        let truth = printed(v);
        let full = cross(v);
        let shown: Vec<Option<u64>> = (0..full.len())
            .map(|c| (!truth.0[c]).then(|| full.value(c)))
            .collect();
        let whole = full.value(full.len() - 1);
        let mut out = vec![std::collections::BTreeSet::new(); v.len()];
        let mut x: Vec<Option<u64>> = shown.clone();
        fn go(
            k: usize,
            x: &mut Vec<Option<u64>>,
            shown: &[Option<u64>],
            whole: u64,
            rels: &[Relation],
            f: &mut dyn FnMut(&[u64]),
        ) {
            // Every relation whose members are all known must hold.
            for r in rels {
                let vals: Option<Vec<u64>> = r.members().map(|m| x[m]).collect();
                if let Some(vals) = vals
                    && vals[0] != vals[1..].iter().sum::<u64>()
                {
                    return;
                }
            }
            if k == x.len() {
                let vals: Vec<u64> = x.iter().map(|v| v.expect("assigned")).collect();
                f(&vals);
                return;
            }
            if shown[k].is_some() {
                return go(k + 1, x, shown, whole, rels, f);
            }
            // No part exceeds a shown total it is part of.
            let cap = rels
                .iter()
                .filter(|r| r.parts.contains(&k))
                .filter_map(|r| shown[r.total])
                .min()
                .unwrap_or(whole);
            for val in 0..=cap {
                x[k] = Some(val);
                go(k + 1, x, shown, whole, rels, f);
            }
            x[k] = None;
        }
        let rels = full.relations().to_vec();
        go(0, &mut x, &shown, whole, &rels, &mut |vals| {
            if printed(&vals[..6]) == truth {
                for (c, &val) in vals[..6].iter().enumerate() {
                    out[c].insert(val);
                }
            }
        });
        out
    }

    /// Small cross tables (random inner cells 0 … 24, min 11) read by the algorithm-aware
    /// reader: no small inner cell is left with fewer than three values.
    #[test]
    fn an_algorithm_aware_reader_of_cross_tables_narrows_no_small_cell() {
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        let mut found = Vec::new();
        // The first: two small cells of one row hidden beside its shown total and other cell
        // ([1, 21, 1 | 23]) held 2 together and were printed "0–2" each; a reader who knows
        // that zeros are shown took them for 1 each.
        let mut tables = vec![vec![1, 21, 1, 9, 11, 18]];
        tables.extend((0..12).map(|_| (0..6).map(|_| next() % 25).collect::<Vec<u64>>()));
        for v in tables {
            if !v.iter().any(|x| (1..11).contains(x)) {
                continue;
            }
            let seen = cross_reader(&v, 11);
            for (c, &val) in v.iter().enumerate() {
                if (1..11).contains(&val) && seen[c].len() < 3 {
                    found.push(format!("{v:?}: cell {c} ({val}) narrowed to {:?}", seen[c]));
                }
            }
        }
        assert!(found.is_empty(), "{found:#?}");
    }

    #[test]
    fn a_printed_range_does_not_tell_a_reader_which_hidden_cell_is_the_small_one() {
        // 13 people: 1 in a small cell, 12 in the other. The complement (12) was printed as
        // "3–12" beside "1–10" for the small one: a range reaching past 10 is no primary's, so
        // the 12 is 11 or more, and the small cell is 1 or 2.
        for parts in [[1, 12], [2, 11], [12, 1], [1, 11], [9, 12]] {
            let seen = reader_values(&parts, 11);
            for (c, &v) in parts.iter().enumerate() {
                if (1..11).contains(&v) {
                    assert!(
                        seen[c].len() >= 3,
                        "{parts:?}: cell {c} ({v}) narrowed to {:?}",
                        seen[c]
                    );
                }
            }
        }
    }
}
