//! `partita`: the Jupyter kernel, its installer, and a headless notebook runner.

mod install;
mod notebook;
mod session;

use anyhow::{Context, Result, bail};
use clap::{Parser, Subcommand};
use std::path::PathBuf;

#[derive(Parser)]
#[command(
    name = "partita",
    version,
    about = "Analysis of designed lab experiments, in Jupyter notebooks"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run as a Jupyter kernel (what kernel.json launches).
    Kernel {
        /// The connection file Jupyter wrote.
        #[arg(long = "connection-file", short = 'f')]
        connection_file: PathBuf,
        /// The most MiB one inbound message may hold; a peer announcing more is disconnected.
        #[arg(long = "max-message-mib", default_value_t = 256, value_parser = clap::value_parser!(u64).range(1..=65536))]
        max_message_mib: u64,
    },
    /// Install the kernelspec so Jupyter offers Partita.
    Install {
        /// Into the user's Jupyter data folder (the default).
        #[arg(long, conflicts_with_all = ["sys_prefix", "prefix"])]
        user: bool,
        /// Into the active Python environment ($VIRTUAL_ENV or $CONDA_PREFIX).
        #[arg(long = "sys-prefix", conflicts_with = "prefix")]
        sys_prefix: bool,
        /// Into DIR/share/jupyter/kernels/partita.
        #[arg(long, value_name = "DIR")]
        prefix: Option<PathBuf>,
    },
    /// Execute a notebook headless and write the executed notebook and/or an HTML report.
    Run {
        /// The .ipynb file.
        notebook: PathBuf,
        /// Where to write the executed notebook.
        #[arg(long, short = 'o')]
        output: Option<PathBuf>,
        /// Where to write the HTML report (default: NOTEBOOK's name with .html, in the working folder, when --output is not given).
        #[arg(long)]
        html: Option<PathBuf>,
        /// Go on after a failing cell (the error is kept in the outputs).
        #[arg(long = "keep-going")]
        keep_going: bool,
        /// Keep running: whenever a data file the notebook reads (or the notebook itself)
        /// changes, run it again and rewrite the outputs. Stop with Ctrl-C.
        #[arg(long)]
        watch: bool,
    },
}

fn main() {
    if let Err(e) = real_main() {
        eprintln!("partita: {e:#}");
        std::process::exit(1);
    }
}

fn real_main() -> Result<()> {
    let cli = Cli::parse();
    match cli.command {
        Command::Kernel {
            connection_file,
            max_message_mib,
        } => {
            let text = std::fs::read_to_string(&connection_file).with_context(|| {
                format!(
                    "cannot read the connection file {}",
                    connection_file.display()
                )
            })?;
            let conn = kernel::ConnectionInfo::parse(&text).map_err(anyhow::Error::msg)?;
            if let Some(warning) = conn.security().map_err(anyhow::Error::msg)? {
                eprintln!("partita: {warning}");
            }
            let limits = kernel::Limits {
                max_message_bytes: usize::try_from(max_message_mib << 20).unwrap_or(usize::MAX),
            };
            kernel::serve(conn, Box::new(session::EngineInterpreter::new()), limits)
                .map_err(anyhow::Error::msg)
        }
        Command::Install {
            user: _,
            sys_prefix,
            prefix,
        } => {
            let dir = install::install(sys_prefix, prefix)?;
            println!("installed the Partita kernelspec in {}", dir.display());
            Ok(())
        }
        Command::Run {
            notebook,
            output,
            html,
            keep_going,
            watch,
        } => {
            let html = match (&output, html) {
                (None, None) => {
                    let stem = notebook
                        .file_stem()
                        .map(|s| s.to_os_string())
                        .unwrap_or_else(|| "notebook".into());
                    Some(PathBuf::from(stem).with_extension("html"))
                }
                (_, h) => h,
            };
            if watch {
                return notebook::watch(&notebook, keep_going, output.as_deref(), html.as_deref());
            }
            let report = notebook::run(&notebook, keep_going)?;
            notebook::write_outputs(&report, output.as_deref(), html.as_deref())?;
            if let Some((cell, msg)) = &report.failed {
                bail!("cell {cell} failed: {msg}");
            }
            Ok(())
        }
    }
}
