//! Study outputs: the terminal summary per group with a dot strip, and the
//! full-precision CSV.

use crate::study::baseline::NoiseResult;
use crate::study::calibration::CalibrationResult;
use crate::study::mdl::MdlResult;
use crate::study::verify::VerifyResult;

/// Three significant figures for study values on screen and paper.
pub fn g(x: f64) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    let a = x.abs();
    let digits = if a == 0.0 {
        3
    } else {
        (3 - a.log10().floor() as i32 - 1).clamp(0, 8) as usize
    };
    format!("{x:.digits$}")
}

fn opt(x: Option<f64>) -> String {
    x.map(g).unwrap_or_else(|| "–".into())
}

/// A 60-column strip: spikes `o`, blanks `x` (a digit where several fall in
/// one column), then the mean `^`, MDL `M` and LOQ `Q` marked below.
pub fn dot_strip(spikes: &[f64], blanks: &[f64], mean: f64, mdl: f64, loq: f64) -> String {
    const W: usize = 60;
    let all = spikes
        .iter()
        .chain(blanks)
        .copied()
        .chain([mean, mdl, loq, 0.0]);
    let (lo, hi) = all
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(x), b.max(x))
        });
    let span = if hi > lo { hi - lo } else { 1.0 };
    let col = |x: f64| {
        (((x - lo) / span) * (W - 1) as f64)
            .round()
            .clamp(0.0, (W - 1) as f64) as usize
    };
    let line = |values: &[f64], mark: char| {
        let mut counts = [0usize; W];
        for v in values.iter().filter(|v| v.is_finite()) {
            counts[col(*v)] += 1;
        }
        counts
            .iter()
            .map(|&c| match c {
                0 => '·',
                1 => mark,
                2..=9 => char::from_digit(c as u32, 10).unwrap_or(mark),
                _ => '+',
            })
            .collect::<String>()
    };
    let spikes_line = line(spikes, 'o');
    let blanks_line = line(blanks, 'x');
    let mut marks = vec![' '; W];
    for (x, m) in [(mean, '^'), (mdl, 'M'), (loq, 'Q')] {
        if x.is_finite() {
            marks[col(x)] = m;
        }
    }
    let marks: String = marks.into_iter().collect();
    let pad = g(lo).len().max(6);
    let mut out = format!("  {:>pad$} |{spikes_line}| {}  spikes (o)\n", g(lo), g(hi));
    if !blanks.is_empty() {
        out.push_str(&format!("  {:>pad$} |{blanks_line}|  blanks (x)\n", ""));
    }
    out.push_str(&format!("  {:>pad$}  {}\n", "", marks.trim_end()));
    out.push_str(&format!(
        "  {:>pad$}  ^ mean of spikes   M MDL   Q LOQ\n",
        ""
    ));
    out
}

pub fn mdl_text(r: &MdlResult) -> String {
    let mut out = format!("{} / {} / {} ({})\n", r.analyte, r.matrix, r.method, r.unit);
    if !r.ok() {
        out.push_str("  NO RESULT: the study design does not allow one\n");
        for e in &r.errors {
            out.push_str(&format!("  error: {e}\n"));
        }
    }
    out.push_str(&format!(
        "  spikes   n = {:<4} mean {:<10} SD {:<10} t(n-1, 0.99) {:<7} MDL_S {}\n",
        r.n_spike,
        g(r.mean_spike),
        g(r.sd_spike),
        if r.t_value.is_finite() {
            format!("{:.3}", r.t_value)
        } else {
            "–".into()
        },
        g(r.mdl_s)
    ));
    out.push_str(&format!(
        "  blanks   n = {:<4} numeric {:<5} mean {:<10} SD {:<10} MDL_b {} ({})\n",
        r.n_blank,
        r.n_blank_numeric,
        opt(r.mean_blank),
        opt(r.sd_blank),
        opt(r.mdl_b),
        r.mdl_b_rule
    ));
    if r.ok() {
        out.push_str(&format!(
            "  MDL      {} {}  ({} governs)\n  LOQ      {} {}  ({})\n",
            g(r.mdl),
            r.unit,
            r.governs.name(),
            g(r.loq),
            r.unit,
            r.loq_rule.describe()
        ));
    }
    if r.n_reagent > 0 {
        out.push_str(&format!(
            "  IDL      {}  ({} × SD of {} reagent blanks)\n",
            opt(r.idl),
            r.idl_factor,
            r.n_reagent
        ));
    }
    if !r.spike_levels.is_empty() {
        out.push_str(&format!(
            "  spike level(s): {}\n",
            r.spike_levels
                .iter()
                .map(|l| g(*l))
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    for (id, reason) in &r.excluded {
        out.push_str(&format!("  excluded {id}: {reason}\n"));
    }
    for w in &r.warnings {
        out.push_str(&format!("  warning: {w}\n"));
    }
    if r.n_spike > 0 {
        out.push_str(&dot_strip(&r.spikes, &r.blanks, r.mean_spike, r.mdl, r.loq));
    }
    out
}

pub const CSV_HEADER: [&str; 21] = [
    "analyte",
    "matrix",
    "method",
    "unit",
    "n_spike",
    "spike_level",
    "mean_spike",
    "sd_spike",
    "t_value",
    "mdl_s",
    "n_blank",
    "n_blank_numeric",
    "mean_blank",
    "sd_blank",
    "mdl_b",
    "mdl",
    "governs",
    "loq",
    "loq_rule",
    "idl",
    "warnings",
];

/// Full precision: each f64 as the shortest text that reads back exactly.
pub fn mdl_csv(results: &[MdlResult]) -> Vec<u8> {
    let full = |x: f64| {
        if x.is_finite() {
            x.to_string()
        } else {
            String::new()
        }
    };
    let o = |x: Option<f64>| x.map(full).unwrap_or_default();
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let _ = w.write_record(CSV_HEADER);
    for r in results {
        let mut notes: Vec<String> = r.errors.iter().map(|e| format!("error: {e}")).collect();
        notes.extend(
            r.excluded
                .iter()
                .map(|(id, why)| format!("excluded {id}: {why}")),
        );
        notes.extend(r.warnings.iter().cloned());
        let ok = r.ok();
        let _ = w.write_record([
            crate::render::csv::neutralise(&r.analyte).into_owned(),
            crate::render::csv::neutralise(&r.matrix).into_owned(),
            crate::render::csv::neutralise(&r.method).into_owned(),
            r.unit.symbol().to_string(),
            r.n_spike.to_string(),
            r.spike_levels
                .iter()
                .map(|l| full(*l))
                .collect::<Vec<_>>()
                .join(";"),
            full(r.mean_spike),
            full(r.sd_spike),
            full(r.t_value),
            full(r.mdl_s),
            r.n_blank.to_string(),
            r.n_blank_numeric.to_string(),
            o(r.mean_blank),
            o(r.sd_blank),
            o(r.mdl_b),
            if ok { full(r.mdl) } else { String::new() },
            if ok {
                r.governs.name().to_string()
            } else {
                String::new()
            },
            if ok { full(r.loq) } else { String::new() },
            r.loq_rule.id(),
            o(r.idl),
            crate::render::csv::neutralise(&notes.join("; ")).into_owned(),
        ]);
    }
    w.into_inner().unwrap_or_default()
}

pub fn calibration_text(c: &CalibrationResult) -> String {
    let mut out = format!(
        "Calibration{}{}: {} points at {} levels (ICH Q2(R2))\n",
        if c.analyte.is_empty() {
            String::new()
        } else {
            format!(" {}", c.analyte)
        },
        if c.unit.is_empty() {
            String::new()
        } else {
            format!(" ({})", c.unit)
        },
        c.line.n,
        c.distinct_levels
    );
    out.push_str(&format!(
        "  slope S {}   intercept {}   residual SD {}   SD of intercept {}   r² {:.5}\n",
        g(c.line.slope),
        g(c.line.intercept),
        g(c.line.residual_sd),
        g(c.line.intercept_sd),
        c.line.r_squared
    ));
    out.push_str(&format!(
        "  σ = {}\n  DL = 3.3 σ / S = {}\n  QL = 10 σ / S  = {}\n",
        c.sigma.name(),
        g(c.dl),
        g(c.ql)
    ));
    for w in &c.warnings {
        out.push_str(&format!("  warning: {w}\n"));
    }
    out
}

pub fn noise_text(n: &NoiseResult) -> String {
    let mut out = format!(
        "Signal-to-noise ESTIMATE (not a detection limit study)\n  baseline {}:{}, {} points, noise = SD of the detrended baseline = {}\n",
        n.window.0,
        n.window.1,
        n.points,
        g(n.noise_sd)
    );
    if let Some((x, h, sn)) = n.peak {
        out.push_str(&format!(
            "  peak at x = {x}: height {} above baseline, S/N = {:.1}\n",
            g(h),
            sn
        ));
    }
    out.push_str(&format!(
        "  signal at S/N 3: {}   at S/N 10: {}\n",
        g(n.signal_at_3),
        g(n.signal_at_10)
    ));
    if let (Some(c3), Some(c10)) = (n.conc_at_3, n.conc_at_10) {
        out.push_str(&format!(
            "  concentration at S/N 3: {}   at S/N 10: {}  (signal / slope)\n",
            g(c3),
            g(c10)
        ));
    }
    out.push_str(
        "  Confirm any limit from this estimate with spiked replicates (40 CFR 136 App. B).\n",
    );
    out
}

pub fn verify_text(v: &VerifyResult) -> String {
    let mut out = format!(
        "Verification {} / {} / {} over {} to {}\n",
        v.result.analyte, v.result.matrix, v.result.method, v.from, v.to
    );
    out.push_str(&format!(
        "  recomputed: MDL_S {}  MDL_b {}  MDL {} {} ({} spikes, {} blanks)\n",
        g(v.result.mdl_s),
        opt(v.result.mdl_b),
        g(v.result.mdl),
        v.result.unit,
        v.result.n_spike,
        v.result.n_blank
    ));
    if let Some((old, row)) = &v.existing {
        out.push_str(&format!(
            "  in force:   MDL {} ({row}); ratio {}; blanks above it: {} of {}\n",
            g(*old),
            opt(v.ratio),
            v.blanks_above,
            v.blanks_total
        ));
    }
    out.push_str(if v.keep {
        "  outcome: the MDL in force MAY BE KEPT\n"
    } else {
        "  outcome: the MDL in force MUST BE REPLACED\n"
    });
    for r in &v.reasons {
        out.push_str(&format!("    - {r}\n"));
    }
    for (q, n) in &v.thin_quarters {
        out.push_str(&format!(
            "  warning: {q} had {n} spike(s); Revision 2 asks for at least 2 a quarter\n"
        ));
    }
    for w in &v.result.warnings {
        out.push_str(&format!("  warning: {w}\n"));
    }
    out
}
