//! The certificate of analysis: the report model laid out as pages (with
//! the wording from the templates) and exported to PDF.

use super::{Output, Render, RenderError};
use crate::classify::{State, Verdict};
use crate::layout::{
    Align, BLACK, Cell, Column, Flow, GREY, Item, LIGHT, Margins, Measure, Page, Row, Style, Table,
};
use crate::numeric::plain;
use crate::qc;
use crate::read::{DecisionRule, PageSize};
use crate::report::{Report, ReportRow};
use crate::templates::{Block, Templates, blocks};
use serde::Serialize;
use std::collections::BTreeMap;

const RED: (f32, f32, f32) = (0.78, 0.12, 0.12);
const GREEN: (f32, f32, f32) = (0.10, 0.55, 0.25);
const AMBER: (f32, f32, f32) = (0.85, 0.55, 0.05);
const BLUE: (f32, f32, f32) = (0.30, 0.42, 0.65);

pub struct Certificate<'t> {
    pub templates: &'t Templates,
}

/// Everything the templates may use.
#[derive(Serialize)]
pub struct Context {
    lab_name: String,
    lab_address: String,
    accreditation: String,
    signatory: String,
    signatory_role: String,
    report: String,
    revision: u32,
    batch: String,
    client_name: String,
    client_address: String,
    client_contact: String,
    received_on: String,
    issued_on: String,
    analysed_from: String,
    analysed_to: String,
    verification_code: String,
    guarded: bool,
    compare_reported: bool,
    has_nd: bool,
    has_dbl: bool,
    has_quantified: bool,
    has_over_range: bool,
    has_inconclusive: bool,
    mdl_range: String,
    loq_range: String,
    inconclusive_items: String,
    studies: String,
    has_blank_affected: bool,
    has_matrix_effect: bool,
    has_imprecise: bool,
    has_qc_exception: bool,
    has_qualifiers: bool,
    qc_exception_reason: String,
    is_revision: bool,
    replaces_report: String,
    replaces_revision: u32,
    replaces_issued_on: String,
    revision_reason: String,
    changed_results: String,
    changed_list: Vec<String>,
    has_uncertainty: bool,
}

/// "lowest (id) to highest (id)", per unit.
fn range(rows: &[ReportRow], pick: impl Fn(&ReportRow) -> rust_decimal::Decimal) -> String {
    let mut by_unit: BTreeMap<&str, (&ReportRow, &ReportRow)> = BTreeMap::new();
    for r in rows {
        let e = by_unit.entry(r.unit.symbol()).or_insert((r, r));
        if pick(r) < pick(e.0) {
            e.0 = r;
        }
        if pick(r) > pick(e.1) {
            e.1 = r;
        }
    }
    by_unit
        .into_iter()
        .map(|(unit, (lo, hi))| {
            format!(
                "{} {unit} ({} {}) to {} {unit} ({} {})",
                pick(lo),
                lo.lab_id,
                lo.analyte,
                pick(hi),
                hi.lab_id,
                hi.analyte
            )
        })
        .collect::<Vec<_>>()
        .join("; ")
}

pub fn context(report: &Report) -> Context {
    let h = &report.header;
    let rows = &report.rows;
    let has = |s: State| rows.iter().any(|r| r.state == s);
    let qual = |q: &str| rows.iter().any(|r| r.qualifiers.iter().any(|x| x == q));
    let mut studies: Vec<&str> = rows.iter().map(|r| &*r.limits_row).collect();
    studies.sort_unstable();
    studies.dedup();
    let dates = rows.iter().map(|r| r.analyzed_on);
    let replaces = h.replaces.as_ref();
    Context {
        lab_name: h.lab_name.clone(),
        lab_address: h.lab_address.clone(),
        accreditation: h.accreditation.clone().unwrap_or_default(),
        signatory: h.signatory.clone(),
        signatory_role: h.signatory_role.clone(),
        report: h.report.clone(),
        revision: h.revision,
        batch: h.batch.clone(),
        client_name: h.client_name.clone(),
        client_address: h.client_address.clone(),
        client_contact: h.client_contact.clone(),
        received_on: h.received_on.to_string(),
        issued_on: h
            .issued_at
            .with_timezone(&h.utc_offset)
            .format("%Y-%m-%d")
            .to_string(),
        analysed_from: dates
            .clone()
            .min()
            .map(|d| d.to_string())
            .unwrap_or_default(),
        analysed_to: dates.max().map(|d| d.to_string()).unwrap_or_default(),
        verification_code: h.verification_code.clone().unwrap_or_default(),
        guarded: h.decision_rule == DecisionRule::Guarded,
        compare_reported: h.compare == crate::read::Compare::Reported,
        has_nd: has(State::NotDetected),
        has_dbl: has(State::DetectedBelowLoq),
        has_quantified: has(State::Quantified),
        has_over_range: has(State::OverRange),
        has_inconclusive: rows
            .iter()
            .any(|r| r.verdict == Some(Verdict::Inconclusive)),
        mdl_range: range(rows, |r| r.mdl),
        loq_range: range(rows, |r| r.loq),
        inconclusive_items: rows
            .iter()
            .filter(|r| r.verdict == Some(Verdict::Inconclusive))
            .map(|r| format!("{} {}", r.lab_id, r.analyte))
            .collect::<Vec<_>>()
            .join(", "),
        studies: studies.join(", "),
        has_blank_affected: qual(qc::BLANK_AFFECTED),
        has_matrix_effect: qual(qc::MATRIX_EFFECT),
        has_imprecise: qual(qc::IMPRECISE),
        has_qc_exception: report.qc_exception.is_some(),
        has_qualifiers: rows.iter().any(|r| !r.qualifiers.is_empty()),
        qc_exception_reason: report.qc_exception.clone().unwrap_or_default(),
        is_revision: replaces.is_some(),
        replaces_report: replaces.map(|r| r.report.clone()).unwrap_or_default(),
        replaces_revision: replaces.map(|r| r.revision).unwrap_or_default(),
        replaces_issued_on: replaces
            .map(|r| r.issued_on.to_string())
            .unwrap_or_default(),
        revision_reason: replaces.map(|r| r.reason.clone()).unwrap_or_default(),
        changed_results: replaces
            .map(|r| {
                if r.changed.is_empty() {
                    "none".to_string()
                } else {
                    r.changed.join("; ")
                }
            })
            .unwrap_or_default(),
        changed_list: replaces.map(|r| r.changed.clone()).unwrap_or_default(),
        has_uncertainty: rows
            .iter()
            .any(|r| uncertainty(r, h.significant_figures).is_some()),
    }
}

/// The expanded uncertainty U (k = 2) of a quantified result, in its unit,
/// when the result carries one.
pub fn uncertainty(r: &ReportRow, sig: u32) -> Option<rust_decimal::Decimal> {
    if r.state != State::Quantified {
        return None;
    }
    let u = r
        .value_unrounded
        .abs()
        .checked_mul(r.uncertainty_pct?)?
        .checked_div(rust_decimal::Decimal::ONE_HUNDRED)?;
    Some(crate::numeric::round_sig(u, sig.min(2)))
}

fn qualifier_codes(r: &ReportRow) -> String {
    r.qualifiers
        .iter()
        .map(|q| match q.as_str() {
            qc::BLANK_AFFECTED => "B",
            qc::MATRIX_EFFECT => "M",
            qc::IMPRECISE => "I",
            qc::QC_EXCEPTION => "X",
            _ => "?",
        })
        .collect::<Vec<_>>()
        .join(" ")
}

fn verdict_color(v: Option<Verdict>) -> (f32, f32, f32) {
    match v {
        Some(Verdict::Pass) => GREEN,
        Some(Verdict::Fail) => RED,
        Some(_) => AMBER,
        None => BLACK,
    }
}

/// The log-scale strip: MDL and LOQ as thin marks, the limit as a red mark,
/// the result as a dot, or a bar for a "less than" or "above range" result.
pub fn strip(r: &ReportRow, width: f32, height: f32) -> Vec<Item> {
    let Some(limit) = r.spec_limit else {
        return Vec::new();
    };
    let f = |d: rust_decimal::Decimal| d.to_string().parse::<f64>().unwrap_or(f64::NAN);
    let (mdl, loq, lim, val) = (f(r.mdl), f(r.loq), f(limit), f(r.value_unrounded));
    let mut lo = mdl.min(lim);
    let mut hi = lim.max(loq);
    if val > 0.0 {
        lo = lo.min(val);
        hi = hi.max(val);
    }
    if !(lo > 0.0 && hi.is_finite()) {
        return Vec::new();
    }
    let (llo, lhi) = (
        (lo / 2.0).log10(),
        (hi * 2.0).log10().max((lo / 2.0).log10() + 1.0),
    );
    let x = |v: f64| -> f32 {
        if v <= 0.0 {
            return 0.0;
        }
        (((v.log10() - llo) / (lhi - llo)).clamp(0.0, 1.0) * width as f64) as f32
    };
    let mid = height / 2.0;
    let mut items = vec![Item::Line {
        x1: 0.0,
        y1: mid,
        x2: width,
        y2: mid,
        width: 0.4,
        color: LIGHT,
    }];
    let tick = |v: f64, h: f32, w: f32, color| Item::Line {
        x1: x(v),
        y1: mid - h / 2.0,
        x2: x(v),
        y2: mid + h / 2.0,
        width: w,
        color,
    };
    items.push(tick(mdl, height * 0.5, 0.5, GREY));
    items.push(tick(loq, height * 0.5, 0.5, GREY));
    let color = verdict_color(r.verdict);
    match r.state {
        State::NotDetected => items.push(Item::Rect {
            x: 0.0,
            y: mid - 1.2,
            w: x(mdl).max(1.0),
            h: 2.4,
            color: BLUE,
        }),
        State::OverRange => {
            let start = r
                .reported
                .trim_start_matches('>')
                .trim()
                .parse::<f64>()
                .map(x)
                .unwrap_or(width * 0.9);
            items.push(Item::Rect {
                x: start,
                y: mid - 1.2,
                w: (width - start).max(1.0),
                h: 2.4,
                color,
            });
        }
        State::DetectedBelowLoq | State::Quantified => {
            let cx = x(val);
            items.push(Item::Rect {
                x: cx - 2.0,
                y: mid - 2.0,
                w: 4.0,
                h: 4.0,
                color,
            });
        }
    }
    items.push(tick(lim, height, 1.4, RED));
    items
}

fn paragraph_blocks(flow: &mut Flow<'_>, text: &str, body: Style) {
    for b in blocks(text) {
        match b {
            Block::Heading(h) => {
                flow.ensure(body.line_height() * 3.0);
                flow.space(4.0);
                flow.paragraph(&h, Style::new(body.size + 1.5).bold(), 0.0);
                flow.space(1.0);
            }
            Block::Paragraph(p) => {
                flow.paragraph(&p, body, 0.0);
                flow.space(3.0);
            }
            Block::Bullet(p) => {
                // The bullet goes on the page its first line lands on.
                flow.ensure(body.line_height());
                let (x, y) = (flow.margins.left + 2.0, flow.y + body.size);
                flow.text_at(x, y, "•", body);
                flow.paragraph(&p, body, 10.0);
                flow.space(1.5);
            }
        }
    }
}

fn scaled(widths: &[f32], total: f32) -> Vec<f32> {
    let sum: f32 = widths.iter().sum();
    widths.iter().map(|w| w * total / sum).collect()
}

impl Certificate<'_> {
    /// The certificate's pages: pure layout, no I/O.
    pub fn layout(&self, report: &Report, m: &dyn Measure) -> Result<Vec<Page>, RenderError> {
        let ctx = context(report);
        let t = self.templates;
        let labels = t.labels(&ctx)?;
        let label = |k: &str| labels.get(k).cloned().unwrap_or_else(|| k.to_string());
        let h = &report.header;
        let (pw, ph) = match h.page_size {
            PageSize::A4 => (595.28, 841.89),
            PageSize::Letter => (612.0, 792.0),
        };
        let margins = Margins {
            top: 76.0,
            right: 40.0,
            bottom: 52.0,
            left: 40.0,
        };
        let body = Style::new(8.0);
        let small = Style::new(7.0);
        let mut flow = Flow::new(m, pw, ph, margins);
        let cw = flow.content_width();

        flow.paragraph(
            t.render("title", &ctx)?.trim(),
            Style::new(16.0).bold(),
            0.0,
        );
        flow.space(4.0);
        let banner = t.render("revision", &ctx)?;
        if !banner.trim().is_empty() {
            paragraph_blocks(&mut flow, &banner, body.color(RED));
            flow.space(2.0);
        }

        // Client and report details, side by side.
        let left = vec![
            (
                label("client"),
                format!("{}\n{}", h.client_name, h.client_address),
            ),
            (label("contact"), h.client_contact.clone()),
        ];
        let analysed = if ctx.analysed_from == ctx.analysed_to {
            ctx.analysed_from.clone()
        } else {
            format!("{} to {}", ctx.analysed_from, ctx.analysed_to)
        };
        let right = vec![
            (
                label("report"),
                format!(
                    "{} ({} {})",
                    h.report,
                    label("revision").to_lowercase(),
                    h.revision
                ),
            ),
            (label("batch"), h.batch.clone()),
            (label("received"), ctx.received_on.clone()),
            (label("analysed"), analysed),
            (label("issued"), ctx.issued_on.clone()),
        ];
        let info_table = |pairs: Vec<(String, String)>| Table {
            columns: vec![
                Column {
                    title: String::new(),
                    width: 62.0,
                    align: Align::Left,
                },
                Column {
                    title: String::new(),
                    width: cw / 2.0 - 70.0,
                    align: Align::Left,
                },
            ],
            show_header: false,
            header: body,
            body,
            rows: pairs
                .into_iter()
                .map(|(k, v)| Row {
                    cells: vec![Cell::Bold(k), Cell::Text(v)],
                    rule_above: false,
                })
                .collect(),
        };
        // Two small tables drawn in two columns: lay the right one out in a
        // scratch flow and move its items across.
        let top = flow.y;
        let mut scratch = Flow::new(m, pw, ph, margins);
        scratch.y = top;
        scratch.table(&info_table(right));
        let right_items: Vec<Item> = scratch.finish().remove(0).items;
        flow.table(&info_table(left));
        let left_bottom = flow.y;
        let right_bottom = right_items
            .iter()
            .filter_map(|i| {
                if let Item::Text { y, .. } = i {
                    Some(*y)
                } else {
                    None
                }
            })
            .fold(top, f32::max)
            + 4.0;
        for it in right_items
            .into_iter()
            .filter(|i| !matches!(i, Item::Rect { .. } | Item::Line { .. }))
        {
            flow.push(it.moved(cw / 2.0, 0.0));
        }
        flow.y = left_bottom.max(right_bottom) + 4.0;

        flow.paragraph(&label("methods"), body.bold(), 0.0);
        for (id, desc) in &h.methods {
            let text = if desc.is_empty() {
                id.clone()
            } else {
                format!("{id}: {desc}")
            };
            flow.paragraph(&text, body, 8.0);
        }
        flow.space(6.0);

        // Results, grouped by sample.
        flow.ensure(60.0);
        flow.paragraph(&label("results"), Style::new(10.0).bold(), 0.0);
        flow.space(2.0);
        let w = scaled(
            &[
                30.0, 90.0, 34.0, 40.0, 10.0, 28.0, 32.0, 32.0, 20.0, 68.0, 54.0, 77.0,
            ],
            cw,
        );
        let strip_w = w[11] - 2.0 * crate::layout::CELL_PAD;
        let mut rows = Vec::with_capacity(report.rows.len());
        let mut last_id: Option<&str> = None;
        for r in &report.rows {
            let first = last_id != Some(r.lab_id.as_str());
            last_id = Some(r.lab_id.as_str());
            let item = match (r.client_id.is_empty(), r.description.is_empty()) {
                (true, true) => String::new(),
                (false, true) => r.client_id.clone(),
                (true, false) => r.description.clone(),
                (false, false) => format!("{}\n{}", r.client_id, r.description),
            };
            let limit = match (&r.spec_limit, &r.spec) {
                (Some(l), Some(s)) => format!("{} {}\n{s}", plain(*l), r.unit),
                _ => String::new(),
            };
            let verdict = {
                let state = label(&format!("state_{}", r.state.name()));
                match r.verdict {
                    Some(v) => format!("{}\n{state}", label(&format!("verdict_{}", v.name()))),
                    None => state,
                }
            };
            rows.push(Row {
                cells: vec![
                    if first {
                        Cell::Bold(r.lab_id.clone())
                    } else {
                        Cell::Text(String::new())
                    },
                    Cell::Text(if first { item } else { String::new() }),
                    Cell::Text(r.analyte.to_string()),
                    Cell::Text(match uncertainty(r, h.significant_figures) {
                        Some(u) => format!("{}\n± {u}", r.reported),
                        None => r.reported.clone(),
                    }),
                    Cell::Text(qualifier_codes(r)),
                    Cell::Text(r.unit.symbol().to_string()),
                    Cell::Text(r.mdl.to_string()),
                    Cell::Text(r.loq.to_string()),
                    Cell::Text(plain(r.dilution)),
                    Cell::Text(limit),
                    Cell::Text(verdict),
                    Cell::Graphic(strip(r, strip_w, 9.0), 9.0),
                ],
                rule_above: first,
            });
        }
        let results = Table {
            columns: vec![
                Column {
                    title: label("lab_id"),
                    width: w[0],
                    align: Align::Left,
                },
                Column {
                    title: label("item"),
                    width: w[1],
                    align: Align::Left,
                },
                Column {
                    title: label("analyte"),
                    width: w[2],
                    align: Align::Left,
                },
                Column {
                    title: label("result"),
                    width: w[3],
                    align: Align::Decimal,
                },
                Column {
                    title: String::new(),
                    width: w[4],
                    align: Align::Left,
                },
                Column {
                    title: label("unit"),
                    width: w[5],
                    align: Align::Left,
                },
                Column {
                    title: label("mdl"),
                    width: w[6],
                    align: Align::Decimal,
                },
                Column {
                    title: label("loq"),
                    width: w[7],
                    align: Align::Decimal,
                },
                Column {
                    title: label("dilution"),
                    width: w[8],
                    align: Align::Right,
                },
                Column {
                    title: label("limit"),
                    width: w[9],
                    align: Align::Left,
                },
                Column {
                    title: label("verdict"),
                    width: w[10],
                    align: Align::Left,
                },
                Column {
                    title: label("strip"),
                    width: w[11],
                    align: Align::Left,
                },
            ],
            show_header: true,
            header: small.bold(),
            body: small,
            rows,
        };
        flow.table(&results);
        flow.space(3.0);
        flow.paragraph(&label("strip_legend"), Style::new(6.5).color(GREY), 0.0);
        if !report.specs_used.is_empty() {
            flow.space(6.0);
            flow.ensure(40.0);
            flow.paragraph(&label("limits_applied"), body.bold(), 0.0);
            let w = scaled(&[72.0, 100.0, 58.0, 220.0, 65.0], cw);
            flow.table(&Table {
                columns: vec![
                    Column {
                        title: label("spec"),
                        width: w[0],
                        align: Align::Left,
                    },
                    Column {
                        title: label("analyte"),
                        width: w[1],
                        align: Align::Left,
                    },
                    Column {
                        title: label("limit"),
                        width: w[2],
                        align: Align::Left,
                    },
                    Column {
                        title: label("citation"),
                        width: w[3],
                        align: Align::Left,
                    },
                    Column {
                        title: label("in_force"),
                        width: w[4],
                        align: Align::Left,
                    },
                ],
                show_header: true,
                header: small.bold(),
                body: small,
                rows: report
                    .specs_used
                    .iter()
                    .map(|s| Row {
                        cells: vec![
                            Cell::Text(s.spec.to_string()),
                            Cell::Text(if s.matrix.is_empty() {
                                s.analyte.clone()
                            } else {
                                format!("{} ({})", s.analyte, s.matrix)
                            }),
                            Cell::Text(format!("{} {}", s.limit, s.unit)),
                            Cell::Text(s.citation.to_string()),
                            Cell::Text(s.effective_from.to_string()),
                        ],
                        rule_above: false,
                    })
                    .collect(),
            });
        }
        flow.space(4.0);
        paragraph_blocks(&mut flow, &t.render("statement", &ctx)?, body.bold());
        flow.space(4.0);

        if !report.qc_checks.is_empty() {
            flow.ensure(60.0);
            flow.paragraph(&label("qc_summary"), Style::new(10.0).bold(), 0.0);
            flow.space(2.0);
            let w = scaled(&[84.0, 56.0, 80.0, 56.0, 100.0, 139.0], cw);
            let qc_table = Table {
                columns: vec![
                    Column {
                        title: label("check"),
                        width: w[0],
                        align: Align::Left,
                    },
                    Column {
                        title: label("analyte"),
                        width: w[1],
                        align: Align::Left,
                    },
                    Column {
                        title: label("rows"),
                        width: w[2],
                        align: Align::Left,
                    },
                    Column {
                        title: label("value"),
                        width: w[3],
                        align: Align::Right,
                    },
                    Column {
                        title: label("window"),
                        width: w[4],
                        align: Align::Left,
                    },
                    Column {
                        title: label("outcome"),
                        width: w[5],
                        align: Align::Left,
                    },
                ],
                show_header: true,
                header: small.bold(),
                body: small,
                rows: report
                    .qc_checks
                    .iter()
                    .map(|c| Row {
                        cells: vec![
                            Cell::Text(c.check.to_string()),
                            Cell::Text(format!("{} {}", c.analyte, c.method)),
                            Cell::Text(c.rows.clone()),
                            Cell::Text(c.value.clone()),
                            Cell::Text(c.window.clone()),
                            if c.outcome == qc::Outcome::Pass {
                                Cell::Text(c.outcome.name().to_string())
                            } else if c.note.is_empty() {
                                Cell::Bold(c.outcome.name().to_string())
                            } else {
                                Cell::Bold(format!("{} ({})", c.outcome.name(), c.note))
                            },
                        ],
                        rule_above: false,
                    })
                    .collect(),
            };
            flow.table(&qc_table);
            flow.space(6.0);
        }

        for name in ["qc-legend", "footnote", "decision-rule", "cautions"] {
            paragraph_blocks(&mut flow, &t.render(name, &ctx)?, body);
        }
        flow.space(8.0);
        flow.ensure(60.0);
        flow.push(Item::Line {
            x1: flow.margins.left,
            y1: flow.y,
            x2: flow.margins.left + 200.0,
            y2: flow.y,
            width: 0.5,
            color: BLACK,
        });
        flow.space(4.0);
        paragraph_blocks(&mut flow, &t.render("signature", &ctx)?, body);
        flow.space(6.0);
        let end = format!("— {} —", label("end"));
        flow.ensure(14.0);
        let ew = m.width(&end, 9.0, true);
        let y = flow.y + 9.0;
        flow.text_at((pw - ew) / 2.0, y, &end, Style::new(9.0).bold());

        let mut pages = flow.finish();
        let n = pages.len();
        for (i, p) in pages.iter_mut().enumerate() {
            decorate(p, i + 1, n, report, &label, m);
        }
        Ok(pages)
    }
}

/// Header and footer on every page: lab, report id and revision, page i of n.
fn decorate(
    p: &mut Page,
    i: usize,
    n: usize,
    report: &Report,
    label: &dyn Fn(&str) -> String,
    m: &dyn Measure,
) {
    let h = &report.header;
    let (left, right) = (40.0, p.width - 40.0);
    let text = |x: f32, y: f32, s: String, st: Style| Item::Text {
        x,
        y,
        text: s,
        size: st.size,
        bold: st.bold,
        color: st.color,
    };
    let right_text = |y: f32, s: String, st: Style| {
        let w = m.width(&s, st.size, st.bold);
        text(right - w, y, s, st)
    };
    let page_of = format!("{} {i} {} {n}", label("page"), label("of"));
    let id = format!(
        "{} {} · {} {}",
        label("report"),
        h.report,
        label("revision"),
        h.revision
    );
    p.items.push(text(
        left,
        36.0,
        h.lab_name.clone(),
        Style::new(10.0).bold(),
    ));
    p.items.push(text(
        left,
        46.0,
        h.lab_address.clone(),
        Style::new(7.0).color(GREY),
    ));
    if let Some(a) = &h.accreditation {
        p.items
            .push(text(left, 55.0, a.clone(), Style::new(6.5).color(GREY)));
    }
    p.items
        .push(right_text(36.0, id.clone(), Style::new(8.5).bold()));
    p.items
        .push(right_text(46.0, page_of.clone(), Style::new(8.0)));
    p.items.push(Item::Line {
        x1: left,
        y1: 62.0,
        x2: right,
        y2: 62.0,
        width: 0.6,
        color: BLACK,
    });
    let fy = p.height - 30.0;
    p.items.push(Item::Line {
        x1: left,
        y1: fy - 10.0,
        x2: right,
        y2: fy - 10.0,
        width: 0.3,
        color: GREY,
    });
    let code = h.verification_code.clone().unwrap_or_else(|| "—".into());
    p.items.push(text(
        left,
        fy,
        format!("{id} · {} {code}", label("verification")),
        Style::new(7.0).color(GREY),
    ));
    let foot = if i == n {
        format!("{page_of} · {}", label("end"))
    } else {
        page_of
    };
    p.items
        .push(right_text(fy, foot, Style::new(7.0).color(GREY)));
}

impl Render for Certificate<'_> {
    fn extension(&self) -> &'static str {
        "pdf"
    }

    fn render(&self, report: &Report) -> Result<Output, RenderError> {
        let fonts = crate::pdf::Fonts::get()?;
        let pages = self.layout(report, fonts)?;
        let h = &report.header;
        let meta = crate::pdf::Meta {
            title: format!("{} revision {}", h.report, h.revision),
            author: h.lab_name.clone(),
            subject: format!(
                "Certificate of analysis for {} (batch {})",
                h.client_name, h.batch
            ),
            creator: format!("limen {}", h.tool_version),
            created: h.issued_at.timestamp(),
        };
        let (bytes, missing) = crate::pdf::write(&pages, &meta)?;
        let warnings = if missing.is_empty() {
            Vec::new()
        } else {
            vec![format!(
                "{}: the certificate font has no glyph for {}; shown as \"?\"",
                h.report,
                missing
                    .iter()
                    .map(|c| format!("'{c}' (U+{:04X})", *c as u32))
                    .collect::<Vec<_>>()
                    .join(", ")
            )]
        };
        Ok(Output { bytes, warnings })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::Unit;
    use rust_decimal::Decimal;
    use std::str::FromStr;

    fn row(state: State, value: &str, verdict: Verdict) -> ReportRow {
        let d = |s: &str| Decimal::from_str(s).unwrap();
        ReportRow {
            line: 2,
            lab_id: "S1".into(),
            client_id: String::new(),
            description: String::new(),
            analyte: "Pb".into(),
            matrix: "paint".into(),
            method: "6010D".into(),
            analyzed_on: chrono::NaiveDate::from_ymd_opt(2026, 11, 13).unwrap(),
            reported: value.into(),
            value: Some(d(value)),
            value_unrounded: d(value),
            unit: Unit::MgPerKg,
            state,
            mdl: d("4"),
            loq: d("12"),
            mdl_unrounded: d("4"),
            loq_unrounded: d("12"),
            dilution: d("1"),
            spec: Some("P".into()),
            spec_limit: Some(d("90")),
            spec_citation: "".into(),
            verdict: Some(verdict),
            uncertainty_pct: None,
            qualifiers: Vec::new(),
            limits_row: "S".into(),
        }
    }

    /// x of the limit mark (the thickest line) and of the result dot or bar.
    fn marks(items: &[Item]) -> (f32, Option<(f32, f32)>) {
        let limit = items
            .iter()
            .filter_map(|i| match i {
                Item::Line { x1, width, .. } if *width > 1.0 => Some(*x1),
                _ => None,
            })
            .next()
            .unwrap();
        let result = items.iter().find_map(|i| match i {
            Item::Rect { x, w, .. } => Some((*x, *x + *w)),
            _ => None,
        });
        (limit, result)
    }

    #[test]
    fn the_strip_puts_the_result_on_the_right_side_of_the_limit() {
        let (limit, dot) = marks(&strip(
            &row(State::Quantified, "25", Verdict::Pass),
            80.0,
            9.0,
        ));
        assert!(dot.unwrap().1 < limit, "a pass sits left of the limit");
        let (limit, dot) = marks(&strip(
            &row(State::Quantified, "300", Verdict::Fail),
            80.0,
            9.0,
        ));
        assert!(dot.unwrap().0 > limit, "a fail sits right of the limit");
        for it in strip(&row(State::Quantified, "300", Verdict::Fail), 80.0, 9.0) {
            if let Item::Rect { x, w, .. } = it {
                assert!(x >= 0.0 - 2.0 && x + w <= 80.0 + 2.0, "inside the strip");
            }
        }
        // Not detected: a bar from the left edge up to the MDL, below the limit.
        let mut nd = row(State::NotDetected, "1", Verdict::Pass);
        nd.reported = "< 4.00".into();
        let (limit, bar) = marks(&strip(&nd, 80.0, 9.0));
        let (start, end) = bar.unwrap();
        assert_eq!(start, 0.0);
        assert!(end < limit);
        // No limit, no strip.
        let mut none = row(State::Quantified, "25", Verdict::Pass);
        none.spec_limit = None;
        assert!(strip(&none, 80.0, 9.0).is_empty());
    }
}
