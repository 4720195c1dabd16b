//! The `dunereel` command: parses arguments, loads the job, calls the library, reports, exits.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use dunereel::error::exit;
use dunereel::run::parts::PartSpec;
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
    /// Render the animation and write the change record of one or more jobs (each its own folder).
    Render {
        /// The job file(s) (YAML). A job that fails is reported and the others go on.
        #[arg(required = true)]
        jobs: Vec<PathBuf>,
        /// Write into this folder instead of the job's output.folder (one job only).
        #[arg(long, value_name = "FOLDER")]
        output: Option<PathBuf>,
        /// Render only part K of N of the frames (K/N), or the part a Slurm job array task stands
        /// for (`slurm`); put the parts together with `dunereel assemble`.
        #[arg(long, value_name = "K/N|slurm")]
        part: Option<String>,
        /// Skip a job whose output folder already verifies and was made from the same job file and grids.
        #[arg(long)]
        skip_done: bool,
        /// Replace the output folder if it exists.
        #[arg(long)]
        overwrite: bool,
        /// Worker threads, 1 or more (default: all cores). The output is the same for any number.
        #[arg(long, value_name = "N", allow_negative_numbers = true,
              value_parser = clap::value_parser!(u16).range(1..))]
        threads: Option<u16>,
    },
    /// Build a job's output from the parts rendered with `render --part`.
    Assemble {
        /// The job file (YAML).
        job: PathBuf,
        /// The output folder the parts were rendered for, if not the job's output.folder.
        #[arg(long, value_name = "FOLDER")]
        output: Option<PathBuf>,
        /// Replace the output folder if it exists (an earlier dunereel output only).
        #[arg(long)]
        overwrite: bool,
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
            jobs,
            output,
            part,
            skip_done,
            overwrite,
            threads,
        } => {
            set_threads(threads);
            let flags = RenderFlags {
                output,
                part,
                skip_done,
                overwrite,
                quiet: cli.quiet,
            };
            render_all(&jobs, &flags)
        }
        Command::Assemble {
            job,
            output,
            overwrite,
        } => assemble(&job, output, overwrite, cli.quiet),
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
        } => new_job(&grids, &output, overwrite, cli.quiet),
    };
    match outcome {
        Ok(()) => ExitCode::from(exit::OK),
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code())
        }
    }
}

fn set_threads(threads: Option<u16>) {
    if let Some(n) = threads {
        // Only fails if a pool was built already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(usize::from(n))
            .build_global();
    }
}

struct RenderFlags {
    output: Option<PathBuf>,
    part: Option<String>,
    skip_done: bool,
    overwrite: bool,
    quiet: bool,
}

/// Renders every job in turn; one failing job does not stop the others. With several jobs a closing
/// summary lists each job's result and time, and the exit code is the worst of them.
fn render_all(jobs: &[PathBuf], flags: &RenderFlags) -> dunereel::Result<()> {
    if jobs.len() > 1 && flags.output.is_some() {
        return Err(dunereel::Error::job(
            &jobs[1],
            "--output",
            "--output names one folder, so it works with one job only; drop it to use each job's output.folder",
        ));
    }
    let part = match flags.part.as_deref() {
        None => None,
        Some("slurm") => Some(slurm_part()?),
        Some(text) => {
            Some(PartSpec::parse(text).map_err(|m| dunereel::Error::job(&jobs[0], "--part", m))?)
        }
    };
    if let [path] = jobs {
        match render_one(path, flags, part)? {
            Some(what) if !flags.quiet => println!("{what}"),
            None if !flags.quiet => println!(
                "{}: skipped, done already (its output verifies and was made from this job and these grids)",
                path.display()
            ),
            _ => {}
        }
        return Ok(());
    }
    let mut summary = Vec::new();
    let (mut failed, mut worst_code) = (0, 0);
    for path in jobs {
        let started = std::time::Instant::now();
        let outcome = render_one(path, flags, part);
        let secs = started.elapsed().as_secs_f64();
        summary.push(match outcome {
            Ok(Some(what)) => format!("ok       {secs:>7.1} s  {what}"),
            Ok(None) => format!("skipped  {secs:>7.1} s  {}: done already", path.display()),
            Err(e) => {
                eprintln!("error: {e}");
                failed += 1;
                worst_code = worst_code.max(e.exit_code());
                format!("FAILED   {secs:>7.1} s  {}", path.display())
            }
        });
    }
    println!("{} jobs:", jobs.len());
    for l in &summary {
        println!("  {l}");
    }
    if failed == 0 {
        return Ok(());
    }
    let message = format!(
        "{failed} of {} jobs failed (see the messages above); the others are done",
        jobs.len()
    );
    let here = std::path::Path::new("render");
    Err(if worst_code == dunereel::error::exit::BAD_INPUT {
        dunereel::Error::input(here, message)
    } else {
        dunereel::Error::output(here, message)
    })
}

/// Renders one job (or one part of it). `Ok(None)` when it was skipped as done.
fn render_one(
    path: &std::path::Path,
    flags: &RenderFlags,
    part: Option<PartSpec>,
) -> dunereel::Result<Option<String>> {
    let job = job::load(path)?;
    let bar = progress_bar(flags.quiet);
    let progress_bar = bar.clone();
    let opts = RunOptions {
        overwrite: flags.overwrite,
        output_folder: flags.output.clone(),
        progress: Some(Box::new(move |done, all| {
            progress_bar.set_length(all as u64);
            progress_bar.set_position(done as u64);
        })),
    };
    if flags.skip_done && dunereel::run::is_done(&job, &opts) {
        return Ok(None);
    }
    if let Some(spec) = part {
        let report = dunereel::run::parts::render_part(&job, &opts, spec);
        bar.finish_and_clear();
        let report = report?;
        print_warnings(&report.warnings, flags.quiet);
        return Ok(Some(format!(
            "part {}/{}: frames {}..{} of {} in {}",
            spec.k,
            spec.n,
            report.frames.start,
            report.frames.end,
            report.frames_in_job,
            report.folder.display()
        )));
    }
    let report = run_job(&job, &opts);
    bar.finish_and_clear();
    let report = report?;
    print_warnings(&report.warnings, flags.quiet);
    if log::log_enabled!(log::Level::Info) {
        print_timings(&report.timings);
    }
    Ok(Some(summary_line(&report)))
}

fn summary_line(report: &dunereel::RunReport) -> String {
    format!(
        "{}: {} frames ({} surveys, {} interpolated), {} payload files",
        report.folder.display(),
        report.frames,
        report.survey_frames,
        report.frames - report.survey_frames,
        report.files
    )
}

/// The stage table printed with `-v`.
fn print_timings(timings: &[(&str, f64)]) {
    let total: f64 = timings.iter().map(|t| t.1).sum();
    eprintln!("{:<40} {:>8} {:>6}", "stage", "seconds", "share");
    for (stage, s) in timings {
        eprintln!("{stage:<40} {s:>8.2} {:>5.1}%", 100.0 * s / total.max(1e-9));
    }
    eprintln!("{:<40} {total:>8.2}", "total");
}

fn print_warnings(warnings: &[String], quiet: bool) {
    if !quiet {
        for w in warnings {
            eprintln!("warning: {w}");
        }
    }
}

/// Part K of N from the Slurm job-array variables of this process.
fn slurm_part() -> dunereel::Result<PartSpec> {
    PartSpec::from_slurm(|name| std::env::var(name).ok())
        .map_err(|(var, m)| dunereel::Error::job(std::path::Path::new("--part slurm"), var, m))
}

fn assemble(
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
    let report = dunereel::run::parts::assemble(&job, &opts)?;
    print_warnings(&report.warnings, quiet);
    if !quiet {
        println!("{}", summary_line(&report));
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

fn new_job(
    grids: &[PathBuf],
    job: &std::path::Path,
    overwrite: bool,
    quiet: bool,
) -> dunereel::Result<()> {
    use std::io::Write;
    dunereel::encode::atomic::check_target(job, overwrite)?;
    let text = job::draft::draft(grids, job)?;
    dunereel::encode::atomic::write_atomic(job, overwrite, |f| {
        f.write_all(text.as_bytes())
            .map_err(|e| dunereel::Error::io(job, e))
    })?;
    if quiet {
        return Ok(());
    }
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
    for line in report.lines() {
        println!("{line}");
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
    Err(dunereel::Error::input(folder, report.summary()))
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
