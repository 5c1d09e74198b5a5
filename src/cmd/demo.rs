use super::{colour_stdout, run_info};
use limen::Error;
use limen::error::EXIT_OK;
use limen::read::{Batch, Workspace};
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
    let templates = limen::templates::Templates::load(Some(&ws_dir))?;
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
        let (files, warnings) = limen::issue::render(&report, &templates)?;
        for w in warnings {
            eprintln!("warning: {w}");
        }
        for path in limen::issue::write_all(&reports_dir, &files)? {
            println!("-> issued {}", path.display());
            issued.push(path);
        }
        println!();
    }
    let (study_file, study_id, effective) = limen::starter::DEMO_STUDY;
    let study_path = ws_dir.join(study_file);
    let file = study_path.display().to_string();
    println!(
        "$ limen study {file} --register {} --effective {effective} --study-id {study_id}",
        ws_dir.join("limits.csv").display()
    );
    let groups = limen::study::groups(
        &file,
        limen::study::parse_study(&file, &limen::read::csvtable::read_file(&study_path)?)?,
    )?;
    let opts = limen::study::mdl::Options::default();
    let results: Vec<_> = groups
        .iter()
        .map(|g| limen::study::mdl::compute(g, &opts))
        .collect();
    for r in &results {
        println!("{}", limen::render::study::mdl_text(r));
    }
    let effective_date = limen::read::csvtable::parse_date(effective).unwrap_or_default();
    let rows = limen::study::register_update::rows_for(
        &results,
        &ws.register,
        effective_date,
        study_id,
        ws.lab.significant_figures,
    );
    limen::study::register_update::append(&ws_dir.join("limits.csv"), &rows).map_err(
        |e| match e {
            limen::study::register_update::UpdateError::Read(r) => Error::Read(r),
            other => Error::Usage {
                message: other.to_string(),
                hint: other.hint(),
            },
        },
    )?;
    for r in &rows {
        println!(
            "-> register row added: {} / {} / {}: MDL {} {}, LOQ {} {}, in force from {} ({}); batches analysed from that date use it.\n",
            r.analyte,
            r.matrix,
            r.method,
            r.mdl,
            r.unit,
            r.loq,
            r.unit,
            r.effective_from,
            r.study_id
        );
    }
    println!("workspace: {}", ws_dir.display());
    println!("reports:   {}", reports_dir.display());
    for p in &issued {
        println!("  {}", p.display());
    }
    Ok(EXIT_OK)
}
