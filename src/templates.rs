//! The certificate's wording: Handlebars templates, embedded defaults from
//! report-templates/, each overridable from a workspace's templates/ folder.
//! Strict: a variable the context lacks is an error.

use handlebars::Handlebars;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::Path;

pub const DEFAULTS: &[(&str, &str)] = &[
    ("title", include_str!("../report-templates/title.hbs")),
    ("labels", include_str!("../report-templates/labels.hbs")),
    ("revision", include_str!("../report-templates/revision.hbs")),
    (
        "statement",
        include_str!("../report-templates/statement.hbs"),
    ),
    ("footnote", include_str!("../report-templates/footnote.hbs")),
    (
        "decision-rule",
        include_str!("../report-templates/decision-rule.hbs"),
    ),
    (
        "qc-legend",
        include_str!("../report-templates/qc-legend.hbs"),
    ),
    ("cautions", include_str!("../report-templates/cautions.hbs")),
    (
        "signature",
        include_str!("../report-templates/signature.hbs"),
    ),
];

#[derive(Debug, thiserror::Error)]
pub enum TemplateError {
    #[error("{file}: {message}")]
    Template { file: String, message: String },
}

impl TemplateError {
    pub fn hint(&self) -> String {
        "fix the template, or remove it from the workspace's templates/ folder to use the default; variables are listed in report-templates/README.md".into()
    }
}

pub struct Templates {
    reg: Handlebars<'static>,
    /// Where each template came from, for error messages.
    source: BTreeMap<String, String>,
}

impl Templates {
    /// The defaults, overridden by `<workspace>/templates/<name>.hbs` files.
    pub fn load(workspace: Option<&Path>) -> Result<Templates, TemplateError> {
        let mut reg = Handlebars::new();
        reg.set_strict_mode(true);
        reg.register_escape_fn(handlebars::no_escape);
        let mut source = BTreeMap::new();
        for (name, text) in DEFAULTS {
            reg.register_template_string(name, *text)
                .map_err(|e| TemplateError::Template {
                    file: format!("report-templates/{name}.hbs"),
                    message: e.to_string(),
                })?;
            source.insert(
                name.to_string(),
                format!("report-templates/{name}.hbs (built in)"),
            );
        }
        let dir = workspace.map(|w| w.join("templates"));
        if let Some(dir) = dir.filter(|d| d.is_dir()) {
            let entries = std::fs::read_dir(&dir).map_err(|e| TemplateError::Template {
                file: dir.display().to_string(),
                message: e.to_string(),
            })?;
            let mut paths: Vec<_> = entries.filter_map(|e| e.ok().map(|e| e.path())).collect();
            paths.sort();
            for path in paths
                .into_iter()
                .filter(|p| p.extension().is_some_and(|x| x == "hbs"))
            {
                let file = path.display().to_string();
                let name = path
                    .file_stem()
                    .map(|s| s.to_string_lossy().into_owned())
                    .unwrap_or_default();
                if !DEFAULTS.iter().any(|(n, _)| *n == name) {
                    return Err(TemplateError::Template {
                        file,
                        message: format!(
                            "no certificate template is called `{name}`; templates: {}",
                            DEFAULTS
                                .iter()
                                .map(|(n, _)| *n)
                                .collect::<Vec<_>>()
                                .join(", ")
                        ),
                    });
                }
                let text = std::fs::read_to_string(&path).map_err(|e| TemplateError::Template {
                    file: file.clone(),
                    message: e.to_string(),
                })?;
                reg.register_template_string(&name, text)
                    .map_err(|e| TemplateError::Template {
                        file: file.clone(),
                        message: e.to_string(),
                    })?;
                source.insert(name, file);
            }
        }
        Ok(Templates { reg, source })
    }

    pub fn render<T: Serialize>(&self, name: &str, ctx: &T) -> Result<String, TemplateError> {
        self.reg
            .render(name, ctx)
            .map_err(|e| TemplateError::Template {
                file: self
                    .source
                    .get(name)
                    .cloned()
                    .unwrap_or_else(|| name.to_string()),
                message: e.to_string(),
            })
    }

    /// `labels`: one `key: text` pair per line.
    pub fn labels<T: Serialize>(&self, ctx: &T) -> Result<BTreeMap<String, String>, TemplateError> {
        Ok(self
            .render("labels", ctx)?
            .lines()
            .filter_map(|l| l.split_once(':'))
            .map(|(k, v)| (k.trim().to_string(), v.trim().to_string()))
            .collect())
    }
}

/// A rendered template as blocks: headings, paragraphs and bullets.
#[derive(Debug, Clone, PartialEq)]
pub enum Block {
    Heading(String),
    Paragraph(String),
    Bullet(String),
}

pub fn blocks(text: &str) -> Vec<Block> {
    let mut out = Vec::new();
    let mut para = String::new();
    let flush = |para: &mut String, out: &mut Vec<Block>| {
        if !para.trim().is_empty() {
            out.push(Block::Paragraph(para.trim().to_string()));
        }
        para.clear();
    };
    for line in text.lines() {
        let t = line.trim();
        if t.is_empty() {
            flush(&mut para, &mut out);
        } else if let Some(h) = t.strip_prefix("# ") {
            flush(&mut para, &mut out);
            out.push(Block::Heading(h.trim().to_string()));
        } else if let Some(b) = t.strip_prefix("- ") {
            flush(&mut para, &mut out);
            out.push(Block::Bullet(b.trim().to_string()));
        } else {
            if !para.is_empty() {
                para.push(' ');
            }
            para.push_str(t);
        }
    }
    flush(&mut para, &mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mini_markup() {
        let b = blocks("# Head\n\nOne\ntwo.\n\n- a\n- b\nthree");
        assert_eq!(
            b,
            vec![
                Block::Heading("Head".into()),
                Block::Paragraph("One two.".into()),
                Block::Bullet("a".into()),
                Block::Bullet("b".into()),
                Block::Paragraph("three".into()),
            ]
        );
    }

    #[test]
    fn strict_mode_refuses_a_missing_variable() {
        let t = Templates::load(None).unwrap();
        #[derive(Serialize)]
        struct Partial {
            lab_name: String,
        }
        let e = t
            .render(
                "signature",
                &Partial {
                    lab_name: "L".into(),
                },
            )
            .unwrap_err();
        assert!(e.to_string().contains("signature.hbs"), "{e}");
        assert!(
            t.render(
                "statement",
                &Partial {
                    lab_name: "L".into()
                }
            )
            .unwrap()
            .contains("approval of L")
        );
    }

    #[test]
    fn workspace_templates_override_and_unknown_names_are_refused() {
        let dir = std::env::temp_dir().join(format!("limen-tpl-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(dir.join("templates")).unwrap();
        std::fs::write(dir.join("templates/title.hbs"), "Test Report").unwrap();
        let t = Templates::load(Some(&dir)).unwrap();
        assert_eq!(t.render("title", &()).unwrap(), "Test Report");
        std::fs::write(dir.join("templates/titel.hbs"), "x").unwrap();
        assert!(Templates::load(Some(&dir)).is_err());
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
