//! Scenario front end: the pest parser for `grammar/scenario.pest`, the scenario AST (every node
//! with its byte span, every number with its text as written) and the translation of pest's
//! errors into our diagnostics, with line-blanking recovery so one run reports many errors.

// A scenario's tree holds tens of nodes that keep every number's text for the printer; boxing
// the larger variants would add indirection for no measurable saving.
#![allow(clippy::large_enum_variant)]

use crate::diag::Diagnostic;
use crate::lang::Span;
use pest::Parser;
use pest::error::{ErrorVariant, InputLocation};
use pest::iterators::Pair;
use serde::Serialize;

#[derive(pest_derive::Parser)]
#[grammar = "../grammar/scenario.pest"]
struct ScenarioParser;

/// How many independent syntax errors one parse reports at most.
pub const MAX_SYNTAX_ERRORS: usize = 10;

/// A parsed scenario file.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ScenarioAst {
    pub name: Ident,
    /// Header lines, events and expectations in file order.
    pub items: Vec<Item>,
    /// Every `#` comment with its span, for a printer that keeps them.
    pub comments: Vec<Comment>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Ident {
    pub text: String,
    pub span: Span,
}

/// A comment, `#` included, up to the end of its line.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Comment {
    pub text: String,
    pub span: Span,
}

/// The units the scenario language knows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub enum Unit {
    Micros,
    Millis,
    Seconds,
    Percent,
    Volts,
    Millivolts,
}

impl Unit {
    /// The spelling in source.
    pub fn text(self) -> &'static str {
        match self {
            Unit::Micros => "us",
            Unit::Millis => "ms",
            Unit::Seconds => "s",
            Unit::Percent => "%",
            Unit::Volts => "V",
            Unit::Millivolts => "mV",
        }
    }

    fn parse(text: &str) -> Option<Unit> {
        Some(match text {
            "us" => Unit::Micros,
            "ms" => Unit::Millis,
            "s" => Unit::Seconds,
            "%" => Unit::Percent,
            "V" => Unit::Volts,
            "mV" => Unit::Millivolts,
            _ => return None,
        })
    }
}

/// The unit after a number as written; `unit` is `None` for a spelling the language does not
/// accept (`sec`, `v`, ...), which the resolver reports.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct UnitText {
    pub text: String,
    pub unit: Option<Unit>,
    pub span: Span,
}

/// A number with its unit, both as written.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Quantity {
    /// The number's text, sign included (`+0.3`).
    pub number: String,
    /// The number's value; infinite when the text overflows `f64`.
    pub value: f64,
    pub number_span: Span,
    pub unit: Option<UnitText>,
    pub span: Span,
}

/// A string literal; `value` is the text between the quotes.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct StrLit {
    pub value: String,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "item", rename_all = "snake_case")]
pub enum Item {
    /// `policy "path"`: the policy file, relative to the scenario file.
    Policy {
        path: StrLit,
        span: Span,
    },
    /// `length T`: how long the run lasts.
    Length {
        length: Quantity,
        span: Span,
    },
    Event(Event),
    Expect(Expect),
}

impl Item {
    pub fn span(&self) -> Span {
        match self {
            Item::Policy { span, .. } | Item::Length { span, .. } => *span,
            Item::Event(e) => e.span,
            Item::Expect(e) => e.span,
        }
    }
}

/// `at T ACTION`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Event {
    pub at: Quantity,
    pub action: ActionAst,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "action", rename_all = "snake_case")]
pub enum ActionAst {
    /// `NAME X %`, `NAME X % over T` or `NAME on|off`: what NAME is (sensor, input or switch)
    /// the policy decides.
    Set {
        name: Ident,
        value: SetValue,
        span: Span,
    },
    Break {
        target: Target,
        fault: FaultAst,
        span: Span,
    },
    /// `mend TARGET` or `mend TARGET KIND`.
    Mend {
        target: Target,
        kind: Option<FaultKindAst>,
        span: Span,
    },
    /// `key on` / `key off`.
    Key { on: OnOff, span: Span },
}

impl ActionAst {
    pub fn span(&self) -> Span {
        match self {
            ActionAst::Set { span, .. }
            | ActionAst::Break { span, .. }
            | ActionAst::Mend { span, .. }
            | ActionAst::Key { span, .. } => *span,
        }
    }
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum SetValue {
    Level {
        value: Quantity,
        over: Option<Quantity>,
    },
    Switch {
        on: OnOff,
    },
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct OnOff {
    pub on: bool,
    pub span: Span,
}

/// `pedal.a` (a track), `pedal` (a sensor) or `actuator`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Target {
    pub base: Ident,
    pub track: Option<Ident>,
    pub span: Span,
}

impl Target {
    /// The target as written, `pedal.a`.
    pub fn text(&self) -> String {
        match &self.track {
            Some(t) => format!("{}.{}", self.base.text, t.text),
            None => self.base.text.clone(),
        }
    }
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FaultAst {
    pub form: FaultForm,
    pub span: Span,
}

/// A fault as written after `break`, with its parameters.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum FaultForm {
    Open,
    ShortGround,
    ShortSupply,
    Stuck,
    Offset { volts: Quantity },
    Gain { percent: Quantity },
    Bridged { other: Target },
    Intermittent { open: Quantity, every: Quantity },
    GroundOffset { volts: Quantity },
    Supply { volts: Quantity },
    Weak { percent: Quantity },
    SpringBroken,
}

impl FaultForm {
    pub fn kind(&self) -> FaultKind {
        match self {
            FaultForm::Open => FaultKind::Open,
            FaultForm::ShortGround => FaultKind::ShortGround,
            FaultForm::ShortSupply => FaultKind::ShortSupply,
            FaultForm::Stuck => FaultKind::Stuck,
            FaultForm::Offset { .. } => FaultKind::Offset,
            FaultForm::Gain { .. } => FaultKind::Gain,
            FaultForm::Bridged { .. } => FaultKind::Bridged,
            FaultForm::Intermittent { .. } => FaultKind::Intermittent,
            FaultForm::GroundOffset { .. } => FaultKind::GroundOffset,
            FaultForm::Supply { .. } => FaultKind::Supply,
            FaultForm::Weak { .. } => FaultKind::Weak,
            FaultForm::SpringBroken => FaultKind::SpringBroken,
        }
    }
}

/// A kind of fault without its parameters: what `mend TARGET KIND` names.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FaultKind {
    Open,
    ShortGround,
    ShortSupply,
    Stuck,
    Offset,
    Gain,
    Bridged,
    Intermittent,
    GroundOffset,
    Supply,
    Weak,
    SpringBroken,
}

impl FaultKind {
    /// The keywords in source, `short ground`.
    pub fn words(self) -> &'static str {
        match self {
            FaultKind::Open => "open",
            FaultKind::ShortGround => "short ground",
            FaultKind::ShortSupply => "short supply",
            FaultKind::Stuck => "stuck",
            FaultKind::Offset => "offset",
            FaultKind::Gain => "gain",
            FaultKind::Bridged => "bridged",
            FaultKind::Intermittent => "intermittent",
            FaultKind::GroundOffset => "ground offset",
            FaultKind::Supply => "supply",
            FaultKind::Weak => "weak",
            FaultKind::SpringBroken => "spring broken",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct FaultKindAst {
    pub kind: FaultKind,
    pub span: Span,
}

/// `expect ...`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Expect {
    pub kind: ExpectAst,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ExpectAst {
    FaultBy {
        fault: Ident,
        by: Quantity,
    },
    FaultNever {
        fault: Ident,
    },
    ModeBy {
        mode: Ident,
        by: Quantity,
    },
    ModeNever {
        mode: Ident,
    },
    /// `opening at most|least X from T1 to T2` (boxed: it is much the largest variant).
    Opening(Box<OpeningAst>),
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct OpeningAst {
    pub bound: Bound,
    pub x: Quantity,
    pub from: Quantity,
    pub to: Quantity,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct Bound {
    pub at_most: bool,
    pub span: Span,
}

/// Parses a scenario. Never panics and never stops at the first syntax error: a line with an
/// error is blanked (its offsets kept) and the rest reparsed, up to [`MAX_SYNTAX_ERRORS`].
///
/// The AST, when given, is that of the text with the bad lines blanked, so that a checker can
/// also report name errors in the good lines; a caller must not run a scenario whose
/// diagnostics hold an error. `None` when no tree could be recovered.
pub fn parse(src: &str) -> (Option<ScenarioAst>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let mut text = src.to_string();
    loop {
        let err = match ScenarioParser::parse(Rule::file, &text) {
            Ok(mut pairs) => {
                let ast = pairs.next().and_then(|file| build_file(file, &text));
                if ast.is_none() {
                    diags.push(Diagnostic::error(
                        "internal",
                        Span::new(0, 0),
                        "the parse tree has an unexpected shape",
                    ));
                }
                return (ast, diags);
            }
            Err(e) => e,
        };
        let (pos, positives) = match (&err.location, &err.variant) {
            (InputLocation::Pos(p), ErrorVariant::ParsingError { positives, .. }) => {
                (*p, positives.clone())
            }
            (InputLocation::Span((p, _)), ErrorVariant::ParsingError { positives, .. }) => {
                (*p, positives.clone())
            }
            (
                InputLocation::Pos(p) | InputLocation::Span((p, _)),
                ErrorVariant::CustomError { .. },
            ) => (*p, Vec::new()),
        };
        let (pos, line_end) = match previous_line_end(&text, pos, &positives) {
            Some(end) => (end, true),
            None => (pos, false),
        };
        diags.push(syntax_diagnostic(&text, pos, line_end, &positives));
        // Recovery is pointless when the header itself is broken (every later line would
        // report the same missing `{`), when the bad line is already blank (the error is at
        // the end of the file), or when the budget is spent.
        let header = positives.iter().any(|r| {
            matches!(
                r,
                Rule::kw_scenario | Rule::scenario_name | Rule::open_brace | Rule::file
            )
        });
        if header || diags.len() >= MAX_SYNTAX_ERRORS || !blank_line(&mut text, pos) {
            return (None, diags);
        }
    }
}

/// Replaces the characters of the line holding `pos` by spaces; false when it has nothing
/// left to blank.
fn blank_line(text: &mut String, pos: usize) -> bool {
    let pos = text.floor_char_boundary(pos.min(text.len()));
    let start = text[..pos].rfind('\n').map_or(0, |i| i + 1);
    let end = text[pos..].find('\n').map_or(text.len(), |i| pos + i);
    let line = &text[start..end];
    if line.bytes().all(|b| b == b' ' || b == b'\t' || b == b'\r') {
        return false;
    }
    // One space per byte keeps every later offset where it was.
    let spaces = " ".repeat(end - start);
    text.replace_range(start..end, &spaces);
    true
}

/// Whitespace runs across lines, so when a line stops short (`at 1 s pedal`) pest reports the
/// first token of the next line. When the error sits at the start of a line and nothing that
/// starts a line was expected there, the previous line is the one that is incomplete: this
/// gives the end of its content (comments excluded).
fn previous_line_end(text: &str, pos: usize, positives: &[Rule]) -> Option<usize> {
    use Rule::*;
    let starts_line = [
        event,
        expect,
        policy_decl,
        length_decl,
        close_brace,
        kw_at,
        kw_expect,
        kw_scenario,
        file,
    ];
    if positives.iter().any(|r| starts_line.contains(r)) {
        return None;
    }
    let pos = text.floor_char_boundary(pos.min(text.len()));
    let mut line_start = text[..pos].rfind('\n').map(|i| i + 1)?;
    if !text[line_start..pos].trim().is_empty() {
        return None;
    }
    // Walk back over blank and comment-only lines.
    while line_start > 0 {
        let prev_start = text[..line_start - 1].rfind('\n').map_or(0, |i| i + 1);
        let line = &text[prev_start..line_start - 1];
        let content = strip_comment(line).trim_end();
        if !content.trim_start().is_empty() {
            return Some(prev_start + content.len());
        }
        line_start = prev_start;
    }
    None
}

/// The part of a line before its comment.
fn strip_comment(line: &str) -> &str {
    let mut in_string = false;
    for (i, c) in line.char_indices() {
        match c {
            '"' => in_string = !in_string,
            '#' if !in_string => return &line[..i],
            _ => {}
        }
    }
    line
}

fn syntax_diagnostic(text: &str, pos: usize, line_end: bool, positives: &[Rule]) -> Diagnostic {
    let (span, found) = if line_end {
        (Span::new(pos, pos), "the end of the line".to_string())
    } else {
        found_at(text, pos)
    };
    let mut phrases: Vec<&'static str> = Vec::new();
    for r in positives {
        for p in expected_phrases(*r) {
            if !phrases.contains(p) {
                phrases.push(p);
            }
        }
    }
    let message = if phrases.is_empty() {
        format!("unexpected {found}")
    } else {
        format!("expected {}, found {found}", join_or(&phrases))
    };
    let label = if line_end {
        "the line ends here".to_string()
    } else if span.start >= text.len() {
        "the file ends here".to_string()
    } else {
        format!("unexpected {found}")
    };
    Diagnostic::error("syntax", span, message)
        .with_label(label)
        .with_hint(syntax_hint(positives, text, pos))
}

/// The token at `pos` for messages: a word, a quoted string's start, one character, or the
/// end of the file.
fn found_at(text: &str, pos: usize) -> (Span, String) {
    let pos = text.floor_char_boundary(pos.min(text.len()));
    let rest = &text[pos..];
    let Some(first) = rest.chars().next() else {
        return (
            Span::new(text.len(), text.len()),
            "the end of the file".to_string(),
        );
    };
    let is_word =
        |c: char| c.is_ascii_alphanumeric() || c == '_' || c == '.' || c == '+' || c == '-';
    let len = if is_word(first) {
        rest.char_indices()
            .find(|&(_, c)| !is_word(c))
            .map_or(rest.len(), |(i, _)| i)
    } else {
        first.len_utf8()
    };
    let token = &rest[..len];
    let shown = if token.trim().is_empty() {
        "a blank".to_string()
    } else if token.chars().count() > 24 {
        format!("`{}...`", token.chars().take(24).collect::<String>())
    } else {
        format!("`{}`", token.escape_debug())
    };
    (Span::new(pos, pos + len), shown)
}

/// Plain words for what a grammar rule stands for (a rule for a choice gives one phrase per
/// alternative, so that the message lists them flat).
fn expected_phrases(rule: Rule) -> &'static [&'static str] {
    use Rule::*;
    match rule {
        time => &["a time such as `200 ms`"],
        percent => &["a percentage such as `35 %`"],
        volts => &["a voltage such as `+0.3 V`"],
        scenario_name => &["the scenario's name"],
        name => &["a sensor, input or switch name such as `pedal`"],
        target => &["a track such as `pedal.a`, a sensor such as `pedal`, or `actuator`"],
        fault_ref => &["a fault name"],
        mode_ref => &["a mode name"],
        string | string_body => &["a quoted path such as `\"van_throttle.limp\"`"],
        open_brace => &["`{`"],
        close_brace => &["`}`"],
        EOI => &["the end of the file"],
        file | scenario | kw_scenario => &["`scenario NAME {`"],
        policy_decl | kw_policy => &["`policy`"],
        length_decl | kw_length => &["`length`"],
        event | kw_at => &["an event `at TIME ...`"],
        expect | kw_expect => &["an expectation `expect ...`"],
        break_ev | mend_ev | key_ev | set_ev | kw_break | kw_mend | kw_key => &[
            "an action such as `pedal 20 %`, `break pedal.a open`, `mend pedal.a`, `key off` or `brake on`",
        ],
        ramp | kw_over => &["`over`"],
        on_off => &["`on`", "`off`"],
        kw_on => &["`on`"],
        kw_off => &["`off`"],
        fault_form | f_open | f_short_ground | f_short_supply | f_stuck | f_offset | f_gain
        | f_bridged | f_intermittent | f_ground_offset | f_supply | f_weak | f_spring_broken => {
            &["a fault such as `open`, `short ground`, `offset +0.3 V` or `spring broken`"]
        }
        fault_kind | k_short_ground | k_short_supply | k_ground_offset | k_spring_broken => {
            &["a kind of fault such as `open` or `short ground`"]
        }
        e_fault_never | e_fault_by | kw_fault => &["`fault`"],
        e_mode_never | e_mode_by | kw_mode => &["`mode`"],
        e_opening | kw_opening => &["`opening`"],
        bound => &["`most`", "`least`"],
        kw_most => &["`most`"],
        kw_least => &["`least`"],
        kw_by => &["`by`"],
        kw_never => &["`never`"],
        kw_from => &["`from`"],
        kw_to => &["`to`"],
        kw_open => &["`open`"],
        kw_short => &["`short`"],
        kw_ground => &["`ground`"],
        kw_supply => &["`supply`"],
        kw_stuck => &["`stuck`"],
        kw_offset => &["`offset`"],
        kw_gain => &["`gain`"],
        kw_bridged => &["`bridged`"],
        kw_intermittent => &["`intermittent`"],
        kw_every => &["`every`"],
        kw_weak => &["`weak`"],
        kw_spring => &["`spring`"],
        kw_broken => &["`broken`"],
        // Silent or whitespace rules never show in errors; a plain word keeps this total.
        _ => &["more input"],
    }
}

fn syntax_hint(positives: &[Rule], text: &str, pos: usize) -> String {
    use Rule::*;
    let has = |rs: &[Rule]| positives.iter().any(|r| rs.contains(r));
    let after_number = text[..text.floor_char_boundary(pos.min(text.len()))]
        .trim_end()
        .ends_with(|c: char| c.is_ascii_digit());
    let line_start = text[..text.floor_char_boundary(pos.min(text.len()))]
        .rfind('\n')
        .map_or(0, |i| i + 1);
    let line_before = &text[line_start..text.floor_char_boundary(pos.min(text.len()))];
    if line_before.split_whitespace().any(|w| w == "mend") && has(&[event, expect, close_brace]) {
        "`mend TARGET` mends every fault on the target; `mend TARGET KIND` names the kind only, \
         without its parameters, e.g. `mend pedal.a offset`"
            .into()
    } else if after_number {
        "every quantity carries its unit: `ms`, `s` or `us` for times, `%` for positions, `V` or `mV` for voltages".into()
    } else if has(&[fault_form, f_open, f_stuck, f_offset]) {
        "track faults: `open`, `short ground`, `short supply`, `stuck`, `offset +0.3 V`, `gain 90 %`, \
         `bridged pedal.b`, `intermittent open 10 ms every 100 ms`; sensor faults: `ground offset +0.2 V`, \
         `supply 4.6 V`; actuator faults: `stuck`, `weak 50 %`, `spring broken`"
            .into()
    } else if has(&[break_ev, set_ev, mend_ev, key_ev]) {
        "after `at TIME` comes one action: `SENSOR X %` (optionally `over T`), `INPUT X %`, `SWITCH on|off`, \
         `break TARGET FAULT`, `mend TARGET`, `key on` or `key off`"
            .into()
    } else if has(&[percent]) && has(&[on_off]) {
        "a sensor or an input takes a position such as `pedal 20 %` (ramped: `pedal 20 % over 300 ms`); \
         a switch takes `on` or `off`"
            .into()
    } else if has(&[on_off]) {
        "write `on` or `off`".into()
    } else if has(&[time]) {
        "a time is a number and its unit, e.g. `200 ms`, `1.05 s` or `500 us`".into()
    } else if has(&[
        e_fault_by, e_mode_by, e_opening, fault_ref, mode_ref, kw_never, bound,
    ]) {
        "expectations: `fault F by T`, `fault never F`, `mode M by T`, `mode never M`, \
         `opening at most|least X % from T1 to T2`"
            .into()
    } else if has(&[event, expect, close_brace]) {
        "each line of the body is `policy \"FILE\"`, `length T`, `at T ACTION` or `expect ...`; the body ends with `}`".into()
    } else if has(&[kw_scenario, file]) {
        "a scenario file holds one block: `scenario NAME { ... }`".into()
    } else if has(&[string, string_body]) {
        "the policy path is quoted and relative to the scenario file: `policy \"van_throttle.limp\"`".into()
    } else {
        "compare with the reference script scenarios/van/pedal_a_open.scenario".into()
    }
}

fn join_or(items: &[&str]) -> String {
    match items {
        [] => String::new(),
        [one] => (*one).to_string(),
        [init @ .., last] => format!("{} or {last}", init.join(", ")),
    }
}

/// Every `#` comment outside a string literal.
fn comments(text: &str) -> Vec<Comment> {
    let mut out = Vec::new();
    let mut offset = 0;
    for line in text.split_inclusive('\n') {
        let i = strip_comment(line).len();
        if i < line.len() {
            let body = line[i..].trim_end_matches(['\n', '\r']);
            out.push(Comment {
                text: body.to_string(),
                span: Span::new(offset + i, offset + i + body.len()),
            });
        }
        offset += line.len();
    }
    out
}

// Tree building. The grammar fixes the shape of the tree, so a `None` below means the grammar
// and this code disagree; `parse` reports it as an internal error instead of panicking.

fn span(p: &Pair<'_, Rule>) -> Span {
    Span::of(&p.as_span())
}

fn ident(p: &Pair<'_, Rule>) -> Ident {
    Ident {
        text: p.as_str().to_string(),
        span: span(p),
    }
}

fn build_file(file: Pair<'_, Rule>, text: &str) -> Option<ScenarioAst> {
    let scenario = file.into_inner().find(|p| p.as_rule() == Rule::scenario)?;
    let sp = span(&scenario);
    let mut name = None;
    let mut items = Vec::new();
    for p in scenario.into_inner() {
        match p.as_rule() {
            Rule::scenario_name => name = Some(ident(&p)),
            Rule::policy_decl => {
                let s = span(&p);
                let lit = p.into_inner().find(|q| q.as_rule() == Rule::string)?;
                let body = lit.clone().into_inner().next()?;
                items.push(Item::Policy {
                    path: StrLit {
                        value: body.as_str().to_string(),
                        span: span(&lit),
                    },
                    span: s,
                });
            }
            Rule::length_decl => {
                let s = span(&p);
                let q = p.into_inner().find(|q| q.as_rule() == Rule::time)?;
                items.push(Item::Length {
                    length: quantity(q)?,
                    span: s,
                });
            }
            Rule::event => items.push(Item::Event(event(p)?)),
            Rule::expect => items.push(Item::Expect(expect(p)?)),
            _ => {}
        }
    }
    Some(ScenarioAst {
        name: name?,
        items,
        comments: comments(text),
        span: sp,
    })
}

fn quantity(p: Pair<'_, Rule>) -> Option<Quantity> {
    let sp = span(&p);
    let text = p.as_str();
    let n = number_len(text);
    let number = &text[..n];
    let unit_text = text[n..].trim_start();
    let unit = (!unit_text.is_empty()).then(|| {
        let start = sp.start + text.len() - unit_text.len();
        UnitText {
            text: unit_text.to_string(),
            unit: Unit::parse(unit_text),
            span: Span::new(start, sp.end),
        }
    });
    // The grammar admits only a sign, digits, one point and an exponent, which `f64` parses;
    // an overflowing exponent gives an infinity the resolver reports.
    let value = number.parse::<f64>().unwrap_or(f64::NAN);
    Some(Quantity {
        number: number.to_string(),
        value,
        number_span: Span::new(sp.start, sp.start + n),
        unit,
        span: sp,
    })
}

/// Length of the number at the start of a quantity token, by the grammar's `number` rule.
fn number_len(s: &str) -> usize {
    let b = s.as_bytes();
    let digits = |mut i: usize| {
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        i
    };
    let mut i = if matches!(b.first(), Some(b'+' | b'-')) {
        1
    } else {
        0
    };
    i = digits(i);
    if i + 1 < b.len() && b[i] == b'.' && b[i + 1].is_ascii_digit() {
        i = digits(i + 1);
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        let mut j = i + 1;
        if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
            j += 1;
        }
        if j < b.len() && b[j].is_ascii_digit() {
            i = digits(j);
        }
    }
    i
}

fn target(p: Pair<'_, Rule>) -> Option<Target> {
    let sp = span(&p);
    let mut inner = p.into_inner();
    let base = ident(&inner.next()?);
    let track = inner.next().map(|t| ident(&t));
    Some(Target {
        base,
        track,
        span: sp,
    })
}

fn on_off(p: &Pair<'_, Rule>) -> OnOff {
    OnOff {
        on: p.as_str() == "on",
        span: span(p),
    }
}

fn event(p: Pair<'_, Rule>) -> Option<Event> {
    let sp = span(&p);
    let mut inner = p.into_inner().filter(|q| q.as_rule() != Rule::kw_at);
    let at = quantity(inner.next()?)?;
    let act = inner.next()?;
    let asp = span(&act);
    let rule = act.as_rule();
    let mut parts = act.into_inner();
    let action = match rule {
        Rule::set_ev => {
            let name = ident(&parts.next()?);
            let v = parts.next()?;
            let value = if v.as_rule() == Rule::on_off {
                SetValue::Switch { on: on_off(&v) }
            } else {
                let over = match parts.next() {
                    Some(r) => Some(quantity(
                        r.into_inner().find(|q| q.as_rule() == Rule::time)?,
                    )?),
                    None => None,
                };
                SetValue::Level {
                    value: quantity(v)?,
                    over,
                }
            };
            ActionAst::Set {
                name,
                value,
                span: asp,
            }
        }
        Rule::break_ev => {
            let mut parts = parts.filter(|q| q.as_rule() != Rule::kw_break);
            let target = target(parts.next()?)?;
            let fault = fault_form(parts.next()?)?;
            ActionAst::Break {
                target,
                fault,
                span: asp,
            }
        }
        Rule::mend_ev => {
            let mut parts = parts.filter(|q| q.as_rule() != Rule::kw_mend);
            let target = target(parts.next()?)?;
            let kind = match parts.next() {
                Some(k) => Some(fault_kind(k)?),
                None => None,
            };
            ActionAst::Mend {
                target,
                kind,
                span: asp,
            }
        }
        Rule::key_ev => {
            let v = parts.find(|q| q.as_rule() == Rule::on_off)?;
            ActionAst::Key {
                on: on_off(&v),
                span: asp,
            }
        }
        _ => return None,
    };
    Some(Event {
        at,
        action,
        span: sp,
    })
}

fn fault_form(p: Pair<'_, Rule>) -> Option<FaultAst> {
    let sp = span(&p);
    let f = p.into_inner().next()?;
    let rule = f.as_rule();
    // Keywords carry no data; the quantities and the bridged target do.
    let mut data = f.into_inner().filter(|q| {
        matches!(
            q.as_rule(),
            Rule::time | Rule::percent | Rule::volts | Rule::target
        )
    });
    let form = match rule {
        Rule::f_open => FaultForm::Open,
        Rule::f_short_ground => FaultForm::ShortGround,
        Rule::f_short_supply => FaultForm::ShortSupply,
        Rule::f_stuck => FaultForm::Stuck,
        Rule::f_offset => FaultForm::Offset {
            volts: quantity(data.next()?)?,
        },
        Rule::f_gain => FaultForm::Gain {
            percent: quantity(data.next()?)?,
        },
        Rule::f_bridged => FaultForm::Bridged {
            other: target(data.next()?)?,
        },
        Rule::f_intermittent => {
            let open = quantity(data.next()?)?;
            let every = quantity(data.next()?)?;
            FaultForm::Intermittent { open, every }
        }
        Rule::f_ground_offset => FaultForm::GroundOffset {
            volts: quantity(data.next()?)?,
        },
        Rule::f_supply => FaultForm::Supply {
            volts: quantity(data.next()?)?,
        },
        Rule::f_weak => FaultForm::Weak {
            percent: quantity(data.next()?)?,
        },
        Rule::f_spring_broken => FaultForm::SpringBroken,
        _ => return None,
    };
    Some(FaultAst { form, span: sp })
}

fn fault_kind(p: Pair<'_, Rule>) -> Option<FaultKindAst> {
    let sp = span(&p);
    let k = p.into_inner().next()?;
    let kind = match k.as_rule() {
        Rule::k_short_ground => FaultKind::ShortGround,
        Rule::k_short_supply => FaultKind::ShortSupply,
        Rule::k_ground_offset => FaultKind::GroundOffset,
        Rule::k_spring_broken => FaultKind::SpringBroken,
        Rule::kw_open => FaultKind::Open,
        Rule::kw_stuck => FaultKind::Stuck,
        Rule::kw_offset => FaultKind::Offset,
        Rule::kw_gain => FaultKind::Gain,
        Rule::kw_bridged => FaultKind::Bridged,
        Rule::kw_intermittent => FaultKind::Intermittent,
        Rule::kw_supply => FaultKind::Supply,
        Rule::kw_weak => FaultKind::Weak,
        _ => return None,
    };
    Some(FaultKindAst { kind, span: sp })
}

fn expect(p: Pair<'_, Rule>) -> Option<Expect> {
    let sp = span(&p);
    let e = p.into_inner().find(|q| q.as_rule() != Rule::kw_expect)?;
    let rule = e.as_rule();
    let mut data = e.into_inner().filter(|q| {
        matches!(
            q.as_rule(),
            Rule::fault_ref | Rule::mode_ref | Rule::time | Rule::percent | Rule::bound
        )
    });
    let kind = match rule {
        Rule::e_fault_never => ExpectAst::FaultNever {
            fault: ident(&data.next()?),
        },
        Rule::e_fault_by => {
            let fault = ident(&data.next()?);
            ExpectAst::FaultBy {
                fault,
                by: quantity(data.next()?)?,
            }
        }
        Rule::e_mode_never => ExpectAst::ModeNever {
            mode: ident(&data.next()?),
        },
        Rule::e_mode_by => {
            let mode = ident(&data.next()?);
            ExpectAst::ModeBy {
                mode,
                by: quantity(data.next()?)?,
            }
        }
        Rule::e_opening => {
            let b = data.next()?;
            let bound = Bound {
                at_most: b.as_str() == "most",
                span: span(&b),
            };
            let x = quantity(data.next()?)?;
            let from = quantity(data.next()?)?;
            let to = quantity(data.next()?)?;
            ExpectAst::Opening(Box::new(OpeningAst { bound, x, from, to }))
        }
        _ => return None,
    };
    Some(Expect { kind, span: sp })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const REFERENCE: &str = include_str!("../../scenarios/van/pedal_a_open.scenario");

    fn errors(src: &str) -> Vec<String> {
        parse(src).1.into_iter().map(|d| d.message).collect()
    }

    #[test]
    fn reference_parses_with_every_item() {
        let (ast, diags) = parse(REFERENCE);
        assert_eq!(diags, vec![]);
        let ast = ast.expect("reference parses");
        assert_eq!(ast.name.text, "pedal_a_open");
        assert_eq!(ast.items.len(), 2 + 6 + 5);
        // The spans point at the text they came from.
        assert_eq!(
            &REFERENCE[ast.name.span.start..ast.name.span.end],
            "pedal_a_open"
        );
        let Item::Event(ramp) = &ast.items[3] else {
            panic!("item 3 is an event")
        };
        assert_eq!(
            &REFERENCE[ramp.span.start..ramp.span.end],
            "at 200 ms   pedal 35 % over 300 ms"
        );
        let ActionAst::Set {
            value:
                SetValue::Level {
                    value,
                    over: Some(over),
                },
            ..
        } = &ramp.action
        else {
            panic!("a ramp")
        };
        assert_eq!((value.number.as_str(), value.value), ("35", 35.0));
        assert_eq!(over.unit.as_ref().and_then(|u| u.unit), Some(Unit::Millis));
        assert_eq!(ast.comments.len(), 3);
        assert_eq!(ast.comments[2].text, "# ramp");
    }

    #[test]
    fn every_fault_form_parses() {
        let forms = [
            ("pedal.a open", FaultKind::Open),
            ("pedal.a short ground", FaultKind::ShortGround),
            ("pedal.a short supply", FaultKind::ShortSupply),
            ("pedal.a stuck", FaultKind::Stuck),
            ("pedal.a offset +0.3 V", FaultKind::Offset),
            ("pedal.a gain 90 %", FaultKind::Gain),
            ("pedal.a bridged pedal.b", FaultKind::Bridged),
            (
                "pedal.a intermittent open 10 ms every 100 ms",
                FaultKind::Intermittent,
            ),
            ("pedal ground offset +0.2 V", FaultKind::GroundOffset),
            ("pedal supply 4.6 V", FaultKind::Supply),
            ("actuator stuck", FaultKind::Stuck),
            ("actuator weak 50 %", FaultKind::Weak),
            ("actuator spring broken", FaultKind::SpringBroken),
        ];
        for (text, kind) in forms {
            let src = format!("scenario s {{ at 1 s break {text} }}");
            let (ast, diags) = parse(&src);
            assert_eq!(diags, vec![], "{text}");
            let ast = ast.expect("parses");
            let Item::Event(Event {
                action: ActionAst::Break { fault, .. },
                ..
            }) = &ast.items[0]
            else {
                panic!("{text}: not a break")
            };
            assert_eq!(fault.form.kind(), kind, "{text}");
        }
    }

    #[test]
    fn mend_takes_an_optional_kind() {
        let (ast, diags) =
            parse("scenario s { at 1 s mend pedal.a short ground\n at 2 s mend pedal.a }");
        assert_eq!(diags, vec![]);
        let items = ast.expect("parses").items;
        let kinds: Vec<_> = items
            .iter()
            .map(|i| match i {
                Item::Event(Event {
                    action: ActionAst::Mend { kind, .. },
                    ..
                }) => kind.map(|k| k.kind),
                _ => panic!("not a mend"),
            })
            .collect();
        assert_eq!(kinds, vec![Some(FaultKind::ShortGround), None]);
    }

    #[test]
    fn keywords_match_whole_words() {
        // `atx` is not `at x`, and a switch may be named `brakeon`.
        assert!(!errors("scenario s { atx 1 s key off }").is_empty());
        let (ast, diags) = parse("scenario s { at 1 s brakeon on }");
        assert_eq!(diags, vec![]);
        assert!(ast.is_some());
    }

    #[test]
    fn syntax_errors_name_what_was_expected() {
        let e = errors("scenario s {\n  at 1 s break pedal.a melted\n}");
        assert_eq!(e.len(), 1);
        assert!(
            e[0].starts_with("expected a fault such as `open`"),
            "{}",
            e[0]
        );
        assert!(e[0].ends_with("found `melted`"), "{}", e[0]);
    }

    #[test]
    fn recovery_reports_independent_errors() {
        let src = "scenario s {\n  at 1 s pedal\n  length 3 s\n  at 2 s break pedal.a melted\n  expect mode by 1 s\n}\n";
        let (ast, diags) = parse(src);
        assert_eq!(diags.len(), 3, "{diags:?}");
        let lines: Vec<_> = diags
            .iter()
            .map(|d| crate::diag::location("f", src, d.span.start))
            .collect();
        assert_eq!(lines, vec!["f:2:15", "f:4:24", "f:5:15"]);
        assert_eq!(
            diags[0].message,
            "expected a percentage such as `35 %`, `on` or `off`, found the end of the line"
        );
        // The good line survives in the recovered tree.
        assert_eq!(ast.expect("recovered").items.len(), 1);
    }

    #[test]
    fn recovery_stops_at_ten() {
        let mut src = String::from("scenario s {\n");
        for _ in 0..15 {
            src.push_str("  at 1 s nonsense\n");
        }
        src.push('}');
        let (ast, diags) = parse(&src);
        assert_eq!(diags.len(), MAX_SYNTAX_ERRORS);
        assert!(ast.is_none());
    }

    #[test]
    fn a_broken_header_reports_once() {
        let (ast, diags) = parse("scenario s\n  length 3 s\n  at 1 s key off\n}\n");
        assert_eq!(diags.len(), 1);
        assert!(
            diags[0].message.starts_with("expected `{`"),
            "{}",
            diags[0].message
        );
        assert!(ast.is_none());
    }

    #[test]
    fn comments_skip_strings() {
        let c = comments("policy \"a#b\" # real\n# second\n");
        let texts: Vec<_> = c.iter().map(|c| c.text.as_str()).collect();
        assert_eq!(texts, vec!["# real", "# second"]);
        assert_eq!(c[0].span, Span::new(13, 19));
    }

    proptest! {
        #[test]
        fn no_byte_string_makes_parse_panic(bytes in proptest::collection::vec(any::<u8>(), 0..200)) {
            let text = String::from_utf8_lossy(&bytes);
            let _ = parse(&text);
        }

        #[test]
        fn no_mangled_reference_makes_parse_panic(cut in 0usize..600, junk in "[ -~\n]{0,12}") {
            // Near-valid input reaches deeper into the grammar than random bytes do.
            let mut text = REFERENCE.to_string();
            let at = text.floor_char_boundary(cut.min(text.len()));
            text.insert_str(at, &junk);
            let (ast, diags) = parse(&text);
            prop_assert!(ast.is_some() || !diags.is_empty());
        }
    }
}
