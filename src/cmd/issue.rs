use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::read::{Batch, Workspace};
use limen::templates::Templates;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// One or more batch folders; nothing is issued unless all can be.
    #[arg(required = true)]
    batches: Vec<PathBuf>,
    /// Folder the report files are written to.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// The workspace folder; default: searched upward from each batch for lab.toml.
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    /// Issue despite QC that holds the batch; the reason goes on the report
    /// and every held result is qualified qc-exception.
    #[arg(long, value_name = "REASON")]
    accept_qc: Option<String>,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let run = run_info()?;
    let progress = Progress::new(a.batches.len() as u64 * 2);
    let mut reports = Vec::new();
    let mut templates = Vec::new();
    // Batches of one workspace share its files, read once.
    let mut workspaces: Vec<(PathBuf, std::rc::Rc<(Workspace, Templates)>)> = Vec::new();
    for dir in &a.batches {
        progress.step(&format!("checking {}", dir.display()));
        let root = match &a.workspace {
            Some(w) => w.clone(),
            None => Workspace::find(dir)?,
        };
        let shared = match workspaces.iter().find(|(r, _)| *r == root) {
            Some((_, s)) => s.clone(),
            None => {
                let ws = Workspace::load(&root)?;
                let t = Templates::load(Some(&ws.root))?;
                let s = std::rc::Rc::new((ws, t));
                workspaces.push((root, s.clone()));
                s
            }
        };
        let ws = &shared.0;
        let batch = Batch::load(dir)?;
        templates.push(shared.clone());
        let mut report = limen::report::build(ws, &batch, 0, &run)?;
        if let Some(reason) = &a.accept_qc {
            if reason.trim().is_empty() {
                return Err(Error::Usage {
                    message: "--accept-qc needs a reason".into(),
                    hint: "say why the QC exception is acceptable, e.g. --accept-qc \"LCS high bias; all results ND\"".into(),
                });
            }
            report.accept_qc(reason);
        }
        reports.push(report);
    }
    let blocked: Vec<_> = reports.iter().filter(|r| r.is_blocked()).collect();
    if !blocked.is_empty() {
        for r in &blocked {
            eprintln!("error: {} is blocked; nothing was issued", r.header.report);
            for p in &r.problems {
                eprintln!("  - {p}\n    hint: {}", p.hint);
            }
        }
        eprintln!("hint: run `limen check` on the batch, resolve each problem, then issue again");
        return Ok(EXIT_BLOCKED);
    }
    let mut files = Vec::new();
    let mut counts = Vec::new();
    for (r, t) in reports.iter().zip(&templates) {
        progress.step(&format!("rendering {}", r.header.report));
        let (f, warnings) = limen::issue::render(r, &t.1)?;
        for w in warnings {
            eprintln!("warning: {w}");
        }
        counts.push((r.header.report.clone(), r.rows.len(), f.len()));
        files.extend(f);
    }
    progress.finish();
    let paths = limen::issue::write_all(&a.out, &files)?;
    let mut paths = paths.iter();
    for (report, results, n) in counts {
        let written: Vec<String> = paths
            .by_ref()
            .take(n)
            .map(|p| p.display().to_string())
            .collect();
        println!(
            "issued {report} ({results} results): {}",
            written.join(", ")
        );
    }
    Ok(EXIT_OK)
}

/// A progress bar on stderr for runs of several batches or of more than
/// about a second; nothing at all when stderr is not a terminal.
struct Progress {
    bar: Option<indicatif::ProgressBar>,
    start: std::time::Instant,
    several: bool,
}

impl Progress {
    fn new(steps: u64) -> Progress {
        use std::io::IsTerminal;
        let bar = std::io::stderr().is_terminal().then(|| {
            let bar = indicatif::ProgressBar::with_draw_target(
                Some(steps),
                indicatif::ProgressDrawTarget::hidden(),
            );
            if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} {msg}")
            {
                bar.set_style(style);
            }
            bar
        });
        Progress {
            bar,
            start: std::time::Instant::now(),
            several: steps > 2,
        }
    }

    fn step(&self, message: &str) {
        if let Some(bar) = &self.bar {
            if bar.is_hidden() && (self.several || self.start.elapsed().as_millis() > 1000) {
                bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
            }
            bar.set_message(message.to_string());
            bar.inc(1);
        }
    }

    fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}
