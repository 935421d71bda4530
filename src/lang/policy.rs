//! Policy front end: the pest grammar `grammar/policy.pest`, an AST in which every node carries
//! its source span, and syntax diagnostics. Parsing never bails at the first error: a line that
//! does not parse is blanked and the rest parsed again, so independent errors show together.

use super::Span;
use crate::diag::Diagnostic;
use pest::Parser;
use pest::iterators::Pair;
use pest_derive::Parser;
use serde::Serialize;

#[derive(Parser)]
#[grammar = "../grammar/policy.pest"]
struct PolicyParser;

/// The most syntax errors reported in one run.
const MAX_SYNTAX_ERRORS: usize = 10;

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Ident {
    pub name: String,
    pub span: Span,
}

/// Units as written. `mV` and `us` are accepted and normalised in lowering.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub enum Unit {
    Volt,
    MilliVolt,
    Percent,
    PercentPerSec,
    Sec,
    MilliSec,
    MicroSec,
}

impl Unit {
    pub fn text(self) -> &'static str {
        match self {
            Unit::Volt => "V",
            Unit::MilliVolt => "mV",
            Unit::Percent => "%",
            Unit::PercentPerSec => "%/s",
            Unit::Sec => "s",
            Unit::MilliSec => "ms",
            Unit::MicroSec => "us",
        }
    }

    fn parse(s: &str) -> Option<Unit> {
        Some(match s {
            "V" => Unit::Volt,
            "mV" => Unit::MilliVolt,
            "%" => Unit::Percent,
            "%/s" => Unit::PercentPerSec,
            "s" => Unit::Sec,
            "ms" => Unit::MilliSec,
            "us" => Unit::MicroSec,
            _ => return None,
        })
    }
}

/// A number with its unit, as written.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Quantity {
    /// The number's text exactly as written (for the canonical printer).
    pub text: String,
    pub value: f64,
    pub unit: Option<Unit>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Integer {
    pub value: i64,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PolicyAst {
    pub name: Ident,
    pub items: Vec<Item>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum Item {
    Period(Quantity, Span),
    Supply(Quantity, Span),
    Sensor(SensorAst),
    Input(InputAst),
    Switch(Ident, Span),
    Actuator(ActuatorAst),
    Fault(FaultAst),
    Mode(ModeAst),
    Start(Ident, Span),
    Transition(TransitionAst),
    Assure(AssureAst),
}

impl Item {
    pub fn span(&self) -> Span {
        match self {
            Item::Period(_, s) | Item::Supply(_, s) | Item::Switch(_, s) | Item::Start(_, s) => *s,
            Item::Sensor(x) => x.span,
            Item::Input(x) => x.span,
            Item::Actuator(x) => x.span,
            Item::Fault(x) => x.span,
            Item::Mode(x) => x.span,
            Item::Transition(x) => x.span,
            Item::Assure(x) => x.span,
        }
    }
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SensorAst {
    pub name: Ident,
    pub items: Vec<SensorItem>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum SensorItem {
    Track {
        name: Ident,
        points: Vec<(Quantity, Quantity)>,
        span: Span,
    },
    Filter(Quantity, Span),
    OpenReads(Quantity, Span),
    Combine(Ident, Span),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct InputAst {
    pub name: Ident,
    pub lo: Quantity,
    pub hi: Quantity,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ActuatorAst {
    pub items: Vec<ActuatorItem>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum ActuatorItem {
    Default(Quantity, Span),
    Idle(Quantity, Span),
    Open {
        from: Quantity,
        to: Quantity,
        time: Quantity,
        span: Span,
    },
    Spring {
        from: Quantity,
        to: Quantity,
        time: Quantity,
        span: Span,
    },
    Feedback(Ident, Span),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TrackRefAst {
    pub sensor: Ident,
    pub track: Ident,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FaultAst {
    pub name: Ident,
    pub suspects: Vec<TrackRefAst>,
    pub condition: ExprAst,
    pub debounce: Option<DebounceAst>,
    pub healing: Option<HealingAst>,
    pub code: Option<Ident>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum DebounceAst {
    For(Quantity, Span),
    Count {
        up: Integer,
        down: Integer,
        fail: Integer,
        pass: Option<Integer>,
        span: Span,
    },
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum HealingAst {
    Heal(Quantity, Span),
    Latch(Span),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ModeAst {
    pub name: Ident,
    pub items: Vec<ModeItem>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum DemandAst {
    Name(Ident),
    Fixed(Quantity),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum ModeItem {
    Demand(DemandAst, Span),
    Limit(Quantity, Span),
    Rate(Quantity, Span),
    DriveOff(Span),
    Tolerates(Vec<Ident>, Span),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TransitionAst {
    /// `any` or a mode name.
    pub from: Ident,
    pub to: Ident,
    pub guard: ExprAst,
    pub dwell: Option<Quantity>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AssureAst {
    pub items: Vec<AssureItem>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum AssureItem {
    Faults(Ident, Span),
    Excess {
        below: Quantity,
        within: Quantity,
        span: Span,
    },
    /// `never above X unless driver above Y`; the name after `unless` is kept for checking.
    Never {
        above: Quantity,
        unless: Option<(Ident, Quantity)>,
        span: Span,
    },
    Idle {
        within: Quantity,
        span: Span,
    },
}

/// A dotted name: `pedal`, `pedal.a`, `pedal.a.volts`, `target`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SignalAst {
    pub parts: Vec<Ident>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum TermAst {
    Signal(SignalAst),
    Diff(SignalAst, SignalAst, Span),
    AbsDiff(SignalAst, SignalAst, Span),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum CmpAst {
    Above(Quantity),
    Below(Quantity),
    Outside(Quantity, Quantity),
    Inside(Quantity, Quantity),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum ExprAst {
    Or(Vec<ExprAst>, Span),
    And(Vec<ExprAst>, Span),
    Not(Box<ExprAst>, Span),
    /// A fault or a switch, resolved in lowering.
    Name(Ident),
    Suspect(TrackRefAst, Span),
    Compare(TermAst, CmpAst, Span),
    /// Written in parentheses: kept so the printer can reproduce them.
    Paren(Box<ExprAst>, Span),
}

impl ExprAst {
    pub fn span(&self) -> Span {
        match self {
            ExprAst::Or(_, s)
            | ExprAst::And(_, s)
            | ExprAst::Not(_, s)
            | ExprAst::Suspect(_, s)
            | ExprAst::Compare(_, _, s)
            | ExprAst::Paren(_, s) => *s,
            ExprAst::Name(i) => i.span,
        }
    }
}

/// Parses a policy. Returns the tree when the text parsed (possibly after blanking lines that
/// did not), and every syntax diagnostic; a tree is only returned when there were none.
pub fn parse(src: &str) -> (Option<PolicyAst>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let mut text = src.to_string();
    loop {
        match PolicyParser::parse(Rule::file, &text) {
            Ok(mut pairs) => {
                if !diags.is_empty() {
                    return (None, diags);
                }
                let ast = pairs
                    .next()
                    .and_then(|file| file.into_inner().next())
                    .map(build_policy);
                return (ast, diags);
            }
            Err(e) => {
                let (d, line_range) = syntax_diagnostic(&text, &e);
                let repeated = diags.last().is_some_and(|p: &Diagnostic| p.span == d.span);
                if !repeated {
                    diags.push(d);
                }
                let blankable = line_range.is_some_and(|(a, b)| text[a..b].trim() != "");
                if repeated || !blankable || diags.len() >= MAX_SYNTAX_ERRORS {
                    return (None, diags);
                }
                if let Some((a, b)) = line_range {
                    let blank: String = text[a..b]
                        .chars()
                        .map(|c| if c == '\n' { c } else { ' ' })
                        .collect();
                    // Keep byte offsets: replace each char by as many spaces as its UTF-8 length.
                    let blank: String = text[a..b]
                        .chars()
                        .zip(blank.chars())
                        .map(|(o, b)| b.to_string().repeat(o.len_utf8()))
                        .collect();
                    text.replace_range(a..b, &blank);
                }
            }
        }
    }
}

/// Words for what the parser expected, so messages speak the user's language.
fn rule_words(r: &Rule) -> Option<&'static str> {
    Some(match r {
        Rule::ident | Rule::name_atom => "a name",
        Rule::number => "a number",
        Rule::quantity => "a quantity such as `20 ms` or `4.5 V`",
        Rule::unit => "a unit (V, mV, %, %/s, s, ms, us)",
        Rule::integer => "a whole number",
        Rule::policy => "`policy NAME { ... }`",
        Rule::period => "`period`",
        Rule::supply => "`supply`",
        Rule::sensor => "`sensor`",
        Rule::input => "`input`",
        Rule::switch => "`switch`",
        Rule::actuator => "`actuator`",
        Rule::fault => "`fault`",
        Rule::mode => "`mode`",
        Rule::start => "`start`",
        Rule::assure => "`assure`",
        Rule::transition => "a transition `FROM -> TO when GUARD`",
        Rule::track => "`track`",
        Rule::point => "a point `VOLTS at PERCENT`",
        Rule::filter => "`filter`",
        Rule::open_reads => "`open reads`",
        Rule::combine => "`combine`",
        Rule::combine_kind => "`min` or `max`",
        Rule::act_default => "`default`",
        Rule::act_idle => "`idle`",
        Rule::act_open => "`open`",
        Rule::act_spring => "`spring`",
        Rule::act_feedback => "`feedback`",
        Rule::suspects => "`suspects`",
        Rule::debounce | Rule::for_time => "`for TIME`",
        Rule::count => "`count up N down M to L`",
        Rule::healing | Rule::heal => "`heal TIME`",
        Rule::latch => "`latch`",
        Rule::code => "`code`",
        Rule::dtc => "a trouble code such as `P2122`",
        Rule::demand => "`demand`",
        Rule::limit => "`limit`",
        Rule::rate => "`rate`",
        Rule::drive_off => "`drive off`",
        Rule::tolerates => "`tolerates`",
        Rule::dwell => "`for TIME`",
        Rule::faults_scope => "`faults single` or `faults double`",
        Rule::req_excess => "`excess below X within T`",
        Rule::req_never => "`never above X`",
        Rule::req_idle => "`idle within T of release`",
        Rule::expr | Rule::conj | Rule::neg => "a condition",
        Rule::kw_and => "`and`",
        Rule::kw_or => "`or`",
        Rule::kw_not => "`not`",
        Rule::suspect => "`suspect(SENSOR.TRACK)`",
        Rule::comparison | Rule::term | Rule::signal => "a signal such as `pedal.a`",
        Rule::abs_diff => "`|A - B|`",
        Rule::diff => "`A - B`",
        Rule::cmp | Rule::above | Rule::below | Rule::outside | Rule::inside => {
            "a comparison (`above`, `below`, `outside`, `inside`)"
        }
        Rule::track_ref => "a track such as `pedal.a`",
        Rule::EOI => "the end of the file",
        _ => return None,
    })
}

/// Turns a pest error into our diagnostic, and returns the byte range of the line it is on.
fn syntax_diagnostic(
    src: &str,
    e: &pest::error::Error<Rule>,
) -> (Diagnostic, Option<(usize, usize)>) {
    use pest::error::{ErrorVariant, InputLocation};
    let pos = match e.location {
        InputLocation::Pos(p) => p,
        InputLocation::Span((a, _)) => a,
    };
    let pos = pos.min(src.len());
    // The span is the token at the error position (up to white space), at least one byte.
    let tail = &src[pos..];
    let len = tail.find(|c: char| c.is_whitespace()).unwrap_or(tail.len());
    let end = if len == 0 {
        (pos + tail.chars().next().map_or(0, |c| c.len_utf8())).min(src.len())
    } else {
        pos + len
    };
    let span = Span::new(pos, end);
    let found = if tail.is_empty() {
        "the end of the file".to_string()
    } else {
        format!("`{}`", &src[pos..end])
    };
    let (message, hint) = match &e.variant {
        ErrorVariant::ParsingError { positives, .. } => {
            let mut words: Vec<&str> = positives.iter().filter_map(rule_words).collect();
            words.dedup();
            let mut seen = Vec::new();
            for w in words {
                if !seen.contains(&w) {
                    seen.push(w);
                }
            }
            let expected = match seen.len() {
                0 => "something else".to_string(),
                1 => seen[0].to_string(),
                _ => {
                    let (last, rest) = seen
                        .split_last()
                        .map(|(l, r)| (*l, r.join(", ")))
                        .unwrap_or(("", String::new()));
                    format!("{rest} or {last}")
                }
            };
            (
                format!("expected {expected}, found {found}"),
                hint_for(src, pos, &seen),
            )
        }
        ErrorVariant::CustomError { message } => (message.clone(), String::new()),
    };
    let line_start = src[..pos].rfind('\n').map_or(0, |i| i + 1);
    let line_end = src[pos..].find('\n').map_or(src.len(), |i| pos + i);
    let d = Diagnostic::error("syntax", span, message)
        .with_label("not understood here")
        .with_hint(hint);
    (d, Some((line_start, line_end)))
}

fn hint_for(src: &str, pos: usize, expected: &[&str]) -> String {
    let before = src[..pos].trim_end();
    // A misspelt keyword: offer the nearest one the parser would have taken here.
    let token: String = src[pos..]
        .chars()
        .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
        .collect();
    let keywords: Vec<&str> = expected
        .iter()
        .filter_map(|w| w.strip_prefix('`').and_then(|r| r.split(['`', ' ']).next()))
        .filter(|k| k.chars().all(|c| c.is_ascii_alphabetic()))
        .collect();
    if !token.is_empty()
        && let Some(k) = crate::diag::did_you_mean(&token, keywords.iter().copied())
    {
        return format!("did you mean `{k}`?");
    }
    if expected.iter().any(|w| w.starts_with("a unit")) {
        return "every quantity carries its unit, e.g. `20 ms`, `4.5 V`, `35 %`, `25 %/s`".into();
    }
    if before.ends_with("->") {
        return "a transition reads `FROM -> TO when GUARD`, with TO a mode name".into();
    }
    if expected
        .iter()
        .any(|w| w.contains("a condition") || w.contains("a signal"))
    {
        return "conditions combine fault names, `suspect(X.a)`, switches and comparisons like `pedal below 3 %` with `and`, `or`, `not`".into();
    }
    "README.md describes the form of each line of a policy".into()
}

// ---------------------------------------------------------------------------------------------
// Building the AST. The grammar guarantees the shape of each pair, so the builders walk
// children positionally; a child missing against the grammar would be a grammar bug, and the
// builders degrade to empty values rather than panic.

/// The pair's span without the white space and comments pest skipped at its end (a
/// repetition that matched nothing still consumes the blank before it).
fn span(p: &Pair<'_, Rule>) -> Span {
    let sp = p.as_span();
    let mut text = sp.as_str();
    loop {
        let t = text.trim_end();
        // The policy language has no strings, so `#` always starts a comment.
        let last_line_start = t.rfind('\n').map_or(0, |i| i + 1);
        match t[last_line_start..].find('#') {
            Some(h) if last_line_start + h > 0 => text = &t[..last_line_start + h],
            _ => {
                text = t;
                break;
            }
        }
    }
    Span::new(sp.start(), sp.start() + text.len())
}

fn ident(p: Pair<'_, Rule>) -> Ident {
    Ident {
        name: p.as_str().to_string(),
        span: span(&p),
    }
}

fn missing_ident(at: Span) -> Ident {
    Ident {
        name: String::new(),
        span: at,
    }
}

fn quantity(p: Pair<'_, Rule>) -> Quantity {
    let sp = span(&p);
    let mut inner = p.into_inner();
    let num = inner.next();
    let text = num
        .as_ref()
        .map_or(String::new(), |n| n.as_str().to_string());
    let value = text.parse::<f64>().unwrap_or(f64::NAN);
    let unit = inner.next().and_then(|u| Unit::parse(u.as_str()));
    Quantity {
        text,
        value,
        unit,
        span: sp,
    }
}

fn missing_quantity(at: Span) -> Quantity {
    Quantity {
        text: String::new(),
        value: f64::NAN,
        unit: None,
        span: at,
    }
}

fn integer(p: Pair<'_, Rule>) -> Integer {
    Integer {
        value: p.as_str().parse().unwrap_or(i64::MAX),
        span: span(&p),
    }
}

struct Kids<'a> {
    it: pest::iterators::Pairs<'a, Rule>,
    at: Span,
}

impl<'a> Kids<'a> {
    fn of(p: Pair<'a, Rule>) -> (Span, Kids<'a>) {
        let sp = span(&p);
        (
            sp,
            Kids {
                it: p.into_inner(),
                at: sp,
            },
        )
    }
    fn next(&mut self) -> Option<Pair<'a, Rule>> {
        self.it.next()
    }
    fn ident(&mut self) -> Ident {
        self.next().map_or_else(|| missing_ident(self.at), ident)
    }
    fn quantity(&mut self) -> Quantity {
        self.next()
            .map_or_else(|| missing_quantity(self.at), quantity)
    }
}

fn build_policy(p: Pair<'_, Rule>) -> PolicyAst {
    let (sp, mut k) = Kids::of(p);
    let name = k.ident();
    let items = k.it.filter_map(build_item).collect();
    PolicyAst {
        name,
        items,
        span: sp,
    }
}

fn build_item(p: Pair<'_, Rule>) -> Option<Item> {
    let rule = p.as_rule();
    let (sp, mut k) = Kids::of(p);
    Some(match rule {
        Rule::period => Item::Period(k.quantity(), sp),
        Rule::supply => Item::Supply(k.quantity(), sp),
        Rule::sensor => {
            let name = k.ident();
            let items = k.it.filter_map(build_sensor_item).collect();
            Item::Sensor(SensorAst {
                name,
                items,
                span: sp,
            })
        }
        Rule::input => {
            let name = k.ident();
            let lo = k.quantity();
            let hi = k.quantity();
            Item::Input(InputAst {
                name,
                lo,
                hi,
                span: sp,
            })
        }
        Rule::switch => Item::Switch(k.ident(), sp),
        Rule::actuator => Item::Actuator(ActuatorAst {
            items: k.it.filter_map(build_actuator_item).collect(),
            span: sp,
        }),
        Rule::fault => Item::Fault(build_fault(sp, k)),
        Rule::mode => {
            let name = k.ident();
            let items = k.it.filter_map(build_mode_item).collect();
            Item::Mode(ModeAst {
                name,
                items,
                span: sp,
            })
        }
        Rule::start => Item::Start(k.ident(), sp),
        Rule::transition => {
            let from = k.ident();
            let to = k.ident();
            let guard = k
                .next()
                .map_or(ExprAst::Name(missing_ident(sp)), build_expr);
            let dwell = k.next().map(|d| Kids::of(d).1.quantity());
            Item::Transition(TransitionAst {
                from,
                to,
                guard,
                dwell,
                span: sp,
            })
        }
        Rule::assure => Item::Assure(AssureAst {
            items: k.it.filter_map(build_assure_item).collect(),
            span: sp,
        }),
        _ => return None,
    })
}

fn build_sensor_item(p: Pair<'_, Rule>) -> Option<SensorItem> {
    let rule = p.as_rule();
    let (sp, mut k) = Kids::of(p);
    Some(match rule {
        Rule::track => {
            let name = k.ident();
            let points =
                k.it.map(|pt| {
                    let (_, mut pk) = Kids::of(pt);
                    (pk.quantity(), pk.quantity())
                })
                .collect();
            SensorItem::Track {
                name,
                points,
                span: sp,
            }
        }
        Rule::filter => SensorItem::Filter(k.quantity(), sp),
        Rule::open_reads => SensorItem::OpenReads(k.quantity(), sp),
        Rule::combine => SensorItem::Combine(k.ident(), sp),
        _ => return None,
    })
}

fn build_actuator_item(p: Pair<'_, Rule>) -> Option<ActuatorItem> {
    let rule = p.as_rule();
    let (sp, mut k) = Kids::of(p);
    Some(match rule {
        Rule::act_default => ActuatorItem::Default(k.quantity(), sp),
        Rule::act_idle => ActuatorItem::Idle(k.quantity(), sp),
        Rule::act_open => ActuatorItem::Open {
            from: k.quantity(),
            to: k.quantity(),
            time: k.quantity(),
            span: sp,
        },
        Rule::act_spring => ActuatorItem::Spring {
            from: k.quantity(),
            to: k.quantity(),
            time: k.quantity(),
            span: sp,
        },
        Rule::act_feedback => ActuatorItem::Feedback(k.ident(), sp),
        _ => return None,
    })
}

fn build_track_ref(p: Pair<'_, Rule>) -> TrackRefAst {
    let (sp, mut k) = Kids::of(p);
    TrackRefAst {
        sensor: k.ident(),
        track: k.ident(),
        span: sp,
    }
}

fn build_fault(sp: Span, mut k: Kids<'_>) -> FaultAst {
    let name = k.ident();
    let mut fault = FaultAst {
        name,
        suspects: Vec::new(),
        condition: ExprAst::Name(missing_ident(sp)),
        debounce: None,
        healing: None,
        code: None,
        span: sp,
    };
    for c in k.it {
        match c.as_rule() {
            Rule::suspects => fault.suspects = c.into_inner().map(build_track_ref).collect(),
            Rule::expr => fault.condition = build_expr(c),
            Rule::debounce => {
                if let Some(d) = c.into_inner().next() {
                    let rule = d.as_rule();
                    let (dsp, mut dk) = Kids::of(d);
                    fault.debounce = Some(match rule {
                        Rule::count => {
                            let mut ints = dk.it.map(integer);
                            let zero = Integer {
                                value: 0,
                                span: dsp,
                            };
                            let up = ints.next().unwrap_or(zero.clone());
                            let down = ints.next().unwrap_or(zero.clone());
                            let fail = ints.next().unwrap_or(zero);
                            let pass = ints.next();
                            DebounceAst::Count {
                                up,
                                down,
                                fail,
                                pass,
                                span: dsp,
                            }
                        }
                        _ => DebounceAst::For(dk.quantity(), dsp),
                    });
                }
            }
            Rule::healing => {
                if let Some(h) = c.into_inner().next() {
                    let rule = h.as_rule();
                    let (hsp, mut hk) = Kids::of(h);
                    fault.healing = Some(match rule {
                        Rule::latch => HealingAst::Latch(hsp),
                        _ => HealingAst::Heal(hk.quantity(), hsp),
                    });
                }
            }
            Rule::code => fault.code = Some(Kids::of(c).1.ident()),
            _ => {}
        }
    }
    fault
}

fn build_mode_item(p: Pair<'_, Rule>) -> Option<ModeItem> {
    let rule = p.as_rule();
    let (sp, mut k) = Kids::of(p);
    Some(match rule {
        Rule::demand => {
            let d = k.next()?;
            let demand = match d.as_rule() {
                Rule::quantity => DemandAst::Fixed(quantity(d)),
                _ => DemandAst::Name(ident(d)),
            };
            ModeItem::Demand(demand, sp)
        }
        Rule::limit => ModeItem::Limit(k.quantity(), sp),
        Rule::rate => ModeItem::Rate(k.quantity(), sp),
        Rule::drive_off => ModeItem::DriveOff(sp),
        Rule::tolerates => ModeItem::Tolerates(k.it.map(ident).collect(), sp),
        _ => return None,
    })
}

fn build_assure_item(p: Pair<'_, Rule>) -> Option<AssureItem> {
    let rule = p.as_rule();
    let (sp, mut k) = Kids::of(p);
    Some(match rule {
        Rule::faults_scope => AssureItem::Faults(k.ident(), sp),
        Rule::req_excess => AssureItem::Excess {
            below: k.quantity(),
            within: k.quantity(),
            span: sp,
        },
        Rule::req_never => {
            let above = k.quantity();
            let unless = k.next().map(|who| {
                let who = ident(who);
                (who, k.quantity())
            });
            AssureItem::Never {
                above,
                unless,
                span: sp,
            }
        }
        Rule::req_idle => AssureItem::Idle {
            within: k.quantity(),
            span: sp,
        },
        _ => return None,
    })
}

fn build_expr(p: Pair<'_, Rule>) -> ExprAst {
    let rule = p.as_rule();
    let sp = span(&p);
    match rule {
        Rule::expr | Rule::conj => {
            let parts: Vec<ExprAst> = p
                .into_inner()
                .filter(|c| !matches!(c.as_rule(), Rule::kw_and | Rule::kw_or))
                .map(build_expr)
                .collect();
            if parts.len() == 1 {
                parts
                    .into_iter()
                    .next()
                    .unwrap_or(ExprAst::Name(missing_ident(sp)))
            } else if rule == Rule::expr {
                ExprAst::Or(parts, sp)
            } else {
                ExprAst::And(parts, sp)
            }
        }
        Rule::neg => {
            let mut inner = p.into_inner();
            match inner.next() {
                Some(c) if c.as_rule() == Rule::kw_not => {
                    let e = inner
                        .next()
                        .map_or(ExprAst::Name(missing_ident(sp)), build_expr);
                    ExprAst::Not(Box::new(e), sp)
                }
                Some(c) if c.as_rule() == Rule::expr => ExprAst::Paren(Box::new(build_expr(c)), sp),
                Some(c) => build_expr(c),
                None => ExprAst::Name(missing_ident(sp)),
            }
        }
        Rule::suspect => {
            let t = p.into_inner().next().map(build_track_ref);
            match t {
                Some(t) => ExprAst::Suspect(t, sp),
                None => ExprAst::Name(missing_ident(sp)),
            }
        }
        Rule::comparison => {
            let mut inner = p.into_inner();
            let term = inner.next().map(build_term);
            let cmp = inner
                .next()
                .and_then(|c| c.into_inner().next())
                .map(build_cmp);
            match (term, cmp) {
                (Some(t), Some(c)) => ExprAst::Compare(t, c, sp),
                _ => ExprAst::Name(missing_ident(sp)),
            }
        }
        Rule::name_atom => ExprAst::Name(p.into_inner().next().map_or(missing_ident(sp), ident)),
        _ => ExprAst::Name(missing_ident(sp)),
    }
}

fn build_signal(p: Pair<'_, Rule>) -> SignalAst {
    let sp = span(&p);
    SignalAst {
        parts: p.into_inner().map(ident).collect(),
        span: sp,
    }
}

fn build_term(p: Pair<'_, Rule>) -> TermAst {
    let sp = span(&p);
    let Some(t) = p.into_inner().next() else {
        return TermAst::Signal(SignalAst {
            parts: Vec::new(),
            span: sp,
        });
    };
    let rule = t.as_rule();
    let tsp = span(&t);
    match rule {
        Rule::abs_diff | Rule::diff => {
            let mut s = t.into_inner().map(build_signal);
            let empty = SignalAst {
                parts: Vec::new(),
                span: tsp,
            };
            let a = s.next().unwrap_or(empty.clone());
            let b = s.next().unwrap_or(empty);
            if rule == Rule::abs_diff {
                TermAst::AbsDiff(a, b, tsp)
            } else {
                TermAst::Diff(a, b, tsp)
            }
        }
        _ => TermAst::Signal(build_signal(t)),
    }
}

fn build_cmp(p: Pair<'_, Rule>) -> CmpAst {
    let rule = p.as_rule();
    let (_, mut k) = Kids::of(p);
    match rule {
        Rule::above => CmpAst::Above(k.quantity()),
        Rule::below => CmpAst::Below(k.quantity()),
        Rule::outside => CmpAst::Outside(k.quantity(), k.quantity()),
        _ => CmpAst::Inside(k.quantity(), k.quantity()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const REFERENCE: &str = include_str!("../../scenarios/van/van_throttle.limp");

    #[test]
    fn reference_policy_parses() {
        let (ast, diags) = parse(REFERENCE);
        assert!(diags.is_empty(), "{diags:?}");
        let ast = ast.expect("tree");
        assert_eq!(ast.name.name, "van_throttle");
        let faults = ast
            .items
            .iter()
            .filter(|i| matches!(i, Item::Fault(_)))
            .count();
        let transitions = ast
            .items
            .iter()
            .filter(|i| matches!(i, Item::Transition(_)))
            .count();
        assert_eq!((faults, transitions), (10, 6));
    }

    #[test]
    fn guard_structure_follows_precedence() {
        let src = "policy p { a -> b when x or y and not z }";
        let (ast, d) = parse(src);
        assert!(d.is_empty(), "{d:?}");
        let Some(Item::Transition(t)) = ast.and_then(|a| a.items.into_iter().next()) else {
            panic!("no transition")
        };
        let ExprAst::Or(parts, _) = t.guard else {
            panic!("not an or")
        };
        assert!(matches!(parts[0], ExprAst::Name(_)));
        assert!(matches!(&parts[1], ExprAst::And(v, _) if matches!(v[1], ExprAst::Not(..))));
    }

    #[test]
    fn keywords_are_matched_whole() {
        let src = "policy p { a -> b when notable or orange and android }";
        let (ast, d) = parse(src);
        assert!(d.is_empty(), "{d:?}");
        let Some(Item::Transition(t)) = ast.and_then(|a| a.items.into_iter().next()) else {
            panic!("no transition")
        };
        let ExprAst::Or(parts, _) = t.guard else {
            panic!("not an or")
        };
        assert!(matches!(&parts[0], ExprAst::Name(i) if i.name == "notable"));
    }

    #[test]
    fn independent_syntax_errors_are_all_reported() {
        let src = "policy p {\n  period 5 ms ms\n  supply 5 V\n  swich brake\n}\n";
        let (ast, d) = parse(src);
        assert!(ast.is_none());
        assert_eq!(d.len(), 2, "{d:?}");
    }
}
