//! Writing a comparison for people: a headline of what changed and by how
//! much (verdict, kept components, eigenvalues, the largest principal angle,
//! the largest score change, flagged rows that entered or left), then the
//! details. As text the details are aligned columns; as Markdown each is a
//! collapsible `<details>` block, so a pull-request comment stays short.
//!
//! Computed numbers are rounded for reading (`text::readable`); settings are
//! shown as the recipe has them (see `settings`).

use super::{Comparison, SettingChange, Side};
use crate::text::{count, percent as pct, readable};
use std::fmt::Write;

/// Output styles of `diff`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DiffFormat {
    /// Aligned columns for a terminal.
    Text,
    /// A headline, then details in collapsible blocks, for a pull-request comment.
    Markdown,
}

/// Names listed in a headline before the rest are counted.
const NAMED_ROWS: usize = 5;

/// Principal angles below this many degrees are shown as 0: the QR and SVD of
/// unit vectors leave about 1e-14° between identical subspaces.
const ANGLE_ROUND_OFF: f64 = 1e-9;

/// Renders a comparison.
pub fn render_comparison(a: &Side, b: &Side, c: &Comparison, format: DiffFormat) -> String {
    let md = format == DiffFormat::Markdown;
    let mut out = String::new();
    if md {
        let _ = writeln!(
            out,
            "### sextant diff\n\n**A** `{}` → **B** `{}`\n",
            a.label, b.label
        );
    } else {
        let _ = writeln!(out, "A: {}\nB: {}", a.label, b.label);
    }
    for (side, name) in [(a, "A"), (b, "B")] {
        for note in &side.notes {
            if md {
                let _ = writeln!(out, "> **note ({name})**: {note}\n");
            } else {
                let _ = writeln!(out, "note ({name}): {note}");
            }
        }
    }
    let lines = headline(c);
    if md {
        for (key, value) in &lines {
            let _ = writeln!(out, "- **{key}**: {value}");
        }
    } else {
        let width = lines.iter().map(|l| l.0.chars().count()).max().unwrap_or(0);
        for (key, value) in &lines {
            let _ = writeln!(out, "{key:<width$}  {value}");
        }
    }
    for (title, body) in sections(c, md) {
        if md {
            let _ = writeln!(
                out,
                "\n<details><summary>{title}</summary>\n\n{body}\n</details>"
            );
        } else {
            let _ = write!(out, "\n{title}\n{body}");
        }
    }
    out
}

/// The headline: (what, how much), the same keys in both formats.
fn headline(c: &Comparison) -> Vec<(String, String)> {
    let mut lines = vec![("verdict".to_string(), verdict(c))];
    lines.push((
        "kept components".into(),
        if c.kept.0 == c.kept.1 && c.rules.0 == c.rules.1 {
            format!("{} ({}), unchanged", c.kept.0, c.rules.0)
        } else {
            format!(
                "{} ({}) → {} ({})",
                c.kept.0, c.rules.0, c.kept.1, c.rules.1
            )
        },
    ));
    let shown = c.kept.0.max(c.kept.1).min(c.variance.len());
    let eigen: Vec<String> = c.variance[..shown]
        .iter()
        .map(|(i, x, y)| match (x, y) {
            (Some((ea, _)), Some((eb, _))) if ea == eb => format!("PC{i} {} (same)", readable(*ea)),
            (Some((ea, _)), Some((eb, _))) => {
                let relative = if *ea != 0.0 {
                    format!(" ({}{} %)", sign(eb - ea), readable(100.0 * (eb - ea) / ea))
                } else {
                    String::new()
                };
                format!("PC{i} {} → {}{relative}", readable(*ea), readable(*eb))
            }
            (x, y) => format!("PC{i} {} → {}", eigenvalue(*x), eigenvalue(*y)),
        })
        .collect();
    lines.push(("eigenvalues".into(), eigen.join(", ")));
    lines.push((
        "largest principal angle".into(),
        match c.angles.first() {
            Some(angle) => format!(
                "{}° between the kept loadings, on {}",
                degrees(*angle),
                count(c.common_features, "shared feature", "shared features")
            ),
            None => "none: no feature is on both sides".into(),
        },
    ));
    lines.push((
        "largest score change".into(),
        match &c.largest_score_change {
            Some((key, comp, d)) => format!(
                "{} on PC{comp} of row `{key}`, after sign alignment ({} on both sides)",
                readable(*d),
                count(c.common_rows, "row", "rows")
            ),
            None => "none: no row and component on both sides".into(),
        },
    ));
    lines.push((
        "flagged rows".into(),
        if c.flagged_entered.is_empty() && c.flagged_left.is_empty() {
            "the same rows above a limit on both sides".into()
        } else {
            format!(
                "{} entered{}, {} left{}",
                c.flagged_entered.len(),
                named(&c.flagged_entered),
                c.flagged_left.len(),
                named(&c.flagged_left)
            )
        },
    ));
    lines
}

fn verdict(c: &Comparison) -> String {
    let settings = c.settings.iter().filter(|s| !s.output_only).count();
    let mut what = Vec::new();
    if settings > 0 {
        what.push(count(settings, "setting", "settings"));
    }
    if !c.inputs.is_empty() {
        what.push(count(c.inputs.len(), "input", "inputs"));
    }
    match (c.differ, what.is_empty()) {
        (false, _) if c.settings.is_empty() => "the same analysis".into(),
        (false, _) => "the same analysis (only where results are written differs)".into(),
        (true, true) => "the analyses differ in their results".into(),
        (true, false) => format!("the analyses differ: {} changed", what.join(" and ")),
    }
}

fn sign(d: f64) -> &'static str {
    if d > 0.0 { "+" } else { "" }
}

fn eigenvalue(v: Option<(f64, f64)>) -> String {
    v.map_or("—".into(), |(e, _)| readable(e))
}

fn degrees(angle: f64) -> String {
    if angle.abs() < ANGLE_ROUND_OFF {
        "0".into()
    } else {
        readable(angle)
    }
}

/// " (`a`, `b` and 3 more)" for a headline; empty for no rows.
fn named(rows: &[String]) -> String {
    if rows.is_empty() {
        return String::new();
    }
    let mut text: Vec<String> = rows
        .iter()
        .take(NAMED_ROWS)
        .map(|r| format!("`{r}`"))
        .collect();
    if rows.len() > NAMED_ROWS {
        text.push(format!("{} more", rows.len() - NAMED_ROWS));
    }
    let last = text.pop().unwrap_or_default();
    if text.is_empty() {
        format!(" ({last})")
    } else {
        format!(" ({} and {last})", text.join(", "))
    }
}

/// The detail sections: (title, body).
fn sections(c: &Comparison, md: bool) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let body = if c.settings.is_empty() {
        "none\n".to_string()
    } else {
        settings_body(&c.settings, md)
    };
    out.push((
        format!(
            "Recipe settings in effect that differ ({})",
            c.settings.len()
        ),
        body,
    ));
    let body = if c.inputs.is_empty() {
        "none: every input has the same SHA-256\n".to_string()
    } else {
        let rows: Vec<Vec<String>> = c
            .inputs
            .iter()
            .map(|(k, x, y)| vec![k.clone(), x.clone(), y.clone()])
            .collect();
        table(md, &["input", "A", "B"], &rows)
    };
    out.push(("Inputs whose content changed".into(), body));
    out.push(("Components".into(), components_body(c, md)));
    out.push(("Kept-loading subspaces".into(), subspaces_body(c)));
    if c.moved.iter().any(|m| m.1 > 0.0) {
        let rows: Vec<Vec<String>> = c
            .moved
            .iter()
            .map(|(f, d)| vec![f.clone(), readable(*d)])
            .collect();
        out.push((
            "Features whose loadings moved most (over the shared kept components)".into(),
            table(md, &["feature", "distance"], &rows),
        ));
    }
    if !c.flagged_entered.is_empty() || !c.flagged_left.is_empty() {
        let mut rows: Vec<Vec<String>> = c
            .flagged_entered
            .iter()
            .map(|r| vec![r.clone(), "no".into(), "yes".into()])
            .collect();
        rows.extend(
            c.flagged_left
                .iter()
                .map(|r| vec![r.clone(), "yes".into(), "no".into()]),
        );
        out.push((
            "Rows above a limit on one side only".into(),
            table(md, &["row", "flagged in A", "flagged in B"], &rows),
        ));
    }
    out
}

/// One line per setting: `plot[2].ellipse  0.95 → 0.99`.
fn settings_body(settings: &[SettingChange], md: bool) -> String {
    let rows: Vec<Vec<String>> = settings
        .iter()
        .map(|s| {
            let (before, after) = match (&s.before, &s.after) {
                (Some(x), Some(y)) => (x.clone(), y.clone()),
                (None, Some(y)) => ("—".into(), format!("added: {y}")),
                (Some(x), None) => (x.clone(), "removed".into()),
                (None, None) => ("—".into(), "—".into()),
            };
            let after = if s.output_only {
                format!("{after} (where results are written)")
            } else {
                after
            };
            vec![s.path.clone(), before, after]
        })
        .collect();
    if md {
        let rows: Vec<Vec<String>> = rows
            .into_iter()
            .map(|r| vec![format!("`{}`", r[0]), r[1].clone(), r[2].clone()])
            .collect();
        return table(true, &["setting", "A", "B"], &rows);
    }
    let width = rows.iter().map(|r| r[0].chars().count()).max().unwrap_or(0);
    rows.iter()
        .map(|r| format!("  {:<width$}  {} → {}\n", r[0], r[1], r[2]))
        .collect()
}

fn components_body(c: &Comparison, md: bool) -> String {
    let cell = |v: Option<(f64, f64)>, share: bool| match v {
        Some((e, s)) => {
            if share {
                pct(s)
            } else {
                readable(e)
            }
        }
        None => "—".to_string(),
    };
    let rows: Vec<Vec<String>> = c
        .variance
        .iter()
        .map(|(i, x, y)| {
            vec![
                format!("PC{i}"),
                cell(*x, false),
                cell(*y, false),
                cell(*x, true),
                cell(*y, true),
            ]
        })
        .collect();
    table(
        md,
        &[
            "component",
            "eigenvalue A",
            "eigenvalue B",
            "share A",
            "share B",
        ],
        &rows,
    )
}

fn subspaces_body(c: &Comparison) -> String {
    let angles: Vec<String> = c
        .angles
        .iter()
        .map(|a| format!("{}°", degrees(*a)))
        .collect();
    format!(
        "principal angles on {}: {}\n",
        count(c.common_features, "shared feature", "shared features"),
        if angles.is_empty() {
            "none".into()
        } else {
            angles.join(", ")
        }
    )
}

fn table(md: bool, header: &[&str], rows: &[Vec<String>]) -> String {
    let mut out = String::new();
    if md {
        let cell = |c: &str| c.replace('|', "\\|");
        let _ = writeln!(out, "| {} |", header.join(" | "));
        let _ = writeln!(out, "|{}", "---|".repeat(header.len()));
        for r in rows {
            let cells: Vec<String> = r.iter().map(|c| cell(c)).collect();
            let _ = writeln!(out, "| {} |", cells.join(" | "));
        }
        return out;
    }
    let mut widths: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (w, c) in widths.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: Vec<&str>| {
        cells
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c:<w$}"))
            .collect::<Vec<_>>()
            .join("  ")
            .trim_end()
            .to_string()
    };
    let _ = writeln!(out, "  {}", line(header.to_vec()));
    for r in rows {
        let _ = writeln!(out, "  {}", line(r.iter().map(String::as_str).collect()));
    }
    out
}
