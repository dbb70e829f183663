//! The command line (clap). Clap types stay in [`crate::cmd`]; the rest of the program sees
//! plain options ([`crate::run::RunOptions`], [`crate::run::MergeOptions`]).

use chrono::NaiveDate;
use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

/// Batch monthly reports for group weight-management programs.
#[derive(Debug, Parser)]
#[command(name = "cohortpress", version, about, long_about = None, after_help = exit_codes_help())]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Load and check a program folder and report every problem in its inputs.
    Check {
        /// The program folder (holds program.yaml and participants/).
        program: PathBuf,
        /// The day treated as today: data dated after it are future data (default: today, in
        /// program.yaml's `input.time_zone` when set).
        #[arg(long, value_name = "YYYY-MM-DD")]
        as_of: Option<NaiveDate>,
        /// `text` (a summary by kind, then the details) or `json` (one object per line for
        /// each diagnostic and each note on how a file was read).
        #[arg(long, value_enum, default_value = "text")]
        format: CheckFormat,
        /// List every diagnostic one by one, and the participants with nothing to report.
        #[arg(long)]
        verbose: bool,
        /// The group-report ledger's folder, as given to `run --state`: `check` reports a
        /// folder the run would refuse. Default: the one a run without `--out` uses
        /// (program.yaml's `report.state_dir`, else the program's own ledger beside
        /// `report.out`).
        #[arg(long, value_name = "DIR")]
        state: Option<PathBuf>,
        /// The output folder, as given to `run --out`: without `--state`, the ledger judged is
        /// the one such a run uses (the program's own when it has one, else this folder's, else
        /// the one beside it that records this program, else the program's new one).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Compute every metric and write the reports, tidy metrics and manifest.
    Run(RunArgs),
    /// Combine the outputs of `run --shard K/N` (every shard once) into the complete output:
    /// the same files, byte for byte, as one unsharded run.
    Merge(MergeArgs),
    /// List the metric modules with their settings, defaults and outputs.
    Modules {
        /// A program folder, to include its external modules.
        program: Option<PathBuf>,
    },
    /// Work with report templates.
    Templates {
        /// What to do with templates.
        #[command(subcommand)]
        action: TemplatesAction,
    },
    /// Import participant data from other formats.
    Import {
        /// The format to import.
        #[command(subcommand)]
        format: ImportFormat,
    },
    /// Generate a fictional demo program (for trying the tool and for benchmarks).
    DemoProgram {
        /// Folder to write (must be empty, absent, or an unedited previous demo program).
        out: PathBuf,
        /// Number of participants.
        #[arg(long, default_value_t = 48)]
        participants: usize,
        /// Seed of the generator; the same seed gives byte-identical files.
        #[arg(long, default_value_t = 2026)]
        seed: u64,
        /// Leave out the planted input defects.
        #[arg(long)]
        no_defects: bool,
    },
}

/// `import` formats.
#[derive(Debug, Subcommand)]
pub enum ImportFormat {
    /// HL7 FHIR R4 Patient and Observation resources (Bulk Data NDJSON, Bundle or single
    /// resources in JSON): body weight, height, waist, HbA1c, fasting glucose, blood pressure.
    Fhir {
        /// FHIR files to read.
        #[arg(required = true)]
        files: Vec<PathBuf>,
        /// The program folder to write participant folders into (existing participant
        /// folders are never changed).
        #[arg(long, value_name = "PROGRAM")]
        out: PathBuf,
        /// CSV file with columns `fhir_id,participant_id` mapping FHIR patient ids to
        /// participant ids (patients not listed are left out).
        #[arg(long, value_name = "MAP.csv")]
        ids: Option<PathBuf>,
    },
}

/// Output of `check`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum CheckFormat {
    /// For people.
    Text,
    /// For scripts: JSON Lines.
    Json,
}

/// `templates` actions.
#[derive(Debug, Subcommand)]
pub enum TemplatesAction {
    /// Write the built-in templates into DIR, to start your own from.
    Dump {
        /// Folder to write into (created; existing files are not overwritten).
        dir: PathBuf,
    },
}

/// Output format selection on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FormatArg {
    /// HTML reports.
    Html,
    /// PDF reports.
    Pdf,
}

/// Log line format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, Default)]
pub enum LogFormat {
    /// Plain text lines.
    #[default]
    Text,
    /// One JSON object per line, for log collectors.
    Json,
}

/// Arguments of `run`.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// The program folder (holds program.yaml and participants/).
    pub program: PathBuf,
    /// Reporting month, e.g. 2026-09 (default: program.yaml's report.period rule).
    #[arg(long, value_name = "YYYY-MM", conflicts_with_all = ["from", "to"])]
    pub period: Option<String>,
    /// First day of a custom reporting period.
    #[arg(long, value_name = "YYYY-MM-DD", requires = "to")]
    pub from: Option<NaiveDate>,
    /// Last day of a custom reporting period.
    #[arg(long, value_name = "YYYY-MM-DD", requires = "from")]
    pub to: Option<NaiveDate>,
    /// The day treated as today: data dated after it are future data (default: today, in
    /// program.yaml's `input.time_zone` when set).
    #[arg(long, value_name = "YYYY-MM-DD")]
    pub as_of: Option<NaiveDate>,
    /// Output folder (default: program.yaml's report.out, relative to the program folder).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Only these participants (ids): their reports and tidy metrics, and no group report (a
    /// group report covers the whole program, never a hand-picked subset). Needs an output
    /// folder of its own (`--out`), not the complete output.
    #[arg(long, value_name = "ID", num_args = 1..)]
    pub only: Vec<String>,
    /// Worker threads, 1 to 512 (default: number of cores).
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,
    /// Formats to write (default: program.yaml's report.formats).
    #[arg(long, value_enum, value_delimiter = ',', value_name = "html,pdf")]
    pub formats: Vec<FormatArg>,
    /// Print only warnings and errors.
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Log line format on standard error.
    #[arg(long, value_enum, default_value_t = LogFormat::Text)]
    pub log_format: LogFormat,
    /// Recompute only participants whose input files or settings changed since the last
    /// complete output; reuse the rest (the output is identical to a full run).
    #[arg(long)]
    pub incremental: bool,
    /// Process only shard K of N (a stable subset chosen by a hash of each participant id) and
    /// write its participant reports and partial results; combine the shards with `merge`.
    #[arg(long, value_name = "K/N", conflicts_with = "incremental")]
    pub shard: Option<crate::run::shard::ShardSpec>,
    /// Create output files and folders readable by the owner's group (0640/0750) instead of
    /// owner-only (0600/0700, the default: reports hold health data).
    #[arg(long)]
    pub group_readable: bool,
    /// State folder of the group-report ledger (what earlier group reports published; each
    /// new one is audited against it). Default: program.yaml's `report.state_dir` (relative to
    /// the program folder), else the program's own ledger (`report.out`'s name plus `.ledger`,
    /// beside it in the program folder) when it exists, else the output folder's when it has
    /// one, else the one beside the output folder that records this program, else a new one
    /// at the program's own place, whatever `--out` says (a program folder that cannot hold it
    /// stops the run: give this option); this option wins over `report.state_dir`. A ledger
    /// reached through a link is judged where it is.
    #[arg(long, value_name = "DIR")]
    pub state: Option<PathBuf>,
    /// Start the group-report audit again from nothing although this program's earlier group
    /// reports are known (the output folder holds one its ledger does not record, or `--state`
    /// names a new ledger while another records the program): without it such a run is
    /// refused, since the new report would not be audited against the ones the sponsor has.
    #[arg(long)]
    pub new_ledger: bool,
}

/// Arguments of `merge`.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// The program folder the shards were run on.
    pub program: PathBuf,
    /// The output folders of `run --shard 1/N` … `run --shard N/N`.
    #[arg(required = true, value_name = "SHARD_DIR")]
    pub shards: Vec<PathBuf>,
    /// Output folder (default: program.yaml's report.out, relative to the program folder).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Print only warnings and errors.
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Log line format on standard error.
    #[arg(long, value_enum, default_value_t = LogFormat::Text)]
    pub log_format: LogFormat,
    /// Create output files and folders readable by the owner's group (0640/0750).
    #[arg(long)]
    pub group_readable: bool,
    /// State folder of the group-report ledger (default: as for `run`: program.yaml's
    /// `report.state_dir`, else the ledger that exists of the program's own `report.out`, of
    /// the output or beside it, else a new one beside `report.out`, whatever `--out` says; this
    /// option wins over `report.state_dir`).
    #[arg(long, value_name = "DIR")]
    pub state: Option<PathBuf>,
    /// Start the group-report audit again from nothing although this program's earlier group
    /// reports are known (as for `run`).
    #[arg(long)]
    pub new_ledger: bool,
}

fn exit_codes_help() -> String {
    let mut s = String::from("Exit codes:\n");
    for (code, text) in crate::exit_code::TABLE {
        s.push_str(&format!("  {code:>3}  {text}\n"));
    }
    // A new user's first look: where the files a program needs are described (a try-out found
    // no pointer from --help to them).
    s.push_str(
        "\nStart here: `cohortpress demo-program DIR` writes a small fictional program to copy from.\n\
         docs/GUIDE.md (beside the source) describes program.yaml, each participant file and its columns.\n",
    );
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    fn run_help() -> String {
        let mut cmd = Cli::command();
        cmd.find_subcommand_mut("run")
            .expect("run subcommand")
            .render_long_help()
            .to_string()
    }

    /// A try-out found no pointer from `--help` to where program.yaml and the participant files
    /// are described.
    #[test]
    fn help_says_where_to_start() {
        let help = Cli::command().render_long_help().to_string();
        assert!(help.contains("cohortpress demo-program DIR"), "{help}");
        assert!(help.contains("docs/GUIDE.md"), "{help}");
    }

    /// `run --help` said "--only …: the group report then covers only them", while a run with
    /// `--only` writes no group report at all (docs/GUIDE.md, "Across releases").
    #[test]
    fn run_help_says_only_writes_no_group_report() {
        let help = run_help();
        assert!(
            !help.contains("the group report then covers only them"),
            "{help}"
        );
        assert!(help.contains("and no group report"), "{help}");
        assert!(help.contains("Worker threads, 1 to 512"), "{help}");
    }
}
