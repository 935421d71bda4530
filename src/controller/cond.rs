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
