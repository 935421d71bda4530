//! The reference policy of DESIGN.md (the fictional courier van, rev 1) built by hand as a
//! resolved model, for tests that must not wait for the parser.

use crate::lang::Span;
use crate::model::{
    Actuator, Combine, Compare, Debounce, Demand, Expr, Fault, Healing, Input, Mode, Model, Sensor,
    Signal, Source, Switch, Term, Track, TrackRef, Transition,
};
use crate::time::Time;

pub(crate) const PEDAL: usize = 0;
pub(crate) const THROTTLE: usize = 1;
pub(crate) const PA: TrackRef = TrackRef {
    sensor: PEDAL,
    track: 0,
};
pub(crate) const PB: TrackRef = TrackRef {
    sensor: PEDAL,
    track: 1,
};
pub(crate) const TA: TrackRef = TrackRef {
    sensor: THROTTLE,
    track: 0,
};
pub(crate) const TB: TrackRef = TrackRef {
    sensor: THROTTLE,
    track: 1,
};

pub(crate) const PEDAL_A_LOW: usize = 0;
pub(crate) const PEDAL_A_HIGH: usize = 1;
pub(crate) const PEDAL_B_LOW: usize = 2;
pub(crate) const PEDAL_B_HIGH: usize = 3;
pub(crate) const PEDAL_DISAGREE: usize = 4;
pub(crate) const THROTTLE_A_RANGE: usize = 5;
pub(crate) const THROTTLE_B_RANGE: usize = 6;
pub(crate) const THROTTLE_DISAGREE: usize = 7;
pub(crate) const TRACKING: usize = 8;
pub(crate) const BRAKE_CONFLICT: usize = 9;

pub(crate) const NORMAL: usize = 0;
pub(crate) const REDUCED: usize = 1;
pub(crate) const IDLE_ONLY: usize = 2;
pub(crate) const SHUTDOWN: usize = 3;

const S: Span = Span { start: 0, end: 0 };

fn ms(x: u64) -> Time {
    Time::from_ms(x)
}

fn track(name: &str, v0: f64, v100: f64) -> Track {
    Track {
        name: name.into(),
        span: S,
        points: vec![(0.0, v0), (100.0, v100)],
    }
}

pub(crate) fn cmp(term: Term, cmp: Compare) -> Expr {
    Expr::Compare { term, cmp, span: S }
}

pub(crate) fn sig(signal: Signal) -> Term {
    Term::Signal { signal }
}

pub(crate) fn volts(t: TrackRef) -> Term {
    sig(Signal::TrackVolts { track: t })
}

pub(crate) fn fault(f: usize) -> Expr {
    Expr::Fault { fault: f, span: S }
}

pub(crate) fn suspect(t: TrackRef) -> Expr {
    Expr::Suspect { track: t, span: S }
}

pub(crate) fn not(e: Expr) -> Expr {
    Expr::Not { e: Box::new(e) }
}

pub(crate) fn or(es: Vec<Expr>) -> Expr {
    Expr::Or { es }
}

pub(crate) fn and(es: Vec<Expr>) -> Expr {
    Expr::And { es }
}

#[allow(clippy::too_many_arguments)]
pub(crate) fn monitor(
    name: &str,
    suspects: Vec<TrackRef>,
    condition: Expr,
    set: Time,
    healing: Healing,
    code: Option<&str>,
    reads: Vec<TrackRef>,
) -> Fault {
    Fault {
        name: name.into(),
        span: S,
        suspects,
        condition,
        debounce: Debounce::Time { set },
        healing,
        code: code.map(String::from),
        plausibility: reads.len() >= 2,
        reads,
    }
}

fn mode(name: &str, demand: Demand, limit: f64, rate: Option<f64>) -> Mode {
    Mode {
        name: name.into(),
        span: S,
        demand,
        limit,
        rate,
        tolerates: Vec::new(),
    }
}

pub(crate) fn edge(from: Source, to: usize, guard: Expr, dwell: Option<Time>) -> Transition {
    Transition {
        span: S,
        from,
        to,
        guard,
        dwell,
    }
}

/// `van_throttle` exactly as DESIGN.md writes it. `reads` follows lowering: the tracks a
/// condition names (`X.a`, `X.a.volts`), not those behind a merged value, so `tracking` and
/// `brake_conflict` are not plausibility checks.
pub(crate) fn van() -> Model {
    let heal = Healing::After { time: ms(200) };
    let pedal = sig(Signal::Merged { sensor: PEDAL });
    let faults = vec![
        monitor(
            "pedal_a_low",
            vec![PA],
            cmp(volts(PA), Compare::Below { x: 0.25 }),
            ms(20),
            heal,
            Some("P2122"),
            vec![PA],
        ),
        monitor(
            "pedal_a_high",
            vec![PA],
            cmp(volts(PA), Compare::Above { x: 4.75 }),
            ms(20),
            heal,
            Some("P2123"),
            vec![PA],
        ),
        monitor(
            "pedal_b_low",
            vec![PB],
            cmp(volts(PB), Compare::Below { x: 0.15 }),
            ms(20),
            heal,
            Some("P2127"),
            vec![PB],
        ),
        monitor(
            "pedal_b_high",
            vec![PB],
            cmp(volts(PB), Compare::Above { x: 2.40 }),
            ms(20),
            heal,
            Some("P2128"),
            vec![PB],
        ),
        monitor(
            "pedal_disagree",
            vec![PA, PB],
            cmp(
                Term::AbsDiff {
                    a: Signal::Track { track: PA },
                    b: Signal::Track { track: PB },
                },
                Compare::Above { x: 6.0 },
            ),
            ms(40),
            Healing::Latch,
            Some("P2138"),
            vec![PA, PB],
        ),
        monitor(
            "throttle_a_range",
            vec![TA],
            cmp(volts(TA), Compare::Outside { lo: 0.2, hi: 4.8 }),
            ms(10),
            Healing::Latch,
            None,
            vec![TA],
        ),
        monitor(
            "throttle_b_range",
            vec![TB],
            cmp(volts(TB), Compare::Outside { lo: 0.2, hi: 4.8 }),
            ms(10),
            Healing::Latch,
            None,
            vec![TB],
        ),
        monitor(
            "throttle_disagree",
            vec![TA, TB],
            cmp(
                Term::AbsDiff {
                    a: Signal::Track { track: TA },
                    b: Signal::Track { track: TB },
                },
                Compare::Above { x: 6.0 },
            ),
            ms(15),
            Healing::Latch,
            Some("P2135"),
            vec![TA, TB],
        ),
        monitor(
            "tracking",
            vec![],
            cmp(
                Term::AbsDiff {
                    a: Signal::Merged { sensor: THROTTLE },
                    b: Signal::Target,
                },
                Compare::Above { x: 10.0 },
            ),
            ms(250),
            Healing::Latch,
            Some("P2119"),
            vec![],
        ),
        monitor(
            "brake_conflict",
            vec![],
            and(vec![
                Expr::Switch { switch: 0, span: S },
                cmp(pedal, Compare::Above { x: 10.0 }),
            ]),
            ms(100),
            Healing::After { time: ms(100) },
            None,
            vec![],
        ),
    ];
    let pedal_below_3 = || cmp(pedal, Compare::Below { x: 3.0 });
    let transitions = vec![
        edge(
            Source::Any,
            SHUTDOWN,
            or(vec![
                fault(THROTTLE_A_RANGE),
                fault(THROTTLE_B_RANGE),
                fault(THROTTLE_DISAGREE),
                fault(TRACKING),
            ]),
            None,
        ),
        edge(
            Source::Mode(NORMAL),
            IDLE_ONLY,
            or(vec![fault(PEDAL_DISAGREE), fault(BRAKE_CONFLICT)]),
            None,
        ),
        edge(
            Source::Mode(NORMAL),
            REDUCED,
            or(vec![suspect(PA), suspect(PB)]),
            None,
        ),
        edge(
            Source::Mode(REDUCED),
            IDLE_ONLY,
            or(vec![
                fault(PEDAL_DISAGREE),
                and(vec![suspect(PA), suspect(PB)]),
            ]),
            None,
        ),
        edge(
            Source::Mode(REDUCED),
            NORMAL,
            and(vec![not(suspect(PA)), not(suspect(PB)), pedal_below_3()]),
            Some(ms(500)),
        ),
        edge(
            Source::Mode(IDLE_ONLY),
            NORMAL,
            and(vec![
                not(fault(PEDAL_DISAGREE)),
                not(fault(BRAKE_CONFLICT)),
                pedal_below_3(),
            ]),
            Some(ms(1000)),
        ),
    ];
    Model {
        name: "van_throttle".into(),
        name_span: S,
        period: ms(5),
        supply: 5.0,
        sensors: vec![
            Sensor {
                name: "pedal".into(),
                span: S,
                tracks: vec![track("a", 0.80, 4.00), track("b", 0.40, 2.00)],
                filter: ms(8),
                open_reads: 0.0,
                combine: Combine::Min,
            },
            Sensor {
                name: "throttle".into(),
                span: S,
                tracks: vec![track("a", 0.50, 4.50), track("b", 4.50, 0.50)],
                filter: ms(1),
                open_reads: 0.0,
                combine: Combine::Max,
            },
        ],
        feedback: THROTTLE,
        driver: Some(PEDAL),
        inputs: vec![Input {
            name: "idle_request".into(),
            span: S,
            lo: 0.0,
            hi: 12.0,
        }],
        switches: vec![Switch {
            name: "brake".into(),
            span: S,
        }],
        actuator: Actuator {
            span: S,
            default: 7.0,
            idle: 8.0,
            open_from: 0.0,
            open_to: 100.0,
            open_time: ms(80),
            spring_from: 100.0,
            spring_to: 7.0,
            spring_time: ms(150),
        },
        faults,
        modes: vec![
            mode("normal", Demand::Sensor { sensor: PEDAL }, 100.0, None),
            mode(
                "reduced_power",
                Demand::Sensor { sensor: PEDAL },
                35.0,
                Some(25.0),
            ),
            mode("idle_only", Demand::Input { input: 0 }, 100.0, None),
            mode("shutdown", Demand::DriveOff, 100.0, None),
        ],
        start: NORMAL,
        start_span: S,
        transitions,
        assure: None,
    }
}
