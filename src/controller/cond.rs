//! Fault conditions and transition guards compiled for the step: the model's expressions with
//! every reference resolved once, when the controller is prepared, to an index into the
//! step's flat arrays (a reference outside the model to the value the step gives it: false, or
//! NaN for a signal), so that evaluating one on every step reads those arrays directly.

use crate::model::{Compare, Expr, Model, Signal, Term, TrackRef};

/// A compiled signal.
#[derive(Clone, Copy, Debug)]
pub(super) enum Sig {
    /// A track's filtered percent, by flat track index.
    Percent(usize),
    /// A track's filtered volts, by flat track index.
    Volts(usize),
    /// A sensor's merged value.
    Merged(usize),
    /// An analog input (clamped into its band by the step).
    Input(usize),
    /// The target commanded on the last step.
    Target,
    /// A reference outside the model: every comparison with it is false.
    Nan,
}

/// A compiled numeric term.
#[derive(Clone, Copy, Debug)]
pub(super) enum Num {
    One(Sig),
    Diff(Sig, Sig),
    AbsDiff(Sig, Sig),
}

/// A compiled expression, the same shape as [`Expr`].
#[derive(Clone, Debug)]
pub(super) enum Cond {
    Const(bool),
    /// The fault is set.
    Set(usize),
    /// Some set fault suspects the track (flat index).
    Suspect(usize),
    Switch(usize),
    Cmp(Num, Compare),
    Not(Box<Cond>),
    And(Box<[Cond]>),
    Or(Box<[Cond]>),
    /// Some fault of the mask is set (the step's bit word of set faults): an `or` of fault
    /// and suspect references folded, see [`Cond::fold_masks`].
    AnySet(u64),
    /// No fault of the mask is set: an `and` of negated ones.
    NoneSet(u64),
}

impl Cond {
    /// Compiles `e` against `model`, with `track` giving a track's flat index (`None` when
    /// the reference is outside the model).
    pub(super) fn compile(
        e: &Expr,
        model: &Model,
        track: &impl Fn(TrackRef) -> Option<usize>,
    ) -> Cond {
        let sig = |s: Signal| match s {
            Signal::Track { track: t } => track(t).map_or(Sig::Nan, Sig::Percent),
            Signal::TrackVolts { track: t } => track(t).map_or(Sig::Nan, Sig::Volts),
            Signal::Merged { sensor } if sensor < model.sensors.len() => Sig::Merged(sensor),
            Signal::Merged { .. } => Sig::Nan,
            Signal::Input { input } => Sig::Input(input),
            Signal::Target => Sig::Target,
        };
        let all = |es: &[Expr]| -> Box<[Cond]> {
            es.iter().map(|e| Cond::compile(e, model, track)).collect()
        };
        match e {
            Expr::True => Cond::Const(true),
            Expr::Fault { fault, .. } if *fault < model.faults.len() => Cond::Set(*fault),
            Expr::Fault { .. } => Cond::Const(false),
            Expr::Suspect { track: t, .. } => track(*t).map_or(Cond::Const(false), Cond::Suspect),
            Expr::Switch { switch, .. } => Cond::Switch(*switch),
            Expr::Compare { term, cmp, .. } => {
                let n = match *term {
                    Term::Signal { signal } => Num::One(sig(signal)),
                    Term::Diff { a, b } => Num::Diff(sig(a), sig(b)),
                    Term::AbsDiff { a, b } => Num::AbsDiff(sig(a), sig(b)),
                };
                Cond::Cmp(n, *cmp)
            }
            Expr::Not { e } => Cond::Not(Box::new(Cond::compile(e, model, track))),
            Expr::And { es } => Cond::And(all(es)),
            Expr::Or { es } => Cond::Or(all(es)),
        }
    }
}

impl Cond {
    /// The faults whose being set decides a fault or suspect reference, as a mask over
    /// `suspecters` (per flat track, the faults that suspect it); `None` for other leaves.
    fn set_mask(&self, suspecters: &[u64]) -> Option<u64> {
        match *self {
            Cond::Set(f) if f < 64 => Some(1 << f),
            Cond::Suspect(i) => suspecters.get(i).copied(),
            _ => None,
        }
    }

    /// Folds, on a model of at most 64 faults, the fault and suspect references of each `or`
    /// into one [`Cond::AnySet`] and the negated ones of each `and` into one
    /// [`Cond::NoneSet`], keeping the other operands in order after it. The value is the same
    /// for every state: `suspect(t)` is "some fault in `t`'s mask is set", and `or`/`and`
    /// commute over operands without side effects.
    pub(super) fn fold_masks(self, suspecters: &[u64]) -> Cond {
        let fold = |es: Box<[Cond]>, any: bool| -> Cond {
            let node = |v: Vec<Cond>| {
                if any {
                    Cond::Or(v.into())
                } else {
                    Cond::And(v.into())
                }
            };
            // Operands that fold: in an `or` a fault or suspect reference (or a folded
            // `or`), in an `and` a negated one (or a folded `and`).
            let (mut mask, mut folded, mut rest) = (0u64, false, Vec::new());
            for e in es.into_vec() {
                let e = e.fold_masks(suspecters);
                let m = match (&e, any) {
                    (Cond::AnySet(m), true) | (Cond::NoneSet(m), false) => Some(*m),
                    (Cond::Not(inner), false) => inner.set_mask(suspecters),
                    (_, true) => e.set_mask(suspecters),
                    (_, false) => None,
                };
                match m {
                    Some(m) => (mask, folded) = (mask | m, true),
                    None => rest.push(e),
                }
            }
            if !folded {
                return node(rest);
            }
            let leaf = if any {
                Cond::AnySet(mask)
            } else {
                Cond::NoneSet(mask)
            };
            if rest.is_empty() {
                return leaf;
            }
            rest.insert(0, leaf);
            node(rest)
        };
        match self {
            Cond::Or(es) => fold(es, true),
            Cond::And(es) => fold(es, false),
            Cond::Not(e) => Cond::Not(Box::new(e.fold_masks(suspecters))),
            leaf => leaf,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The value of a condition made of fault, suspect and constant leaves, with the faults
    /// of `set` set: suspicion read from the per-track fault lists, a folded leaf from its own
    /// mask.
    fn value(c: &Cond, set: u64, lists: &[Vec<usize>]) -> bool {
        match c {
            Cond::Const(b) => *b,
            Cond::Set(f) => set >> f & 1 == 1,
            Cond::Suspect(i) => lists[*i].iter().any(|&f| set >> f & 1 == 1),
            Cond::AnySet(m) => set & m != 0,
            Cond::NoneSet(m) => set & m == 0,
            Cond::Not(e) => !value(e, set, lists),
            Cond::And(es) => es.iter().all(|e| value(e, set, lists)),
            Cond::Or(es) => es.iter().any(|e| value(e, set, lists)),
            Cond::Switch(_) | Cond::Cmp(..) => unreachable!("not generated"),
        }
    }

    fn tree(x: &mut u64, depth: u32) -> Cond {
        let r = crate::testing::xorshift(x);
        match if depth == 0 { r % 3 } else { r % 6 } {
            0 => Cond::Set((r >> 8) as usize % 6),
            1 => Cond::Suspect((r >> 8) as usize % 4),
            2 => Cond::Const(r >> 8 & 1 == 1),
            3 => Cond::Not(Box::new(tree(x, depth - 1))),
            k => {
                let n = 1 + (r >> 8) as usize % 4;
                let es: Box<[Cond]> = (0..n).map(|_| tree(x, depth - 1)).collect();
                if k == 4 { Cond::And(es) } else { Cond::Or(es) }
            }
        }
    }

    fn folded_leaves(c: &Cond) -> usize {
        match c {
            Cond::AnySet(_) | Cond::NoneSet(_) => 1,
            Cond::Not(e) => folded_leaves(e),
            Cond::And(es) | Cond::Or(es) => es.iter().map(folded_leaves).sum(),
            _ => 0,
        }
    }

    #[test]
    fn folding_onto_fault_masks_keeps_every_value() {
        // Seeded random conditions over six faults and four tracks (common practice, no
        // source: a differential check against the unfolded tree read from the lists), each
        // compared on every one of the 64 sets of set faults.
        let lists: Vec<Vec<usize>> = vec![vec![0, 4], vec![1, 4], vec![], vec![2, 3, 5]];
        let masks: Vec<u64> = lists
            .iter()
            .map(|l| l.iter().fold(0, |m, &f| m | 1 << f))
            .collect();
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        let mut folds = 0;
        for _ in 0..3000 {
            let c = tree(&mut x, 3);
            let f = c.clone().fold_masks(&masks);
            folds += folded_leaves(&f);
            for set in 0..64u64 {
                assert_eq!(
                    value(&c, set, &lists),
                    value(&f, set, &lists),
                    "{c:?} folded to {f:?}, faults set {set:#b}"
                );
            }
        }
        assert!(folds > 1000, "{folds}");
    }
}
