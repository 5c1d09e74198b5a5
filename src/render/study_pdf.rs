//! The study record: one page per analyte, matrix and method with the
//! results, a dot plot of the replicates and the data table.

use super::RenderError;
use super::study::g;
use crate::layout::{
    Align, Cell, Column, Flow, GREY, Item, LIGHT, Margins, Page, Row, Style, Table,
};
use crate::study::mdl::MdlResult;
use crate::study::{Group, StudyKind};

const RED: (f32, f32, f32) = (0.78, 0.12, 0.12);
const BLUE: (f32, f32, f32) = (0.25, 0.40, 0.70);
const AMBER: (f32, f32, f32) = (0.85, 0.55, 0.05);

/// Spikes and blanks on a linear axis, with the mean of the spikes, the MDL
/// and the LOQ as vertical lines. Items relative to (0, 0), `w` × 70 pt.
pub fn dot_plot(r: &MdlResult, w: f32, m: &dyn crate::layout::Measure) -> Vec<Item> {
    let values = r.spikes.iter().chain(&r.blanks).copied();
    let marks = [r.mean_spike, r.mdl, r.loq, 0.0];
    let (lo, hi) = values
        .chain(marks)
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(x), b.max(x))
        });
    let span = if hi > lo { hi - lo } else { 1.0 };
    let (lo, hi) = (lo - span * 0.05, hi + span * 0.05);
    let x = |v: f64| ((v - lo) / (hi - lo) * w as f64) as f32;
    let mut items = vec![Item::Line {
        x1: 0.0,
        y1: 50.0,
        x2: w,
        y2: 50.0,
        width: 0.6,
        color: (0.0, 0.0, 0.0),
    }];
    let label = |x: f32, y: f32, text: String, color| Item::Text {
        x,
        y,
        text,
        size: 6.5,
        bold: false,
        color,
    };
    for k in 0..=4 {
        let v = lo + (hi - lo) * k as f64 / 4.0;
        let xv = x(v);
        items.push(Item::Line {
            x1: xv,
            y1: 50.0,
            x2: xv,
            y2: 53.0,
            width: 0.4,
            color: GREY,
        });
        let t = g(v);
        let tw = m.width(&t, 6.5, false);
        items.push(label((xv - tw / 2.0).clamp(0.0, w - tw), 61.0, t, GREY));
    }
    for v in &r.spikes {
        items.push(Item::Rect {
            x: x(*v) - 2.0,
            y: 18.0,
            w: 4.0,
            h: 4.0,
            color: (0.1, 0.1, 0.1),
        });
    }
    for v in &r.blanks {
        items.push(Item::Rect {
            x: x(*v) - 1.5,
            y: 36.0,
            w: 3.0,
            h: 3.0,
            color: GREY,
        });
    }
    items.push(label(0.0, 14.0, "spikes".into(), GREY));
    items.push(label(0.0, 33.0, "blanks".into(), GREY));
    for (v, name, color) in [
        (r.mean_spike, "mean", BLUE),
        (r.mdl, "MDL", RED),
        (r.loq, "LOQ", AMBER),
    ] {
        if v.is_finite() && r.ok() || name == "mean" {
            let xv = x(v);
            items.push(Item::Line {
                x1: xv,
                y1: 8.0,
                x2: xv,
                y2: 50.0,
                width: 0.9,
                color,
            });
            items.push(label(xv + 2.0, 8.0, format!("{name} {}", g(v)), color));
        }
    }
    items
}

pub fn record(
    results: &[MdlResult],
    groups: &[Group],
    source: &str,
    lab_name: &str,
    created: i64,
    tool_version: &str,
) -> Result<Vec<u8>, RenderError> {
    let fonts = crate::pdf::Fonts::get()?;
    let margins = Margins {
        top: 50.0,
        right: 40.0,
        bottom: 50.0,
        left: 40.0,
    };
    let mut flow = Flow::new(fonts, 595.28, 841.89, margins);
    let body = Style::new(8.0);
    let cw = flow.content_width();
    for (n, (r, grp)) in results.iter().zip(groups).enumerate() {
        if n > 0 {
            flow.new_page();
        }
        flow.paragraph("Detection-limit study record", Style::new(15.0).bold(), 0.0);
        flow.paragraph(&format!("{lab_name} · {source}"), body.color(GREY), 0.0);
        flow.space(6.0);
        flow.paragraph(
            &format!("{} / {} / {} ({})", r.analyte, r.matrix, r.method, r.unit),
            Style::new(11.0).bold(),
            0.0,
        );
        flow.space(3.0);
        let pairs = summary(r);
        flow.table(&Table {
            columns: vec![
                Column {
                    title: String::new(),
                    width: 70.0,
                    align: Align::Left,
                },
                Column {
                    title: String::new(),
                    width: cw - 70.0,
                    align: Align::Left,
                },
            ],
            show_header: false,
            header: body,
            body,
            rows: pairs
                .into_iter()
                .map(|(k, v)| Row {
                    cells: vec![Cell::Bold(k.into()), Cell::Text(v)],
                    rule_above: false,
                })
                .collect(),
        });
        for e in &r.errors {
            flow.paragraph(&format!("Error: {e}"), body.bold().color(RED), 0.0);
        }
        for (id, why) in &r.excluded {
            flow.paragraph(&format!("Excluded {id}: {why}"), body, 0.0);
        }
        for w in &r.warnings {
            flow.paragraph(&format!("Warning: {w}"), body.color(AMBER), 0.0);
        }
        flow.space(8.0);
        let plot = dot_plot(r, cw - 10.0, fonts);
        flow.block(72.0, |items, x, y| {
            items.extend(plot.iter().map(|i| i.moved(x + 5.0, y)));
        });
        flow.space(8.0);
        flow.table(&data_table(r, grp, cw));
    }
    let mut pages = flow.finish();
    footers(&mut pages, source, tool_version);
    let meta = crate::pdf::Meta {
        title: format!("Detection-limit study record: {source}"),
        author: lab_name.to_string(),
        subject: "MDL, IDL and LOQ study (40 CFR Part 136 Appendix B)".into(),
        creator: format!("limen {tool_version}"),
        created,
    };
    Ok(crate::pdf::write(&pages, &meta)?.0)
}

/// The study's figures, one labelled line each.
fn summary(r: &MdlResult) -> Vec<(&'static str, String)> {
    vec![
        (
            "Procedure",
            "40 CFR Part 136 Appendix B, Revision 2".to_string(),
        ),
        (
            "Spikes",
            format!(
                "n = {}, level(s) {}; mean {}, SD {}, t(n−1, 0.99) = {}",
                r.n_spike,
                r.spike_levels
                    .iter()
                    .map(|l| g(*l))
                    .collect::<Vec<_>>()
                    .join(", "),
                g(r.mean_spike),
                g(r.sd_spike),
                if r.t_value.is_finite() {
                    format!("{:.3}", r.t_value)
                } else {
                    "–".into()
                }
            ),
        ),
        ("MDL_S", format!("{} {}", g(r.mdl_s), r.unit)),
        (
            "Blanks",
            format!("n = {}, numeric {}", r.n_blank, r.n_blank_numeric),
        ),
        (
            "MDL_b",
            format!(
                "{} ({})",
                r.mdl_b.map(g).unwrap_or_else(|| "–".into()),
                r.mdl_b_rule
            ),
        ),
        (
            "MDL",
            if r.ok() {
                format!("{} {} ({} governs)", g(r.mdl), r.unit, r.governs.name())
            } else {
                "no result".into()
            },
        ),
        (
            "LOQ",
            if r.ok() {
                format!("{} {} ({})", g(r.loq), r.unit, r.loq_rule.describe())
            } else {
                "no result".into()
            },
        ),
        (
            "IDL",
            match r.idl {
                Some(v) => format!(
                    "{} {} ({} × SD of {} reagent blanks)",
                    g(v),
                    r.unit,
                    r.idl_factor,
                    r.n_reagent
                ),
                None => "–".into(),
            },
        ),
    ]
}

/// Every replicate of the group, with exclusions marked.
fn data_table(r: &MdlResult, grp: &Group, cw: f32) -> Table {
    let kind = |k: StudyKind| match k {
        StudyKind::Spike => "spike",
        StudyKind::Blank => "blank",
        StudyKind::ReagentBlank => "reagent blank",
    };
    Table {
        columns: vec![
            Column {
                title: "Lab ID".into(),
                width: 70.0,
                align: Align::Left,
            },
            Column {
                title: "Kind".into(),
                width: 70.0,
                align: Align::Left,
            },
            Column {
                title: format!("Value ({})", r.unit),
                width: 70.0,
                align: Align::Decimal,
            },
            Column {
                title: "Spike level".into(),
                width: 60.0,
                align: Align::Decimal,
            },
            Column {
                title: "Prepared".into(),
                width: 70.0,
                align: Align::Left,
            },
            Column {
                title: "Analysed".into(),
                width: 70.0,
                align: Align::Left,
            },
            Column {
                title: "Batch".into(),
                width: cw - 410.0,
                align: Align::Left,
            },
        ],
        show_header: true,
        header: Style::new(7.0).bold(),
        body: Style::new(7.0),
        rows: grp
            .rows
            .iter()
            .map(|s| {
                let excluded = r.excluded.iter().any(|(id, _)| *id == s.lab_id);
                Row {
                    cells: vec![
                        Cell::Text(format!(
                            "{}{}",
                            s.lab_id,
                            if excluded { " (excluded)" } else { "" }
                        )),
                        Cell::Text(kind(s.kind).into()),
                        Cell::Text(
                            s.value
                                .map(|v| v.to_string())
                                .unwrap_or_else(|| "ND".into()),
                        ),
                        Cell::Text(s.spike_level.map(|v| v.to_string()).unwrap_or_default()),
                        Cell::Text(s.prepared_on.map(|d| d.to_string()).unwrap_or_default()),
                        Cell::Text(s.analyzed_on.to_string()),
                        Cell::Text(s.batch.clone()),
                    ],
                    rule_above: false,
                }
            })
            .collect(),
    }
}

/// Source, page i of n and the tool version at the foot of every page.
fn footers(pages: &mut [Page], source: &str, tool_version: &str) {
    let total = pages.len();
    for (i, p) in pages.iter_mut().enumerate() {
        p.items.push(Item::Line {
            x1: 40.0,
            y1: p.height - 40.0,
            x2: p.width - 40.0,
            y2: p.height - 40.0,
            width: 0.3,
            color: LIGHT,
        });
        p.items.push(Item::Text {
            x: 40.0,
            y: p.height - 30.0,
            text: format!(
                "Study record · {source} · page {} of {total} · limen {tool_version}",
                i + 1
            ),
            size: 7.0,
            bold: false,
            color: GREY,
        });
    }
}
