use super::{colour_stdout, run_info};
use limen::Error;
use limen::error::EXIT_OK;
use limen::read::{Batch, Workspace};
use limen::render::Render;
use limen::render::csv::Csv;
use std::path::{Path, PathBuf};

/// Marks a folder as the demo's own, so a re-run may clear it.
const MARKER: &str = ".limen-demo";

#[derive(clap::Args)]
pub struct Args {
    /// Where the demo workspace and its reports go.
    #[arg(long, value_name = "DIR", default_value = "limen-demo")]
    out: PathBuf,
}

fn prepare(out: &Path) -> Result<(), Error> {
    let io = |e: std::io::Error| {
        Error::Output(limen::output::OutputError::Io {
            path: out.display().to_string(),
            source: e,
        })
    };
    if out.exists() {
        let empty = std::fs::read_dir(out).map_err(io)?.next().is_none();
        if !empty && !out.join(MARKER).is_file() {
            return Err(Error::Usage {
                message: format!(
                    "{} exists and is not an earlier demo's folder",
                    out.display()
                ),
                hint: "pass --out with a new or empty folder".into(),
            });
        }
        std::fs::remove_dir_all(out).map_err(io)?;
    }
    std::fs::create_dir_all(out).map_err(io)?;
    std::fs::write(
        out.join(MARKER),
        "written by `limen demo`; safe to delete\n",
    )
    .map_err(io)?;
    Ok(())
}

pub fn run(a: Args) -> Result<i32, Error> {
    prepare(&a.out)?;
    let ws_dir = a.out.join("workspace");
    let reports_dir = a.out.join("reports");
    limen::starter::lay_down(&ws_dir, limen::starter::DEMO)?;
    let ws = Workspace::load(&ws_dir)?;
    let run = run_info()?;
    let colour = colour_stdout();
    println!("limen demo: {} (an invented lab and client)\n", ws.lab.name);
    let mut issued = Vec::new();
    for name in limen::starter::DEMO_BATCHES {
        let batch = Batch::load(&ws_dir.join(name))?;
        let report = limen::report::build(&ws, &batch, 0, &run)?;
        println!("$ limen check {}", ws_dir.join(name).display());
        print!("{}", limen::render::table::render(&report, colour));
        if report.is_blocked() {
            println!("-> not issued: the batch is blocked, as a lab would hold it.\n");
            continue;
        }
        let file = format!("{}.{}", report.header.report, Csv.extension());
        let path = limen::output::write_new(&reports_dir, &file, &Csv.render(&report))?;
        println!("-> issued {}\n", path.display());
        issued.push(path);
    }
    println!("workspace: {}", ws_dir.display());
    println!("reports:   {}", reports_dir.display());
    for p in &issued {
        println!("  {}", p.display());
    }
    Ok(EXIT_OK)
}
