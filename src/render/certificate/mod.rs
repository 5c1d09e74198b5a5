//! The certificate of analysis: the report model laid out as pages (with
//! the wording from the templates) and exported to PDF. `wording` draws the
//! template context from the model, `page` lays out each section and the
//! running header and footer, `strip` draws the result graphic; layout is
//! pure, and `pdf::write` returns the bytes.

mod page;
mod strip;
mod wording;

pub use strip::strip;
pub use wording::{Context, context};

use super::{Output, Render, RenderError};
use crate::layout::{Flow, Measure, Page, Style};
use crate::report::Report;
use crate::templates::Templates;
use page::{BODY, MARGINS};
use wording::paragraph_blocks;

pub struct Certificate<'t> {
    pub templates: &'t Templates,
}

impl Certificate<'_> {
    /// The certificate's pages: pure layout, no I/O.
    pub fn layout(&self, report: &Report, m: &dyn Measure) -> Result<Vec<Page>, RenderError> {
        let ctx = context(report);
        let t = self.templates;
        let labels = t.labels(&ctx)?;
        let label = |k: &str| labels.get(k).cloned().unwrap_or_else(|| k.to_string());
        let (pw, ph) = page::page_size(report.header.page_size);
        let body = Style::new(BODY);
        let mut flow = Flow::new(m, pw, ph, MARGINS);

        flow.paragraph(
            t.render("title", &ctx)?.trim(),
            Style::new(16.0).bold(),
            0.0,
        );
        flow.space(4.0);
        page::banner(&mut flow, &t.render("revision", &ctx)?);
        page::details(&mut flow, report, &ctx, &label);
        page::methods(&mut flow, report, &label);
        page::results(&mut flow, report, &label);
        page::limits_applied(&mut flow, report, &label);
        flow.space(4.0);
        paragraph_blocks(&mut flow, &t.render("statement", &ctx)?, body.bold());
        flow.space(4.0);
        page::qc_summary(&mut flow, report, &label);
        for name in ["qc-legend", "footnote", "decision-rule", "cautions"] {
            paragraph_blocks(&mut flow, &t.render(name, &ctx)?, body);
        }
        page::signature(&mut flow, &t.render("signature", &ctx)?, &label);

        let mut pages = flow.finish();
        let n = pages.len();
        for (i, p) in pages.iter_mut().enumerate() {
            page::decorate(p, i + 1, n, report, &label, m);
        }
        Ok(pages)
    }
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
