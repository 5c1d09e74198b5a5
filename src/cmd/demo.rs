use super::{colour_stdout, run_info};
use limen::Error;
use limen::error::EXIT_OK;
use limen::issue::{Record, issue_recorded};
use limen::ledger::Ledger;
use limen::ledger::recompute::{Against, impact, snapshot};
use limen::read::{Batch, Workspace};
use limen::reissue::{ReissueRequest, Reissued, reissue};
use limen::templates::Templates;
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

fn step(title: &str) {
    println!("\n== {title} ==\n");
}

pub fn run(a: Args) -> Result<i32, Error> {
    prepare(&a.out)?;
    let ws_dir = a.out.join("workspace");
    let reports_dir = a.out.join("reports");
    limen::starter::lay_down(&ws_dir, limen::starter::DEMO)?;
    let ws = Workspace::load(&ws_dir)?;
    let templates = Templates::load(Some(&ws_dir))?;
    let (mut ledger, _) = Ledger::open(&ws_dir)?;
    let run = run_info()?;
    println!("limen demo: {} (an invented lab and client)", ws.lab.name);

    issue_batches(&ws, &mut ledger, &templates, &reports_dir, &run)?;
    study_step(&ws, &ws_dir, &reports_dir, &run)?;
    let ws = Workspace::load(&ws_dir)?;
    let reissued = impact_and_reissue(&ws, &mut ledger, &templates, &reports_dir, &run)?;
    verify_step(&ledger, &ws_dir, &reports_dir, &reissued)?;

    println!("workspace: {} (ledger: ledger.sqlite)", ws_dir.display());
    println!("reports:   {}", reports_dir.display());
    let mut files: Vec<_> = std::fs::read_dir(&reports_dir)
        .map(|d| d.flatten().map(|e| e.path()).collect())
        .unwrap_or_default();
    files.sort();
    for p in files {
        println!("  {}", p.display());
    }
    Ok(EXIT_OK)
}

/// Step 1: check each demo batch and issue the clean ones.
fn issue_batches(
    ws: &Workspace,
    ledger: &mut Ledger,
    templates: &Templates,
    reports_dir: &Path,
    run: &limen::RunInfo,
) -> Result<(), Error> {
    let colour = colour_stdout();
    let ws_dir = &ws.root;
    step("1. check and issue the client batches");
    for name in limen::starter::DEMO_BATCHES {
        let batch = Batch::load(&ws_dir.join(name))?;
        let mut report = limen::report::build(ws, &batch, 0, run)?;
        println!("$ limen check {}", ws_dir.join(name).display());
        print!("{}", limen::render::table::render(&report, colour));
        if report.is_blocked() {
            println!("-> not issued: the batch is blocked, as a lab would hold it.\n");
            continue;
        }
        // Reviewed by the senior analyst, authorised by the technical
        // manager: the two-person release most labs run.
        println!(
            "$ limen review {} --by rokonjo",
            ws_dir.join(name).display()
        );
        let inputs = limen::release::Inputs::of(ws, &batch);
        let reviewer = ws
            .lab
            .signatory_by_id("rokonjo")
            .ok_or_else(|| Error::Usage {
                message: "the demo lab.toml has no signatory rokonjo".into(),
                hint: "run the demo in a fresh folder".into(),
            })?;
        ledger.record_review(&limen::release::review_record(
            &report,
            &batch,
            &inputs,
            reviewer,
            run.issued_at,
            "raw data, calculations and QC checked",
        ))?;
        println!(
            "$ limen issue {} --by ivale --out {}",
            ws_dir.join(name).display(),
            reports_dir.display()
        );
        let release = limen::release::authorise(
            &ws.lab,
            &report,
            Some("ivale"),
            &ledger.reviews(&report.header.report)?,
            limen::release::Reviewed::Of(&inputs),
        )?;
        limen::release::apply(&mut report, &release);
        let signer = limen::keys::load(ws_dir, "ivale", run.issued_at.timestamp())?;
        let record = Record {
            rendered: None,
            snapshot: snapshot(ws, &batch, &report),
            local_offset: ws.lab.utc_offset.to_string(),
            reason: String::new(),
            changed: Vec::new(),
            templates,
            signer: &signer,
        };
        let (paths, warnings) = issue_recorded(ledger, reports_dir, &mut report, record, None)?;
        for w in warnings {
            eprintln!("warning: {w}");
        }
        for p in &paths {
            println!("-> issued {}", p.display());
        }
        println!();
    }

    Ok(())
}

/// Step 2: the cadmium study, its record, and the register rows it adds.
fn study_step(
    ws: &Workspace,
    ws_dir: &Path,
    reports_dir: &Path,
    run: &limen::RunInfo,
) -> Result<(), Error> {
    let (study_file, study_id, effective) = limen::starter::DEMO_STUDY;
    step("2. a new limit study corrects the register");
    let study_path = ws_dir.join(study_file);
    let file = study_path.display().to_string();
    println!(
        "$ limen study {file} --register {} --effective {effective} --study-id {study_id}\n",
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
    let record = limen::render::study_pdf::record(
        &results,
        &groups,
        study_file,
        &ws.lab.name,
        run.issued_at.timestamp(),
        &run.tool_version,
    )?;
    let record_path = limen::output::write_new(reports_dir, "study-record-cd-paint.pdf", &record)?;
    println!("-> study record {}", record_path.display());
    let effective_date = limen::read::csvtable::parse_date(effective).unwrap_or_default();
    let rows = limen::study::register_update::rows_for(
        &results,
        &ws.register,
        effective_date,
        study_id,
        ws.lab.significant_figures,
    );
    limen::study::register_update::append(&ws_dir.join("limits.csv"), &rows)?;
    for r in &rows {
        println!("-> register row added: {}", r.describe());
    }

    Ok(())
}

/// Steps 3 and 4: which issued reports the correction affects, and their
/// re-issue. Returns each re-issued report with its new files.
fn impact_and_reissue(
    ws: &Workspace,
    ledger: &mut Ledger,
    templates: &Templates,
    reports_dir: &Path,
    run: &limen::RunInfo,
) -> Result<Vec<(String, Vec<PathBuf>)>, Error> {
    let (_, study_id, effective) = limen::starter::DEMO_STUDY;
    step("3. which issued reports does the change affect?");
    println!("$ limen impact --workspace {}\n", ws.root.display());
    let against = Against {
        root: &ws.root,
        register: &ws.register,
        specs: &ws.specs,
        lab: None,
        manifest: None,
    };
    let (checked, affected, _) = impact(ledger, &against, None, run, &mut |_, _| {})?;
    print!(
        "{}",
        super::impact::table(checked, &affected, &ws.register.file, &ws.specs.file)
    );

    step("4. re-issue each affected report");
    let reason = format!(
        "cadmium limits for paint corrected by study {study_id}, in force from {effective}"
    );
    let mut reissued = Vec::new();
    for i in &affected {
        println!(
            "$ limen reissue {} --reason \"{reason}\" --by ivale --out {}\n",
            i.issued.report,
            reports_dir.display()
        );
        let req = ReissueRequest {
            report: &i.issued.report,
            reason: &reason,
            out: reports_dir,
            force: false,
            local_offset: ws.lab.utc_offset.to_string(),
            templates,
            fault: None,
            lab: &ws.lab,
            by: Some("ivale"),
            keys: &ws.root,
        };
        if let Reissued::Issued {
            revision,
            paths,
            changes,
            ..
        } = reissue(ledger, &against, &req, run)?
        {
            println!(
                "-> revision {revision}, {} result(s) changed:",
                changes.len()
            );
            for c in &changes {
                println!("   {}", c.describe());
            }
            for p in &paths {
                println!("-> issued {}", p.display());
            }
            reissued.push((i.issued.report.clone(), paths));
        }
    }

    Ok(reissued)
}

/// Step 5: both revisions of each re-issued report verify.
fn verify_step(
    ledger: &Ledger,
    ws_dir: &Path,
    reports_dir: &Path,
    reissued: &[(String, Vec<PathBuf>)],
) -> Result<(), Error> {
    step("5. verify both revisions");
    for (report, paths) in reissued {
        let old = reports_dir.join(format!("{report}.pdf"));
        for p in std::iter::once(&old).chain(
            paths
                .iter()
                .filter(|p| p.extension().is_some_and(|e| e == "pdf")),
        ) {
            let bytes = limen::read::csvtable::read_file(p)?;
            println!("$ limen verify {}", p.display());
            println!(
                "{}",
                limen::ledger::verify_file(ledger, &bytes)?.describe(&p.display().to_string())
            );
            let certs = limen::keys::lab_certificates(ws_dir);
            println!("{}", limen::sign::check_pdf(&bytes).describe(Some(&certs)));
        }
    }

    Ok(())
}
