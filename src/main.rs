//! The `dunereel` command: parses arguments, loads the job, calls the library, reports, exits.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use dunereel::error::exit;

mod cli;

use cli::{
    assemble, check, new_job, parse_date, render_all, set_threads, still, verify, RenderFlags,
};

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
