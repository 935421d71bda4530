//! The `limpet` binary: clap parsing, dispatch to one command, exit status. Nothing else.

use clap::{Parser, Subcommand, ValueEnum};
use limpet::app::{self, Exit, Format, Outcome};
use std::io::Write;
use std::process::ExitCode;

#[global_allocator]
static ALLOC: limpet::alloc::LargeBlocks = limpet::alloc::LargeBlocks;

/// Design, prove and review the limp-home policy of a drive-by-wire throttle.
///
/// Exit status: 0 all holds; 1 a finding, a failed expectation or a violated requirement;
/// 2 unreadable input or bad usage; 3 inconclusive (a bound was hit).
#[derive(Parser)]
#[command(name = "limpet", version, about, long_about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Clone, Copy, ValueEnum)]
enum OutFormat {
    Text,
    Json,
    Markdown,
    Dot,
    Csv,
    Vcd,
    Svg,
}

impl From<OutFormat> for Format {
    fn from(f: OutFormat) -> Format {
        match f {
            OutFormat::Text => Format::Text,
            OutFormat::Json => Format::Json,
            OutFormat::Markdown => Format::Markdown,
            OutFormat::Dot => Format::Dot,
            OutFormat::Csv => Format::Csv,
            OutFormat::Vcd => Format::Vcd,
            OutFormat::Svg => Format::Svg,
        }
    }
}

#[derive(Subcommand)]
enum Command {
    /// Check a policy's structure: parse, names, units and mode-graph findings.
    Check {
        /// The policy file (.limp).
        policy: String,
        /// text or json.
        #[arg(long, value_enum, default_value = "text")]
        format: OutFormat,
        /// Treat warnings as errors (`--deny warnings`).
        #[arg(long, value_parser = ["warnings"])]
        deny: Option<String>,
    },
    /// Print the mode graph as DOT or JSON.
    Graph {
        /// The policy file (.limp).
        policy: String,
        /// dot, json or svg.
        #[arg(long, value_enum, default_value = "dot")]
        format: OutFormat,
    },
    /// Replay scenario scripts against their policy; print traces and verdicts.
    Run {
        /// Scenario files (.scenario).
        #[arg(required = true)]
        scenarios: Vec<String>,
        /// Use this policy instead of the one each script names.
        #[arg(long)]
        policy: Option<String>,
        /// Trace sample interval, e.g. `5ms` or `10 ms`.
        #[arg(long, value_parser = parse_time)]
        sample: Option<limpet::time::Time>,
        /// text, json, csv, vcd or svg.
        #[arg(long, value_enum, default_value = "text")]
        format: OutFormat,
        /// Print only the verdicts.
        #[arg(long, short)]
        quiet: bool,
        /// Compare each trace with the approved `<scenario>.trace` in this folder.
        #[arg(long, value_name = "DIR")]
        approved: Option<String>,
        /// With --approved, store the new traces as the approved ones.
        #[arg(long, requires = "approved")]
        approve: bool,
    },
    /// Search every catalogued fault exhaustively; print the reaction matrix.
    Prove {
        /// The policy file (.limp).
        policy: String,
        /// Pedal grid step in percent.
        #[arg(long, default_value_t = limpet::prove::Config::default().grid)]
        grid: f64,
        /// Quantisation of continuous states in percent.
        #[arg(long, default_value_t = limpet::prove::Config::default().resolution)]
        resolution: f64,
        /// Time followed after each injection, e.g. `1.2s`.
        #[arg(long, value_parser = parse_time, default_value = "1.2s")]
        horizon: limpet::time::Time,
        /// Bound on stored states per search; hitting it makes the verdict inconclusive.
        #[arg(long, default_value_t = limpet::prove::Config::default().max_states)]
        max_states: usize,
        /// Threads (0: one per core). Output does not depend on it.
        #[arg(long, default_value_t = 0)]
        jobs: usize,
        /// Let the pedal jump anywhere on the grid each period.
        #[arg(long)]
        free_pedal: bool,
        /// Pair each faulty state with its fault-free twin's whole state, not its plate alone
        /// (exact absence claims at the resolution; many more states).
        #[arg(long)]
        exact_twin: bool,
        /// Search pairs too, whatever the policy's `faults` line says.
        #[arg(long)]
        double: bool,
        /// Only fault sets whose description contains this text.
        #[arg(long)]
        only: Option<String>,
        /// Candidate violations screened by exact replay per requirement and fault, beyond the
        /// first 64 (a larger number may confirm more; unconfirmed ones leave a cell unresolved).
        #[arg(long, default_value_t = limpet::prove::Config::default().screen)]
        screen: usize,
        /// Write each counterexample as a scenario script into this directory.
        #[arg(long)]
        counterexamples: Option<String>,
        /// text, json or markdown.
        #[arg(long, value_enum, default_value = "text")]
        format: OutFormat,
    },
    /// Compare two policy revisions on the resolved model: structure, guards, behaviour.
    Diff {
        /// The old revision: a policy file, or `REV:PATH` read from git.
        old: String,
        /// The new revision: a policy file, or `REV:PATH` read from git.
        new: String,
        /// Replay every `*.scenario` in this folder against both revisions.
        #[arg(long, value_name = "DIR")]
        scenarios: Option<String>,
        /// Also compare the reaction matrices (a coarse search of both revisions).
        #[arg(long)]
        prove: bool,
        /// With --prove, only fault sets whose description contains this text.
        #[arg(long, requires = "prove")]
        only: Option<String>,
        /// text, markdown or json.
        #[arg(long, value_enum, default_value = "text")]
        format: OutFormat,
    },
    /// Check, run every scenario and prove one policy folder; write an HTML review page.
    Review {
        /// The folder: one .limp policy and its .scenario files.
        dir: String,
        /// The HTML file (default DIR/review.html); never a .limp or .scenario file.
        #[arg(long, short)]
        output: Option<String>,
        /// Pedal grid step in percent for the proof.
        #[arg(long, default_value_t = limpet::prove::Config::default().grid)]
        grid: f64,
        /// Quantisation of continuous states in percent.
        #[arg(long, default_value_t = limpet::prove::Config::default().resolution)]
        resolution: f64,
        /// Time followed after each injection, e.g. `1.2s`.
        #[arg(long, value_parser = parse_time, default_value = "1.2s")]
        horizon: limpet::time::Time,
        /// Bound on stored states per search; hitting it makes the verdict inconclusive.
        #[arg(long, default_value_t = limpet::prove::Config::default().max_states)]
        max_states: usize,
        /// Only fault sets whose description contains this text.
        #[arg(long)]
        only: Option<String>,
    },
    /// Rewrite policies and scenarios in the canonical layout.
    Fmt {
        /// Files to format; `-` reads standard input (a policy) and writes standard output.
        #[arg(required = true)]
        files: Vec<String>,
        /// Change nothing; list the files that would change and exit 1 if any would.
        #[arg(long)]
        check: bool,
        /// With --check, show a unified diff of each change.
        #[arg(long)]
        diff: bool,
    },
}

/// Parses `5ms`, `10 ms`, `1.5s`, `250us`.
fn parse_time(s: &str) -> Result<limpet::time::Time, String> {
    let t = s.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num
        .parse()
        .map_err(|_| format!("`{s}` is not a time such as `5ms`"))?;
    let secs = match unit.trim() {
        "s" => v,
        "ms" => v / 1e3,
        "us" => v / 1e6,
        "" => return Err(format!("`{s}` has no unit; write e.g. `{s}ms`")),
        u => return Err(format!("`{u}` is not a time unit (s, ms, us)")),
    };
    limpet::time::Time::from_secs_f64(secs).ok_or_else(|| format!("`{s}` is out of range"))
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() {
                Exit::BadInput as u8
            } else {
                0
            });
        }
    };
    let outcome: Outcome = match cli.command {
        Command::Check {
            policy,
            format,
            deny,
        } => app::check(&policy, format.into(), deny.is_some()),
        Command::Graph {
            policy,
            format: OutFormat::Svg,
        } => limpet::report::graph_svg::command(&policy),
        Command::Graph { policy, format } => app::graph(&policy, format.into()),
        Command::Run {
            scenarios,
            policy,
            sample,
            format,
            quiet,
            approved,
            approve,
        } => {
            let cfg = app::RunConfig {
                policy,
                sample_every: sample,
                format: format.into(),
                quiet,
            };
            match approved {
                Some(dir) => limpet::approve::run_approved(&scenarios, &cfg, &dir, approve),
                None => app::run(&scenarios, &cfg),
            }
        }
        Command::Prove {
            policy,
            grid,
            resolution,
            horizon,
            max_states,
            jobs,
            free_pedal,
            exact_twin,
            double,
            only,
            screen,
            counterexamples,
            format,
        } => {
            if let Err(e) = limpet::prove::Config::check_flags(grid, resolution, horizon) {
                Outcome::bad_input(e)
            } else {
                let search = limpet::prove::Config {
                    grid,
                    resolution,
                    horizon,
                    max_states,
                    free_pedal,
                    exact_twin,
                    jobs,
                    scope: double.then_some(limpet::model::FaultScope::Double),
                    only,
                    screen,
                };
                let progress = std::io::IsTerminal::is_terminal(&std::io::stderr());
                let cfg = app::ProveConfig {
                    search,
                    format: format.into(),
                    counterexamples,
                    progress,
                };
                app::prove(&policy, &cfg)
            }
        }
        Command::Diff {
            old,
            new,
            scenarios,
            prove,
            only,
            format,
        } => {
            let search = prove.then(|| limpet::prove::Config {
                only,
                ..limpet::diff::review_search()
            });
            let cfg = limpet::diff::DiffConfig {
                format: format.into(),
                scenarios,
                prove: search,
            };
            limpet::diff::run(&old, &new, &cfg)
        }
        Command::Review {
            dir,
            output,
            grid,
            resolution,
            horizon,
            max_states,
            only,
        } => {
            let search = limpet::prove::Config {
                grid,
                resolution,
                horizon,
                max_states,
                only,
                ..limpet::prove::Config::default()
            };
            limpet::review::command(dir, output, search)
        }
        Command::Fmt { files, check, diff } => limpet::fmt::run(&files, check, diff),
    };
    // The one place that writes results and sets the exit status.
    let _ = std::io::stdout().write_all(outcome.stdout.as_bytes());
    let _ = std::io::stderr().write_all(outcome.stderr.as_bytes());
    ExitCode::from(outcome.exit as u8)
}
