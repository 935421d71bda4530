//! The review page as one self-contained HTML document: inline CSS and SVG, no scripts and no
//! network resources, so it opens the same anywhere and can be archived with a review.

use crate::app::Exit;
use crate::model::Model;
use crate::report::plot::xml_escape as esc;
use crate::sim::trace::Trace;
use std::fmt::Write as _;

/// One finding of `check`, with its source line.
pub struct Finding {
    pub severity: String,
    pub kind: String,
    pub message: String,
    pub location: String,
    pub line_text: String,
    pub hint: String,
}

/// One replayed scenario: its plot and verdicts, or the error that stopped it.
pub struct ScenarioView {
    pub file: String,
    pub result: Result<(Trace, String), String>,
}

/// One counterexample: the script, its story and its replay's plot.
pub struct Counterexample {
    pub name: String,
    pub requirement: String,
    pub fault: String,
    pub script: String,
    pub plot: Result<String, String>,
}

const CSS: &str = r#"
body { font-family: sans-serif; margin: 0 auto; max-width: 1100px; padding: 1em 2em; color: #1d1d1d; line-height: 1.4; }
h1 { margin-bottom: 0.2em; }
h2 { border-bottom: 2px solid #ccc; padding-bottom: 0.2em; margin-top: 2em; }
.caution h2 { margin-top: 0.2em; border: none; }
.caution { background: #fff4e0; border: 1px solid #e0a040; border-left: 6px solid #e07b00; padding: 0.6em 1em; }
.status { font-weight: bold; padding: 0.1em 0.5em; border-radius: 4px; }
.ok { background: #d8f0dc; color: #1e6b2f; }
.bad { background: #fbd9d3; color: #a12a16; }
.unknown { background: #fdf0c4; color: #7a5a00; }
table { border-collapse: collapse; margin: 0.5em 0; font-size: 0.9em; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.5em; text-align: left; vertical-align: top; }
th { background: #f0f0f0; }
td.violated { background: #fbd9d3; color: #a12a16; font-weight: bold; }
td.inconclusive { background: #fdf0c4; }
td.holds { color: #1e6b2f; }
pre { background: #f6f6f6; border: 1px solid #ddd; padding: 0.5em; overflow-x: auto; }
pre.script { user-select: all; }
.finding { margin: 0.6em 0; }
.finding .error { color: #a12a16; font-weight: bold; }
.finding .warning { color: #8a5a00; font-weight: bold; }
svg { max-width: 100%; height: auto; display: block; }
.figure { border: 1px solid #ddd; padding: 0.4em; margin: 0.5em 0; background: #fff; overflow-x: auto; }
.matrix-wrap { overflow-x: auto; }
"#;

pub struct Page<'a> {
    pub model: &'a Model,
    pub policy_file: &'a str,
    pub policy_text: &'a str,
    pub check_summary: &'a str,
    pub findings: &'a [Finding],
    pub scenarios: &'a [ScenarioView],
    pub proof: Option<&'a crate::prove::Proof>,
    pub counterexamples: &'a [Counterexample],
    pub exit: Exit,
}

impl Page<'_> {
    /// The whole page: one HTML document with inline CSS and SVG.
    pub fn html(&self) -> String {
        let m = self.model;
        let mut o = String::new();
        let _ = writeln!(
            o,
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>limpet review: {}</title>\n<style>{CSS}</style>\n</head>\n<body>",
            esc(&m.name)
        );
        let (status, class) = match self.exit {
            Exit::Holds => ("everything reviewed holds", "ok"),
            Exit::Finding => ("findings, failed expectations or violations", "bad"),
            Exit::Inconclusive => ("inconclusive: a bound was hit", "unknown"),
            Exit::BadInput => ("some inputs could not be read", "bad"),
        };
        let _ = writeln!(
            o,
            "<header id=\"policy-header\"><h1>Review of policy <code>{}</code></h1>",
            esc(&m.name)
        );
        let _ = writeln!(
            o,
            "<p>File <code>{}</code>; controller period {}; {} modes, {} faults, {} transitions; limpet {}. Overall: <span class=\"status {class}\">{status}</span></p>",
            esc(self.policy_file),
            m.period,
            m.modes.len(),
            m.faults.len(),
            m.transitions.len(),
            env!("CARGO_PKG_VERSION")
        );
        // The policy's own header: its leading comment lines, as the author wrote them.
        let header: Vec<&str> = self
            .policy_text
            .lines()
            .take_while(|l| l.trim_start().starts_with('#') || l.trim().is_empty())
            .filter(|l| !l.trim().is_empty())
            .collect();
        if !header.is_empty() {
            let _ = writeln!(
                o,
                "<pre class=\"policy-comment\">{}</pre>",
                esc(&header.join("\n"))
            );
        }
        if let Some(a) = &m.assure {
            let _ = writeln!(
                o,
                "<p>Requirements (<code>assure</code>, faults {}):</p><ul>",
                format!("{:?}", a.faults).to_lowercase()
            );
            for r in crate::prove::requirements(m) {
                let _ = writeln!(o, "<li>{}</li>", esc(&r.text(m)));
            }
            o.push_str("</ul>\n");
        }
        o.push_str("</header>\n");

        o.push_str("<section id=\"cautions\" class=\"caution\"><h2>Cautions</h2><ul>\n<li>limpet is a design aid, not a safety case. Its verdicts hold for this model, this fault catalogue, this pedal grid and this horizon only.</li>\n<li>Defer to ISO 26262 practice, to the applicable vehicle regulations, to testing on the vehicle and to licensed engineering judgment. Nothing here replaces them.</li>\n<li>The throttle-body model is an approximation from the actuator figures in the policy; a real throttle body, harness and controller differ.</li>\n</ul></section>\n");

        self.findings_html(&mut o);

        o.push_str("<section id=\"mode-graph\"><h2>Mode graph</h2>\n<p>Modes with their demand; edges numbered in the order the controller tries them; dashed edges come from <code>any</code>; safe (drive-off) modes double-outlined.</p>\n<div class=\"figure graph\">\n");
        o.push_str(&crate::report::graph_svg::svg(m));
        o.push_str("</div></section>\n");

        self.matrix_html(&mut o);
        self.counterexamples_html(&mut o);
        self.scenarios_html(&mut o);
        o.push_str("</body>\n</html>\n");
        o
    }

    fn findings_html(&self, o: &mut String) {
        let _ = writeln!(
            o,
            "<section id=\"findings\"><h2>Findings of check</h2><p>{}</p>",
            esc(self.check_summary)
        );
        if self.findings.is_empty() {
            o.push_str("<p>No findings.</p>\n");
        }
        for f in self.findings {
            let _ = writeln!(
                o,
                "<div class=\"finding\"><span class=\"{}\">{}[{}]</span> {} <code>{}</code>",
                esc(&f.severity),
                esc(&f.severity),
                esc(&f.kind),
                esc(&f.message),
                esc(&f.location)
            );
            if !f.line_text.is_empty() {
                let _ = writeln!(o, "<pre>{}</pre>", esc(&f.line_text));
            }
            if !f.hint.is_empty() {
                let _ = writeln!(o, "<div>hint: {}</div>", esc(&f.hint));
            }
            o.push_str("</div>\n");
        }
        o.push_str("</section>\n");
    }

    fn matrix_html(&self, o: &mut String) {
        o.push_str("<section id=\"reaction-matrix\"><h2>Reaction matrix</h2>\n");
        let Some(p) = self.proof else {
            o.push_str("<p>The policy has no <code>assure</code> block: nothing was proved.</p></section>\n");
            return;
        };
        let m = self.model;
        let _ = writeln!(o, "<p>{}</p>", esc(&crate::prove::report::coverage(m, p)));
        o.push_str("<div class=\"matrix-wrap\"><table class=\"matrix\">\n<tr>");
        let mut heads = crate::prove::report::COLUMNS
            .into_iter()
            .map(String::from)
            .collect::<Vec<_>>();
        heads.extend(p.requirements.iter().map(|r| r.text(m)));
        for h in &heads {
            let _ = write!(o, "<th>{}</th>", esc(h));
        }
        o.push_str("</tr>\n");
        for row in &p.rows {
            let r = &row.result;
            let cells = crate::prove::report::figures(m, row, ", ");
            o.push_str("<tr>");
            for c in &cells {
                let _ = write!(o, "<td>{}</td>", esc(c));
            }
            for ri in 0..p.requirements.len() {
                let (class, text) = match row.verdict(ri) {
                    crate::prove::Verdict::Violated if row.uncorrectable => {
                        ("violated", "VIOLATED (uncorrectable)".to_string())
                    }
                    crate::prove::Verdict::Violated => ("violated", "VIOLATED".to_string()),
                    crate::prove::Verdict::Inconclusive => {
                        ("inconclusive", "? (bound hit)".to_string())
                    }
                    crate::prove::Verdict::Unresolved => (
                        "inconclusive",
                        format!(
                            "unresolved ({} unconfirmed candidates; nearest exact replay {})",
                            r.unconfirmed[ri],
                            crate::prove::report::nearest(m, p, row, ri)
                        ),
                    ),
                    crate::prove::Verdict::Holds => ("holds", "ok".to_string()),
                };
                let _ = write!(o, "<td class=\"{class}\">{}</td>", esc(&text));
            }
            o.push_str("</tr>\n");
        }
        o.push_str("</table></div>\n<ul>\n");
        for line in crate::prove::report::summary(m, p).lines() {
            let _ = writeln!(o, "<li>{}</li>", esc(line));
        }
        o.push_str("</ul></section>\n");
    }

    fn counterexamples_html(&self, o: &mut String) {
        o.push_str("<section id=\"counterexamples\"><h2>Counterexamples</h2>\n");
        if self.counterexamples.is_empty() {
            o.push_str("<p>None: no requirement was violated in the search.</p>\n");
        } else {
            let _ = writeln!(
                o,
                "<p>Each script replays with <code>limpet run NAME.scenario</code> when saved beside <code>{}</code>.</p>",
                esc(self.policy_file)
            );
        }
        for c in self.counterexamples {
            let _ = writeln!(
                o,
                "<article class=\"counterexample\" id=\"{}\"><h3>{}: {} breaks <q>{}</q></h3>",
                esc(&c.name),
                esc(&c.name),
                esc(&c.fault),
                esc(&c.requirement)
            );
            match &c.plot {
                Ok(svg) => {
                    let _ = writeln!(o, "<div class=\"figure cx-plot\">{svg}</div>");
                }
                Err(e) => {
                    let _ = writeln!(o, "<p>The script did not replay:</p><pre>{}</pre>", esc(e));
                }
            }
            let _ = writeln!(
                o,
                "<p>Script <code>{}.scenario</code>:</p><pre class=\"script\">{}</pre></article>",
                esc(&c.name),
                esc(&c.script)
            );
        }
        o.push_str("</section>\n");
    }

    fn scenarios_html(&self, o: &mut String) {
        o.push_str("<section id=\"scenarios\"><h2>Scenarios</h2>\n");
        if self.scenarios.is_empty() {
            o.push_str("<p>The folder holds no .scenario files.</p>\n");
        }
        for s in self.scenarios {
            match &s.result {
                Ok((t, plot)) => {
                    let (class, word) = if t.passed() {
                        ("ok", "all expectations hold")
                    } else {
                        ("bad", "FAILED")
                    };
                    let _ = writeln!(
                        o,
                        "<article class=\"scenario\" id=\"scenario-{}\"><h3>{} <small>({})</small> <span class=\"status {class}\">{word}</span></h3>",
                        esc(&t.scenario),
                        esc(&t.scenario),
                        esc(&s.file)
                    );
                    o.push_str(
                        "<table class=\"verdicts\"><tr><th>expectation</th><th>verdict</th><th>decided at</th><th>why</th></tr>\n",
                    );
                    for v in &t.expectations {
                        let _ = writeln!(
                            o,
                            "<tr><td><code>expect {}</code></td><td class=\"{}\">{}</td><td>{}</td><td>{}</td></tr>",
                            esc(&v.text),
                            if v.passed { "holds" } else { "violated" },
                            if v.passed { "holds" } else { "FAILED" },
                            v.decided_at,
                            esc(&v.explanation)
                        );
                    }
                    let _ = writeln!(
                        o,
                        "</table>\n<div class=\"figure scenario-plot\">{plot}</div></article>"
                    );
                }
                Err(e) => {
                    let _ = writeln!(
                        o,
                        "<article class=\"scenario\"><h3>{} <span class=\"status bad\">could not be run</span></h3><pre>{}</pre></article>",
                        esc(&s.file),
                        esc(e)
                    );
                }
            }
        }
        o.push_str("</section>\n");
    }
}
