//! The `dunereel` command: parses arguments, loads the job, calls the library, reports, exits.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use dunereel::error::exit;
use dunereel::{job, run_job, RunOptions};

/// Animations and change records from repeated elevation surveys of a dune field.
#[derive(Parser)]
#[command(name = "dunereel", version, about, long_about = None)]
struct Cli {
    /// Show more detail (-v: progress notes, -vv: debug).
    #[arg(short, long, action = clap::ArgAction::Count, global = true)]
    verbose: u8,
    /// Show only errors.
    #[arg(short, long, global = true)]
    quiet: bool,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Render the animation and write the change record of a job.
    Render {
        /// The job file (YAML).
        job: PathBuf,
        /// Write into this folder instead of the job's output.folder.
        #[arg(long, value_name = "FOLDER")]
        output: Option<PathBuf>,
        /// Replace the output folder if it exists.
        #[arg(long)]
        overwrite: bool,
        /// Worker threads (default: all cores). The output is the same for any number.
        #[arg(long, value_name = "N")]
        threads: Option<usize>,
    },
    /// Check a job file and its grids without writing anything.
    Check {
        /// The job file (YAML).
        job: PathBuf,
    },
    /// Render one labelled frame of a job for one date (or a contact sheet of viewpoints).
    Still {
        /// The job file (YAML).
        job: PathBuf,
        /// The date of the frame, YYYY-MM-DD, within the surveys' span.
        #[arg(long, value_name = "DATE", value_parser = parse_date)]
        at: chrono::NaiveDate,
        /// The PNG file to write.
        #[arg(short, long, value_name = "FILE")]
        output: PathBuf,
        /// Look from FACING,ELEVATION,DISTANCE (degrees from north, degrees below the horizon,
        /// metres) instead of the job's view.
        #[arg(long, value_name = "F,E,D", value_parser = dunereel::run::parse_view, allow_hyphen_values = true)]
        view: Option<dunereel::run::ViewOverride>,
        /// Write a contact sheet of N viewpoints around the site, each captioned with its view keys.
        #[arg(long, value_name = "N")]
        sheet: Option<usize>,
        /// Replace FILE if it exists.
        #[arg(long)]
        overwrite: bool,
    },
    /// Check an output folder against its SHA-256 manifests: missing, extra or altered files.
    Verify {
        /// The output (archive) folder of a run.
        folder: PathBuf,
    },
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let level = match (cli.quiet, cli.verbose) {
        (true, _) => log::LevelFilter::Error,
        (false, 0) => log::LevelFilter::Warn,
        (false, 1) => log::LevelFilter::Info,
        (false, _) => log::LevelFilter::Debug,
    };
    env_logger::Builder::new()
        .filter_level(level)
        .format_timestamp(None)
        .init();

    let outcome = match cli.command {
        Command::Render {
            job,
            output,
            overwrite,
            threads,
        } => render(&job, output, overwrite, threads, cli.quiet),
        Command::Check { job } => check(&job),
        Command::Still {
            job,
            at,
            output,
            view,
            sheet,
            overwrite,
        } => still(
            &job,
            &dunereel::run::StillOptions {
                at,
                output,
                view,
                sheet,
                overwrite,
            },
        ),
        Command::Verify { folder } => verify(&folder),
    };
    match outcome {
        Ok(()) => ExitCode::from(exit::OK),
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code())
        }
    }
}

fn render(
    path: &std::path::Path,
    output: Option<PathBuf>,
    overwrite: bool,
    threads: Option<usize>,
    quiet: bool,
) -> dunereel::Result<()> {
    if let Some(n) = threads {
        // Only fails if a pool was built already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build_global();
    }
    let job = job::load(path)?;
    let bar = progress_bar(quiet);
    let progress_bar = bar.clone();
    let opts = RunOptions {
        overwrite,
        output_folder: output,
        progress: Some(Box::new(move |done, all| {
            progress_bar.set_length(all as u64);
            progress_bar.set_position(done as u64);
        })),
    };
    let report = run_job(&job, &opts);
    bar.finish_and_clear();
    let report = report?;
    if !quiet {
        for w in &report.warnings {
            eprintln!("warning: {w}");
        }
    }
    if !quiet {
        println!(
            "{}: {} frames ({} surveys, {} interpolated), {} files",
            report.folder.display(),
            report.frames,
            report.survey_frames,
            report.frames - report.survey_frames,
            report.files
        );
    }
    Ok(())
}

fn check(path: &std::path::Path) -> dunereel::Result<()> {
    let job = job::load(path)?;
    let report = dunereel::run::check_job(&job)?;
    println!("{}: ok — {report}", path.display());
    Ok(())
}

fn parse_date(s: &str) -> Result<chrono::NaiveDate, String> {
    chrono::NaiveDate::parse_from_str(s.trim(), "%Y-%m-%d")
        .map_err(|_| format!("\"{s}\" is not a calendar date; write YYYY-MM-DD, e.g. 2031-03-27"))
}

fn still(path: &std::path::Path, opts: &dunereel::run::StillOptions) -> dunereel::Result<()> {
    let job = job::load(path)?;
    let report = dunereel::run::still(&job, opts)?;
    let which = match (report.frame_index, report.surveyed) {
        (_, true) => "survey frame".to_string(),
        (Some(i), false) => format!("interpolated frame {i}"),
        (None, false) => "interpolated, between two animation frames".to_string(),
    };
    println!("{}: {which}", report.path.display());
    for v in &report.views {
        println!("  view: {{ {v} }}");
    }
    Ok(())
}

fn verify(folder: &std::path::Path) -> dunereel::Result<()> {
    let report = dunereel::archive::verify(folder)?;
    if report.is_intact() {
        println!(
            "{}: intact — {} files match their checksums",
            folder.display(),
            report.checked
        );
        return Ok(());
    }
    for (what, list) in [
        ("missing", &report.missing),
        ("extra", &report.extra),
        ("altered", &report.altered),
    ] {
        for f in list {
            println!("{what}: {f}");
        }
    }
    for p in &report.problems {
        println!("problem: {p}");
    }
    Err(dunereel::Error::input(
        folder,
        format!(
            "the archive does not match its manifests ({} missing, {} extra, {} altered, {} other problems); \
             restore the listed files from a trusted copy",
            report.missing.len(),
            report.extra.len(),
            report.altered.len(),
            report.problems.len()
        ),
    ))
}

/// A progress bar on standard error; hidden when that is not a terminal or when quiet.
fn progress_bar(quiet: bool) -> indicatif::ProgressBar {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let bar = indicatif::ProgressBar::new(0);
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} frames  {per_sec}  {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    bar
}
