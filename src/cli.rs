//! What each command of the CLI does once its flags are parsed: run the library, print its
//! report, and turn its errors into messages and exit codes. `main.rs` holds the flags.

use std::path::PathBuf;

use dunereel::run::parts::PartSpec;
use dunereel::{job, run_job, RunOptions};

pub(crate) fn set_threads(threads: Option<u16>) {
    if let Some(n) = threads {
        // Only fails if a pool was built already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(usize::from(n))
            .build_global();
    }
}

pub(crate) struct RenderFlags {
    pub(crate) output: Option<PathBuf>,
    pub(crate) part: Option<String>,
    pub(crate) skip_done: bool,
    pub(crate) overwrite: bool,
    pub(crate) quiet: bool,
}

/// Renders every job in turn; one failing job does not stop the others. With several jobs a closing
/// summary lists each job's result and time, and the exit code is the worst of them.
pub(crate) fn render_all(jobs: &[PathBuf], flags: &RenderFlags) -> dunereel::Result<()> {
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
pub(crate) fn render_one(
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

pub(crate) fn summary_line(report: &dunereel::RunReport) -> String {
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
pub(crate) fn print_timings(timings: &[(&str, f64)]) {
    let total: f64 = timings.iter().map(|t| t.1).sum();
    eprintln!("{:<40} {:>8} {:>6}", "stage", "seconds", "share");
    for (stage, s) in timings {
        eprintln!("{stage:<40} {s:>8.2} {:>5.1}%", 100.0 * s / total.max(1e-9));
    }
    eprintln!("{:<40} {total:>8.2}", "total");
}

pub(crate) fn print_warnings(warnings: &[String], quiet: bool) {
    if !quiet {
        for w in warnings {
            eprintln!("warning: {w}");
        }
    }
}

/// Part K of N from the Slurm job-array variables of this process.
pub(crate) fn slurm_part() -> dunereel::Result<PartSpec> {
    PartSpec::from_slurm(|name| std::env::var(name).ok())
        .map_err(|(var, m)| dunereel::Error::job(std::path::Path::new("--part slurm"), var, m))
}

pub(crate) fn assemble(
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

pub(crate) fn check(
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

pub(crate) fn new_job(
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

pub(crate) fn parse_date(s: &str) -> Result<chrono::NaiveDate, String> {
    chrono::NaiveDate::parse_from_str(s.trim(), "%Y-%m-%d")
        .map_err(|_| format!("\"{s}\" is not a calendar date; write YYYY-MM-DD, e.g. 2031-03-27"))
}

pub(crate) fn still(
    path: &std::path::Path,
    opts: &dunereel::run::StillOptions,
) -> dunereel::Result<()> {
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

pub(crate) fn verify(folder: &std::path::Path) -> dunereel::Result<()> {
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
pub(crate) fn progress_bar(quiet: bool) -> indicatif::ProgressBar {
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
