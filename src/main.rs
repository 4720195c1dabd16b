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
        /// Worker threads, 1 or more (default: all cores). The output is the same for any number.
        #[arg(long, value_name = "N", allow_negative_numbers = true,
              value_parser = clap::value_parser!(u16).range(1..))]
        threads: Option<u16>,
    },
    /// Check a job file, its grids and its output folder as `render` would, writing nothing.
    Check {
        /// The job file (YAML).
        job: PathBuf,
        /// Check this output folder instead of the job's output.folder.
        #[arg(long, value_name = "FOLDER")]
        output: Option<PathBuf>,
        /// Check as if --overwrite were given to render.
        #[arg(long)]
        overwrite: bool,
    },
    /// Draft a commented job file for survey grids (dates from the file names or the TIFF DateTime tag).
    New {
        /// The survey GeoTIFFs, in any order.
        #[arg(required = true)]
        grids: Vec<PathBuf>,
        /// The job file to write.
        #[arg(short = 'o', long = "output", value_name = "JOB.yaml")]
        output: PathBuf,
        /// Replace the job file if it exists.
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
        Command::Check {
            job,
            output,
            overwrite,
        } => check(&job, output, overwrite, cli.quiet),
        Command::Verify { folder } => verify(&folder),
        Command::New {
            grids,
            output,
            overwrite,
        } => new_job(&grids, &output, overwrite),
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
    threads: Option<u16>,
    quiet: bool,
) -> dunereel::Result<()> {
    if let Some(n) = threads {
        // Only fails if a pool was built already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(usize::from(n))
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
            "{}: {} frames ({} surveys, {} interpolated), {} payload files",
            report.folder.display(),
            report.frames,
            report.survey_frames,
            report.frames - report.survey_frames,
            report.files
        );
    }
    Ok(())
}

fn check(
    path: &std::path::Path,
    output: Option<PathBuf>,
    overwrite: bool,
    quiet: bool,
) -> dunereel::Result<()> {
    let job = job::load(path)?;
    let opts = RunOptions {
        overwrite,
        output_folder: output,
        progress: None,
    };
    let report = dunereel::run::check_job(&job, &opts)?;
    if !quiet {
        for w in &report.warnings {
            eprintln!("warning: {w}");
        }
    }
    println!("{}: ok — {}", path.display(), report.summary);
    Ok(())
}

fn new_job(grids: &[PathBuf], job: &std::path::Path, overwrite: bool) -> dunereel::Result<()> {
    use std::io::Write;
    dunereel::encode::atomic::check_target(job, overwrite)?;
    let text = job::draft::draft(grids, job)?;
    dunereel::encode::atomic::write_atomic(job, overwrite, |f| {
        f.write_all(text.as_bytes())
            .map_err(|e| dunereel::Error::io(job, e))
    })?;
    println!(
        "{}: a job for {} surveys; check it with `dunereel check {}`",
        job.display(),
        grids.len(),
        job.display()
    );
    Ok(())
}

fn verify(folder: &std::path::Path) -> dunereel::Result<()> {
    let report = dunereel::archive::verify(folder)?;
    for f in &report.ignored {
        println!("ignored: {f} (left by the operating system, not part of the record)");
    }
    if report.is_intact() {
        println!(
            "{}: intact — {} payload files and {} tag files match their checksums",
            folder.display(),
            report.payload_checked,
            report.tags_checked
        );
        return Ok(());
    }
    for f in &report.altered_tags {
        println!("altered tag file: {f} (differs from its line in tagmanifest-sha256.txt)");
    }
    let payload_word = if report.manifest_edited() {
        "differs from its line in the edited manifest-sha256.txt (the line or the file changed)"
    } else {
        "altered (differs from its line in manifest-sha256.txt)"
    };
    for f in &report.altered {
        println!("{f}: {payload_word}");
    }
    for (what, list) in [("missing", &report.missing), ("extra", &report.extra)] {
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
            "the archive does not match its manifests ({} missing, {} extra, {} altered, {} altered tag files, \
             {} other problems); restore missing or altered files from a trusted copy and move extra files out",
            report.missing.len(),
            report.extra.len(),
            report.altered.len(),
            report.altered_tags.len(),
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
