//! Template rendering (tera) and the atomic writing of the report folder.
//!
//! The built-in templates live in `templates/` and are compiled into the binary; a study
//! may point `report.templates` at a folder whose files of the same names replace them.
//! HTML templates are auto-escaped (every user-supplied string is plain text); the
//! Markdown templates escape through the `md` filter, which neutralises table pipes and
//! angle brackets.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use tera::{Context, Tera, Value};

use super::context::ReportContext;

/// Template files, in load order (the macros first: the others import them).
pub const TEMPLATES: [(&str, &str); 5] = [
    ("macros.html", include_str!("../../templates/macros.html")),
    ("report.html", include_str!("../../templates/report.html")),
    ("brief.html", include_str!("../../templates/brief.html")),
    ("report.md", include_str!("../../templates/report.md")),
    ("brief.md", include_str!("../../templates/brief.md")),
];

/// A template that could not be parsed or rendered.
#[derive(Debug, thiserror::Error)]
#[error("template {file}{}: {message}", line.map(|(l, c)| format!(", line {l}, column {c}")).unwrap_or_default())]
pub struct TemplateError {
    /// The template file (the user's, or the built-in name).
    pub file: String,
    /// Line and column of a syntax error, when the parser gives them.
    pub line: Option<(usize, usize)>,
    /// What went wrong, with the line and column when the parser gives them.
    pub message: String,
}

/// The "--> line:column" position in a parser message.
fn position(message: &str) -> Option<(usize, usize)> {
    let i = message.find("--> ")? + 4;
    let rest = &message[i..];
    let end = rest
        .find(|c: char| !(c.is_ascii_digit() || c == ':'))
        .unwrap_or(rest.len());
    let (l, c) = rest[..end].split_once(':')?;
    Some((l.parse().ok()?, c.parse().ok()?))
}

fn chain(e: &dyn std::error::Error) -> String {
    let mut s = e.to_string();
    let mut src = e.source();
    while let Some(x) = src {
        s.push_str(": ");
        s.push_str(&x.to_string());
        src = x.source();
    }
    s
}

/// Escapes text for Markdown: table pipes, angle brackets and ampersands.
fn md_filter(v: &Value, _: &HashMap<String, Value>) -> tera::Result<Value> {
    let s = match v {
        Value::String(s) => s.clone(),
        other => other.to_string(),
    };
    Ok(Value::String(
        s.replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;")
            .replace('|', "\\|")
            .replace('\n', " "),
    ))
}

/// Loads the templates: built-in ones, each replaced by the file of the same name in
/// `user_dir` when there is one.
///
/// # Errors
/// [`TemplateError`] naming the template file and the line of a syntax error.
pub fn load(user_dir: Option<&Path>) -> Result<Tera, TemplateError> {
    let mut tera = Tera::default();
    tera.autoescape_on(vec![".html"]);
    tera.register_filter("md", md_filter);
    let mut sources: Vec<(String, String, String)> = Vec::new();
    for (name, builtin) in TEMPLATES {
        let user: Option<PathBuf> = user_dir.map(|d| d.join(name)).filter(|p| p.is_file());
        let (file, text) = match user {
            Some(p) => {
                let t = std::fs::read_to_string(&p).map_err(|e| TemplateError {
                    file: p.display().to_string(),
                    line: None,
                    message: e.to_string(),
                })?;
                (p.display().to_string(), t)
            }
            None => (format!("built-in {name}"), builtin.to_string()),
        };
        sources.push((name.to_string(), file, text));
    }
    for (name, file, text) in &sources {
        tera.add_raw_template(name, text).map_err(|e| {
            let message = chain(&e);
            TemplateError {
                file: file.clone(),
                line: position(&message),
                message,
            }
        })?;
    }
    Ok(tera)
}

/// Renders one template with the context.
///
/// # Errors
/// [`TemplateError`] when rendering fails (e.g. a user template reads a missing field).
pub fn render(tera: &Tera, name: &str, ctx: &ReportContext) -> Result<String, TemplateError> {
    let c = Context::from_serialize(ctx).map_err(|e| TemplateError {
        file: name.to_string(),
        line: None,
        message: chain(&e),
    })?;
    tera.render(name, &c).map_err(|e| TemplateError {
        file: name.to_string(),
        line: None,
        message: chain(&e),
    })
}
