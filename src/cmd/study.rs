use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::read::csvtable::{parse_date, read_file};
use limen::read::{Register, Workspace};
use limen::render::study as out;
use limen::study::{self, calibration, mdl, register_update, verify};
use std::path::{Path, PathBuf};

#[derive(clap::ValueEnum, Clone, Copy)]
pub enum SigmaArg {
    Residual,
    Intercept,
}

#[derive(clap::Args)]
pub struct Args {
    /// Replicate results: analyte, matrix, method, kind (spike | blank | reagent-blank),
    /// value, unit, prepared_on, analyzed_on, batch, spike_level, lab_id.
    study: Option<PathBuf>,
    /// The workspace (for the register and significant figures); default: searched upward.
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    /// LOQ rule: ten-sd (default), ml, factor:X or lowest-standard:V.
    #[arg(long, value_name = "RULE", default_value = "ten-sd")]
    loq: String,
    /// IDL = this factor × SD of the reagent blanks.
    #[arg(long, value_name = "X", default_value_t = 3.0)]
    idl_factor: f64,
    /// Leave a result out (give --reason once for each --exclude).
    #[arg(long, value_name = "LAB_ID")]
    exclude: Vec<String>,
    #[arg(long, value_name = "TEXT")]
    reason: Vec<String>,
    /// Write the full-precision results to this CSV file.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Write a study record (results, dot plot, data) to this PDF file.
    #[arg(long, value_name = "FILE")]
    pdf: Option<PathBuf>,
    /// Append the new limits to this register (with --effective and --study-id);
    /// with --verify, the register to verify against.
    #[arg(long, value_name = "FILE")]
    register: Option<PathBuf>,
    #[arg(long, value_name = "DATE")]
    effective: Option<String>,
    #[arg(long, value_name = "ID")]
    study_id: Option<String>,
    /// Ongoing verification of the MDLs in force from a year's routine spikes and blanks.
    #[arg(long)]
    verify: bool,
    /// Calibration-based DL and QL (ICH Q2(R2)) from a CSV of level, response.
    #[arg(long, value_name = "FILE")]
    calibration: Option<PathBuf>,
    #[arg(long, value_enum, default_value = "residual")]
    sigma: SigmaArg,
    /// Signal-to-noise estimate from a trace CSV of x, signal.
    #[arg(long, value_name = "FILE")]
    baseline: Option<PathBuf>,
    /// Baseline window A:B (x range).
    #[arg(long, value_name = "A:B")]
    window: Option<String>,
    /// Peak range C:D (x range).
    #[arg(long, value_name = "C:D")]
    peak: Option<String>,
    /// Calibration slope (signal per concentration) to express S/N levels as concentrations.
    #[arg(long, value_name = "S")]
    slope: Option<f64>,
}

fn usage(message: impl Into<String>, hint: impl Into<String>) -> Error {
    Error::Usage {
        message: message.into(),
        hint: hint.into(),
    }
}

fn workspace(explicit: Option<&Path>, near: &Path) -> Result<Option<Workspace>, Error> {
    let root = match explicit {
        Some(d) => d.to_path_buf(),
        None => {
            let start = near
                .parent()
                .filter(|p| !p.as_os_str().is_empty())
                .unwrap_or(Path::new("."));
            match Workspace::find(start) {
                Ok(r) => r,
                Err(_) => return Ok(None),
            }
        }
    };
    Ok(Some(Workspace::load(&root)?))
}

pub fn run(a: Args) -> Result<i32, Error> {
    if let Some(cal) = &a.calibration {
        return calibration_run(&a, cal);
    }
    if let Some(trace) = &a.baseline {
        return baseline_run(&a, trace);
    }
    let path = a.study.as_ref().ok_or_else(|| {
        usage(
            "no study file given",
            "limen study STUDY.csv (or --calibration FILE, or --baseline FILE)",
        )
    })?;
    let opts = options(&a)?;
    let file = path.display().to_string();
    let groups = study::groups(&file, study::parse_study(&file, &read_file(path)?)?)?;
    for (id, _) in &opts.exclusions {
        if !groups
            .iter()
            .any(|g| g.rows.iter().any(|r| &r.lab_id == id))
        {
            return Err(usage(
                format!("--exclude {id}: no such lab id in {file}"),
                "check the lab id",
            ));
        }
    }
    if a.verify {
        return verify_run(&a, path, &groups, &opts);
    }

    let results: Vec<mdl::MdlResult> = groups.iter().map(|g| mdl::compute(g, &opts)).collect();
    println!("MDL study {file} (40 CFR Part 136 Appendix B, Revision 2)\n");
    for r in &results {
        println!("{}", out::mdl_text(r));
    }
    if results.iter().any(|r| !r.ok()) {
        eprintln!("error: at least one group has no result; nothing was written");
        eprintln!(
            "hint: add replicates until each group has at least 7 spikes and 7 blanks, then run again"
        );
        return Ok(EXIT_BLOCKED);
    }
    // Validate the register request before writing anything.
    let update = register_request(&a, &results)?;
    if let Some(pdf_path) = &a.pdf {
        let lab = workspace(a.workspace.as_deref(), path)?
            .map(|w| w.lab.name)
            .unwrap_or_default();
        let run = super::run_info()?;
        let bytes = limen::render::study_pdf::record(
            &results,
            &groups,
            &file,
            &lab,
            run.issued_at.timestamp(),
            &run.tool_version,
        )?;
        write_new_at(pdf_path, &bytes)?;
    }
    if let Some(csv_path) = &a.csv {
        write_new_at(csv_path, &out::mdl_csv(&results))?;
    }
    if let Some((reg_path, rows)) = update {
        let dropped = register_update::append(&reg_path, &rows)?;
        println!("appended to {}:", reg_path.display());
        for r in &rows {
            println!("  {}", r.describe());
        }
        if !dropped.is_empty() {
            eprintln!(
                "note: {} has no {} column(s); the study's spike SD and count were not kept, so results against these limits get no detection power",
                reg_path.display(),
                dropped.join(" or ")
            );
        }
    }
    Ok(EXIT_OK)
}

fn calibration_run(a: &Args, cal: &Path) -> Result<i32, Error> {
    let sigma = match a.sigma {
        SigmaArg::Residual => calibration::Sigma::Residual,
        SigmaArg::Intercept => calibration::Sigma::Intercept,
    };
    let r = calibration::compute(&cal.display().to_string(), &read_file(cal)?, sigma)?;
    print!("{}", out::calibration_text(&r));
    Ok(EXIT_OK)
}

fn baseline_run(a: &Args, trace: &Path) -> Result<i32, Error> {
    let window = a.window.as_deref().ok_or_else(|| {
        usage(
            "--baseline needs --window A:B",
            "give the x range of baseline without peaks",
        )
    })?;
    let window =
        study::baseline::parse_range(window).map_err(|m| usage(m, "write the range as A:B"))?;
    let peak = match &a.peak {
        Some(p) => {
            Some(study::baseline::parse_range(p).map_err(|m| usage(m, "write the range as C:D"))?)
        }
        None => None,
    };
    let r = study::baseline::compute(
        &trace.display().to_string(),
        &read_file(trace)?,
        window,
        peak,
        a.slope,
    )?;
    print!("{}", out::noise_text(&r));
    Ok(EXIT_OK)
}

fn options(a: &Args) -> Result<mdl::Options, Error> {
    if a.exclude.len() != a.reason.len() {
        return Err(usage(
            format!(
                "{} --exclude but {} --reason",
                a.exclude.len(),
                a.reason.len()
            ),
            "give a --reason for each --exclude; the reason is carried into every output",
        ));
    }
    let loq = mdl::LoqRule::parse(&a.loq)
        .map_err(|m| usage(m, "--loq ten-sd | ml | factor:X | lowest-standard:V"))?;
    if !(a.idl_factor.is_finite() && a.idl_factor > 0.0) {
        return Err(usage(
            "--idl-factor must be a positive number",
            "3 is usual",
        ));
    }
    Ok(mdl::Options {
        loq,
        idl_factor: a.idl_factor,
        exclusions: a
            .exclude
            .iter()
            .cloned()
            .zip(a.reason.iter().cloned())
            .collect(),
    })
}

fn verify_run(
    a: &Args,
    path: &Path,
    groups: &[study::Group],
    opts: &mdl::Options,
) -> Result<i32, Error> {
    let register = match &a.register {
        Some(p) => Register::parse(&p.display().to_string(), &read_file(p)?)?,
        None => {
            workspace(a.workspace.as_deref(), path)?
                .ok_or_else(|| {
                    usage(
                        "no register to verify against",
                        "pass --register FILE or --workspace DIR",
                    )
                })?
                .register
        }
    };
    let mut all_keep = true;
    for g in groups {
        let v = verify::verify(g, &register, opts);
        all_keep &= v.keep;
        println!("{}", out::verify_text(&v));
    }
    Ok(if all_keep { EXIT_OK } else { EXIT_BLOCKED })
}

/// The register rows a study appends, checked before anything is written.
fn register_request(
    a: &Args,
    results: &[mdl::MdlResult],
) -> Result<Option<(PathBuf, Vec<register_update::NewRow>)>, Error> {
    let Some(reg_path) = &a.register else {
        if a.effective.is_some() || a.study_id.is_some() {
            return Err(usage(
                "--effective and --study-id go with --register FILE",
                "name the register to append to",
            ));
        }
        return Ok(None);
    };
    let effective = a.effective.as_deref().ok_or_else(|| {
        usage(
            "--register needs --effective DATE",
            "the date the new limits take effect",
        )
    })?;
    let effective = parse_date(effective).ok_or_else(|| {
        usage(
            format!("--effective `{effective}` is not a date"),
            "write it as 2026-12-01",
        )
    })?;
    let study_id = a
        .study_id
        .as_deref()
        .filter(|s| !s.trim().is_empty())
        .ok_or_else(|| {
            usage(
                "--register needs --study-id ID",
                "name the study so reports can cite it",
            )
        })?;
    let ws = workspace(a.workspace.as_deref(), reg_path)?.ok_or_else(|| {
        usage(
            "no workspace found for the register's significant figures",
            "put the register in a workspace folder or pass --workspace DIR",
        )
    })?;
    let register = Register::parse(&reg_path.display().to_string(), &read_file(reg_path)?)?;
    let rows = register_update::rows_for(
        results,
        &register,
        effective,
        study_id,
        ws.lab.significant_figures,
    );
    Ok(Some((reg_path.clone(), rows)))
}

/// Writes a new file at `path` (never replacing one) and says so.
fn write_new_at(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    let (dir, name) = limen::output::dir_and_name(path);
    limen::output::write_new(dir, &name, bytes)?;
    println!("wrote {}", path.display());
    Ok(())
}
