//! The `limpet` binary: clap parsing, dispatch to one command, exit status. Nothing else.

use clap::{Parser, Subcommand, ValueEnum};
use limpet::app::{self, Exit, Format, Outcome};
use std::io::Write;
use std::process::ExitCode;

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
        /// dot or json.
        #[arg(long, value_enum, default_value = "dot")]
        format: OutFormat,
    },
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
        Command::Graph { policy, format } => app::graph(&policy, format.into()),
    };
    // The one place that writes results and sets the exit status.
    let _ = std::io::stdout().write_all(outcome.stdout.as_bytes());
    let _ = std::io::stderr().write_all(outcome.stderr.as_bytes());
    ExitCode::from(outcome.exit as u8)
}
