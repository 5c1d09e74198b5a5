//! The certificate's page layout: each section of the certificate laid into
//! the flow, and the header and footer stamped on every page. Points, from
//! the top-left; the wording comes in as labels and rendered templates.

use super::strip::{RED, strip};
use super::wording::{Context, paragraph_blocks, qualifier_codes};
use crate::layout::{
    Align, BLACK, CELL_PAD, Cell, Column, Flow, GREY, Item, Margins, Measure, Page, Row, Style,
    Table,
};
use crate::numeric::plain;
use crate::qc;
use crate::read::PageSize;
use crate::report::Report;

pub const MARGINS: Margins = Margins {
    top: 76.0,
    right: 40.0,
    bottom: 52.0,
    left: 40.0,
};

/// Body and small text sizes.
pub const BODY: f32 = 8.0;
pub const SMALL: f32 = 7.0;

pub fn page_size(size: PageSize) -> (f32, f32) {
    match size {
        PageSize::A4 => (595.28, 841.89),
        PageSize::Letter => (612.0, 792.0),
    }
}

/// Looks a label up in the rendered labels template.
pub type Label<'a> = dyn Fn(&str) -> String + 'a;

fn col(title: String, width: f32, align: Align) -> Column {
    Column {
        title,
        width,
        align,
    }
}

fn scaled(widths: &[f32], total: f32) -> Vec<f32> {
    let sum: f32 = widths.iter().sum();
    widths.iter().map(|w| w * total / sum).collect()
}

/// A table with a header row, in small type, its columns scaled to `total`.
fn small_table(columns: &[(String, f32, Align)], total: f32, rows: Vec<Row>) -> Table {
    let small = Style::new(SMALL);
    let widths: Vec<f32> = columns.iter().map(|c| c.1).collect();
    let w = scaled(&widths, total);
    Table {
        columns: columns
            .iter()
            .zip(w)
            .map(|((t, _, a), w)| col(t.clone(), w, *a))
            .collect(),
        show_header: true,
        header: small.bold(),
        body: small,
        rows,
    }
}

fn plain_row(cells: Vec<Cell>) -> Row {
    Row {
        cells,
        rule_above: false,
    }
}

/// Client details on the left, report details on the right.
pub fn details(flow: &mut Flow<'_>, report: &Report, ctx: &Context, label: &Label<'_>) {
    let h = &report.header;
    let body = Style::new(BODY);
    let cw = flow.content_width();
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
            col(String::new(), 62.0, Align::Left),
            col(String::new(), cw / 2.0 - 70.0, Align::Left),
        ],
        show_header: false,
        header: body,
        body,
        rows: pairs
            .into_iter()
            .map(|(k, v)| plain_row(vec![Cell::Bold(k), Cell::Text(v)]))
            .collect(),
    };
    // Two small tables drawn in two columns: lay the right one out in a
    // scratch flow and move its items across.
    let top = flow.y;
    let mut scratch = Flow::new(flow.measure(), flow.width, flow.height, MARGINS);
    scratch.y = top;
    scratch.table(&info_table(right));
    let right_items: Vec<Item> = scratch.finish().remove(0).items;
    flow.table(&info_table(left));
    let left_bottom = flow.y;
    let right_bottom = right_items
        .iter()
        .filter_map(|i| match i {
            Item::Text { y, .. } => Some(*y),
            _ => None,
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
}

pub fn methods(flow: &mut Flow<'_>, report: &Report, label: &Label<'_>) {
    let body = Style::new(BODY);
    flow.paragraph(&label("methods"), body.bold(), 0.0);
    for (id, desc) in &report.header.methods {
        let text = if desc.is_empty() {
            id.clone()
        } else {
            format!("{id}: {desc}")
        };
        flow.paragraph(&text, body, 8.0);
    }
    flow.space(6.0);
}

/// The results, grouped by sample, each with its strip.
pub fn results(flow: &mut Flow<'_>, report: &Report, label: &Label<'_>) {
    flow.ensure(60.0);
    flow.paragraph(&label("results"), Style::new(10.0).bold(), 0.0);
    flow.space(2.0);
    let l = |k: &str| label(k);
    let (left, dec) = (Align::Left, Align::Decimal);
    let columns = [
        (l("lab_id"), 30.0, left),
        (l("item"), 90.0, left),
        (l("analyte"), 34.0, left),
        (l("result"), 40.0, dec),
        (String::new(), 10.0, left),
        (l("unit"), 28.0, left),
        (l("mdl"), 32.0, dec),
        (l("loq"), 32.0, dec),
        (l("dilution"), 20.0, Align::Right),
        (l("limit"), 68.0, left),
        (l("verdict"), 54.0, left),
        (l("strip"), 77.0, left),
    ];
    let cw = flow.content_width();
    let widths: Vec<f32> = columns.iter().map(|c| c.1).collect();
    let strip_w = scaled(&widths, cw)[11] - 2.0 * CELL_PAD;
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
        let state = label(&format!("state_{}", r.state.name()));
        let verdict = match r.verdict {
            Some(v) => format!("{}\n{state}", label(&format!("verdict_{}", v.name()))),
            None => state,
        };
        let id = |s: String| if first { s } else { String::new() };
        rows.push(Row {
            cells: vec![
                if first {
                    Cell::Bold(r.lab_id.clone())
                } else {
                    Cell::Text(String::new())
                },
                Cell::Text(id(item)),
                Cell::Text(r.analyte.to_string()),
                Cell::Text(match r.uncertainty {
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
    flow.table(&small_table(&columns, cw, rows));
    flow.space(3.0);
    flow.paragraph(&label("strip_legend"), Style::new(6.5).color(GREY), 0.0);
}

/// Each regulatory or client limit applied, as published.
pub fn limits_applied(flow: &mut Flow<'_>, report: &Report, label: &Label<'_>) {
    if report.specs_used.is_empty() {
        return;
    }
    flow.space(6.0);
    flow.ensure(40.0);
    flow.paragraph(&label("limits_applied"), Style::new(BODY).bold(), 0.0);
    let columns = [
        (label("spec"), 72.0, Align::Left),
        (label("analyte"), 100.0, Align::Left),
        (label("limit"), 58.0, Align::Left),
        (label("citation"), 220.0, Align::Left),
        (label("in_force"), 65.0, Align::Left),
    ];
    let rows = report
        .specs_used
        .iter()
        .map(|s| {
            plain_row(vec![
                Cell::Text(s.spec.to_string()),
                Cell::Text(if s.matrix.is_empty() {
                    s.analyte.clone()
                } else {
                    format!("{} ({})", s.analyte, s.matrix)
                }),
                Cell::Text(format!("{} {}", s.limit, s.unit)),
                Cell::Text(s.citation.to_string()),
                Cell::Text(s.effective_from.to_string()),
            ])
        })
        .collect();
    let cw = flow.content_width();
    flow.table(&small_table(&columns, cw, rows));
}

pub fn qc_summary(flow: &mut Flow<'_>, report: &Report, label: &Label<'_>) {
    if report.qc_checks.is_empty() {
        return;
    }
    flow.ensure(60.0);
    flow.paragraph(&label("qc_summary"), Style::new(10.0).bold(), 0.0);
    flow.space(2.0);
    let columns = [
        (label("check"), 84.0, Align::Left),
        (label("analyte"), 56.0, Align::Left),
        (label("rows"), 80.0, Align::Left),
        (label("value"), 56.0, Align::Right),
        (label("window"), 100.0, Align::Left),
        (label("outcome"), 139.0, Align::Left),
    ];
    let rows = report
        .qc_checks
        .iter()
        .map(|c| {
            plain_row(vec![
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
            ])
        })
        .collect();
    let cw = flow.content_width();
    flow.table(&small_table(&columns, cw, rows));
    flow.space(6.0);
}

/// The signature block after a rule, then the end mark centred.
pub fn signature(flow: &mut Flow<'_>, signature_text: &str, label: &Label<'_>) {
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
    paragraph_blocks(flow, signature_text, Style::new(BODY));
    flow.space(6.0);
    let end = format!("— {} —", label("end"));
    flow.ensure(14.0);
    let ew = flow.measure().width(&end, 9.0, true);
    let y = flow.y + 9.0;
    let pw = flow.width;
    flow.text_at((pw - ew) / 2.0, y, &end, Style::new(9.0).bold());
}

/// The revision banner, in red, when the report replaces another.
pub fn banner(flow: &mut Flow<'_>, text: &str) {
    if !text.trim().is_empty() {
        paragraph_blocks(flow, text, Style::new(BODY).color(RED));
        flow.space(2.0);
    }
}

/// Header and footer on every page: lab, report id and revision, page i of n.
pub fn decorate(
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
