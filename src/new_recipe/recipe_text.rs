//! The text of the starter recipe: every section with its settings and the
//! comments that give each choice its reason.

use super::inspect::{Inspection, Kind, Role, parse_number};
use super::{
    COMPUTE, Loaded, MAX_FEATURE_MISSING, MAX_GROUP_VALUES, ROWS_PER_GROUP_VALUE, SKEWNESS_LIMIT,
};
use crate::recipe::raw::DEFAULT_MISSING_TOKENS;
use crate::text::{fixed, percent_figure as pct, three_significant as sig3};
use std::fmt::Write as _;
use std::path::Path;

/// Where comments start on a line that also holds a setting.
const COMMENT_COLUMN: usize = 33;
/// Width that comment paragraphs are wrapped to.
const WRAP: usize = 80;

/// A TOML basic string.
pub(super) fn toml_str(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\t' => out.push_str("\\t"),
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            c if c.is_control() => {
                let _ = write!(out, "\\u{:04X}", c as u32);
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A name as shown in comments and messages: control characters become spaces.
pub(super) fn plain(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

/// `1 row`, `2 rows`.
pub(super) fn counted(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

/// A setting with a comment after it, aligned to one column; a comment too long
/// for that goes on the lines above the setting instead.
fn setting(out: &mut String, code: &str, text: &str) {
    let width = COMMENT_COLUMN.saturating_sub(code.chars().count()).max(1);
    let inline = code.chars().count() + width + 2 + plain(text).chars().count();
    if text.is_empty() {
        let _ = writeln!(out, "{code}");
    } else if inline <= WRAP {
        let _ = writeln!(out, "{code}{:width$}# {}", "", plain(text));
    } else {
        let indent = code.len() - code.trim_start().len();
        indented_comment(out, &code[..indent], text);
        let _ = writeln!(out, "{code}");
    }
}

/// A comment paragraph wrapped to [`WRAP`] columns.
fn comment(out: &mut String, text: &str) {
    indented_comment(out, "", text);
}

fn indented_comment(out: &mut String, indent: &str, text: &str) {
    let start = format!("{indent}#");
    let mut line = start.clone();
    for word in plain(text).split(' ').filter(|w| !w.is_empty()) {
        if line.len() > start.len() && line.chars().count() + 1 + word.chars().count() > WRAP {
            let _ = writeln!(out, "{line}");
            line = start.clone();
        }
        line.push(' ');
        line.push_str(word);
    }
    let _ = writeln!(out, "{line}");
}

/// A list setting with one item per line, each with its reason.
fn list(out: &mut String, key: &str, items: &[(&str, &str)]) {
    let _ = writeln!(out, "{key} = [");
    for (name, why) in items {
        setting(out, &format!("    {},", toml_str(name)), why);
    }
    let _ = writeln!(out, "]");
}

pub(super) fn delimiter_text(d: u8) -> String {
    match d {
        b'\t' => "tab".into(),
        other => format!("'{}'", other as char),
    }
}

/// The results folder, relative to the recipe: `results/<stem>`, or a sibling
/// name if that folder would hold the table.
pub(super) fn results_folder(recipe_dir: &Path, data: &Path) -> String {
    let stem: String = data
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
        .chars()
        .map(|c| {
            if c.is_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '-'
            }
        })
        .collect();
    let stem = if stem.trim_matches('.').is_empty() {
        "table".to_string()
    } else {
        stem
    };
    let data_abs = crate::paths::normalize(data);
    let base = crate::paths::normalize(recipe_dir);
    let mut n = 1;
    loop {
        let folder = match n {
            1 => format!("results/{stem}"),
            2 => format!("results/{stem}-pca"),
            _ => format!("results/{stem}-pca-{n}"),
        };
        if !data_abs.starts_with(base.join(&folder)) {
            return folder;
        }
        n += 1;
    }
}

pub(super) fn recipe_text(
    table: &Loaded,
    inspection: &Inspection,
    input_file: &str,
    results: &str,
) -> String {
    let rows = table.n_rows();
    let mut out = String::new();
    comment(
        &mut out,
        &format!(
            "Starter recipe written by `sextant new` from a first look at {} ({}, {}). Each setting is a suggestion with its reason and the other choices; change what does not fit the data or the question. Paths are relative to this file's folder.",
            table.file_name,
            counted(rows, "row"),
            counted(table.names.len(), "column")
        ),
    );
    let _ = writeln!(out, "#");
    comment(
        &mut out,
        "Next: `sextant check` on this file reads the table and tries every step except the decomposition; `sextant run` on it writes the results folder.",
    );
    let _ = writeln!(out, "#");
    comment(
        &mut out,
        "The steps run in this order, whatever the order of the tables below: read the table; transform the features listed in [transform] (observed cells only); drop features missing more than max_feature_missing; fill or drop the remaining missing cells (on the transformed scale); scale; compute the components; flag unusual rows; draw the [[plot]] figures.",
    );
    let _ = writeln!(out, "format = 1");
    setting(
        &mut out,
        &format!(
            "title = {}",
            toml_str(&format!("PCA of {}", table.file_name))
        ),
        "free text, carried into the manifest",
    );
    let _ = writeln!(
        out,
        "# notes = \"what the analysis is for, and what changed since the last run\""
    );

    input_section(&mut out, table, inspection, input_file);
    transform_section(&mut out, inspection, rows);
    missing_section(&mut out, table, inspection);
    scaling_section(&mut out, inspection, rows);
    let compute = components_section(&mut out, inspection, rows);
    plot_section(&mut out, inspection, compute);

    let _ = writeln!(out, "\n[output]");
    comment(
        &mut out,
        "The results folder, relative to this file. `sextant run` writes it whole, and replaces it later only for a run of the same recipe on the same data (or with --replace).",
    );
    let _ = writeln!(out, "folder = {}", toml_str(results));
    out
}

fn input_section(out: &mut String, table: &Loaded, inspection: &Inspection, input_file: &str) {
    let rows = table.n_rows();
    let _ = writeln!(out, "\n[input]");
    let _ = writeln!(out, "file = {}", toml_str(input_file));
    if table.delimiter_written {
        setting(
            out,
            &format!(
                "delimiter = {}",
                toml_str(&(table.delimiter as char).to_string())
            ),
            &format!(
                "the header splits into columns at {}",
                delimiter_text(table.delimiter)
            ),
        );
    }
    if table.decimal != b'.' {
        setting(
            out,
            &format!(
                "decimal = {}",
                toml_str(&(table.decimal as char).to_string())
            ),
            "numbers are written with a decimal comma, as in 3,14",
        );
    }
    match inspection.id() {
        Some(d) => setting(out, &format!("id = {}", toml_str(&d.name)), &d.reason),
        None => comment(
            out,
            "id: no column has a different, non-empty value in every row, so results number the rows instead. To name one: id = \"column\".",
        ),
    }
    let groups: Vec<(&str, &str)> = inspection
        .with_role(Role::Group)
        .map(|d| (d.name.as_str(), d.reason.as_str()))
        .collect();
    comment(
        out,
        &format!(
            "Groups are carried to the scores, to colour or compare rows. Rule of thumb used: a text column with at least 2 and at most max(2, min({MAX_GROUP_VALUES}, rows / {ROWS_PER_GROUP_VALUE})) different values, here {}, so that most values have several rows.",
            inspection.group_limit
        ),
    );
    if groups.is_empty() {
        comment(
            out,
            "No column fits, so there are none: groups = [\"column\", ...] adds them.",
        );
    } else {
        list(out, "groups", &groups);
    }
    let excluded: Vec<(&str, &str)> = inspection
        .with_role(Role::Excluded)
        .map(|d| (d.name.as_str(), d.reason.as_str()))
        .collect();
    if excluded.is_empty() {
        comment(
            out,
            "Nothing is excluded; exclude = [\"column\", ...] leaves columns out (names or patterns with * and ?).",
        );
    } else {
        comment(
            out,
            "Columns left out of the analysis, each with the reason. Entries are names or patterns with * and ?.",
        );
        list(out, "exclude", &excluded);
    }
    let mut missing: Vec<String> = DEFAULT_MISSING_TOKENS
        .iter()
        .map(|s| s.to_string())
        .collect();
    if inspection.extra_missing.is_empty() {
        comment(
            out,
            "Cell texts that mean \"missing\" (compared after trimming spaces). Any other text in a numeric column is an error naming the cell.",
        );
    } else {
        comment(
            out,
            "Cell texts that mean \"missing\" (compared after trimming spaces). Besides the usual ones, the table uses these in numeric columns, so they are read as missing too:",
        );
        for (token, columns) in &inspection.extra_missing {
            let shown: Vec<String> = columns.iter().take(3).map(|c| plain(c)).collect();
            let more = if columns.len() > 3 {
                format!(" and {} more", columns.len() - 3)
            } else {
                String::new()
            };
            let _ = writeln!(out, "#   {} in {}{more}", toml_str(token), shown.join(", "));
            missing.push(token.clone());
        }
        comment(
            out,
            "If one of them means \"below the detection limit\" rather than \"not measured\", filling it with the feature's mean or median overstates those cells; say so when reporting, or replace them in the data.",
        );
    }
    let quoted: Vec<String> = missing.iter().map(|m| toml_str(m)).collect();
    let _ = writeln!(out, "missing = [{}]", quoted.join(", "));
    let features = inspection.features(rows);
    comment(
        out,
        &format!(
            "Features: every numeric column not named above ({} here), in table order. To choose them yourself, list their names or patterns (such as \"*_pct\") in features = [...].",
            features.len()
        ),
    );
}

fn missing_section(out: &mut String, table: &Loaded, inspection: &Inspection) {
    let rows = table.n_rows();
    let usable = inspection.usable(rows);
    let cells = rows * usable.len();
    let empty: usize = usable.iter().map(|(_, n, _)| n.missing).sum();
    let _ = writeln!(out, "\n[missing]");
    comment(
        out,
        "What happens to a missing cell in a feature: \"mean\" fills it with the mean of the feature's observed cells, \"median\" with their median (less pulled by outliers), \"drop-rows\" leaves out every row with a missing cell. Filling pulls values to the centre and weakens correlations; preprocessing.csv in the results counts the filled cells.",
    );
    if empty == 0 {
        comment(
            out,
            "No cell of the features is missing in this table, so the method matters only for other data.",
        );
    } else {
        let columns: Vec<&Vec<String>> = usable
            .iter()
            .filter_map(|(d, _, _)| table.names.iter().position(|n| *n == d.name))
            .map(|j| &table.cells[j])
            .collect();
        let complete = (0..rows)
            .filter(|&r| {
                columns
                    .iter()
                    .all(|c| parse_number(&c[r], table.decimal).is_some())
            })
            .count();
        comment(
            out,
            &format!(
                "Here {empty} of {cells} cells ({} %) of the features that are kept are missing; {complete} of {rows} rows are complete, which is what \"drop-rows\" would keep.",
                pct(empty as f64 / cells as f64)
            ),
        );
    }
    let _ = writeln!(out, "method = \"mean\"");
    let dropped: Vec<String> = inspection
        .features(rows)
        .into_iter()
        .filter(|(_, _, share)| *share > MAX_FEATURE_MISSING)
        .map(|(d, _, share)| format!("{} ({} % missing)", plain(&d.name), pct(share)))
        .collect();
    let which = if dropped.is_empty() {
        "No feature here misses that much.".to_string()
    } else {
        format!(
            "That drops {}; raise the limit to keep it, at the price of more filled cells.",
            dropped.join(", ")
        )
    };
    comment(
        out,
        &format!(
            "A feature missing a larger share of its cells than this is dropped and reported (rule of thumb: filling more than 30 % of a column invents too much of it). {which}"
        ),
    );
    let _ = writeln!(out, "max_feature_missing = {MAX_FEATURE_MISSING}");
}

/// The transforms, all in comments (the `[transform]` header too), so that the
/// recipe holds no empty table that a later `[transform]` would repeat.
fn transform_section(out: &mut String, inspection: &Inspection, rows: usize) {
    let _ = writeln!(out);
    comment(
        out,
        "[transform]: log10, ln and sqrt each take a list of features (names or patterns). Transforms come first: they apply to the observed cells, before missing cells are filled (so fills are made on the transformed scale, and imputed.csv gives them back in the original units) and before scaling. A value outside the domain, such as the log of zero, is an error naming the cell. Nothing is transformed unless listed.",
    );
    let skewed = inspection.skewed(rows);
    comment(
        out,
        &format!(
            "Rule of thumb used to suggest a log scale: every value above zero, skewness above {SKEWNESS_LIMIT}, and less than half that skewness after log10."
        ),
    );
    if skewed.is_empty() {
        comment(
            out,
            "No feature here meets it. To transform features, remove the # on the next two lines and list them:",
        );
        let _ = writeln!(out, "# [transform]");
        let _ = writeln!(out, "# log10 = []");
        return;
    }
    comment(
        out,
        "These features meet it (skewness before and after log10):",
    );
    let width = skewed
        .iter()
        .map(|(d, _)| plain(&d.name).chars().count())
        .max()
        .unwrap_or(0);
    for (d, s) in &skewed {
        let _ = writeln!(
            out,
            "#   {:width$}  {} -> {}",
            plain(&d.name),
            fixed(s.skewness, 2),
            fixed(s.log_skewness.unwrap_or(0.0), 2)
        );
    }
    comment(
        out,
        "A log scale turns ratios into differences and keeps a few large values from deciding the components.",
    );
    let names: Vec<String> = skewed.iter().map(|(d, _)| toml_str(&d.name)).collect();
    let one_line = format!("# log10 = [{}]", names.join(", "));
    if one_line.chars().count() <= WRAP {
        comment(out, "Remove the # on the next two lines to use it:");
        let _ = writeln!(out, "# [transform]");
        let _ = writeln!(out, "{one_line}");
    } else {
        comment(
            out,
            "Remove the # at the start of the next lines to use it:",
        );
        let _ = writeln!(out, "# [transform]");
        let _ = writeln!(out, "# log10 = [");
        for name in &names {
            let _ = writeln!(out, "#     {name},");
        }
        let _ = writeln!(out, "# ]");
    }
}

fn scaling_section(out: &mut String, inspection: &Inspection, rows: usize) {
    let _ = writeln!(out, "\n[scaling]");
    let usable = inspection.usable(rows);
    let smallest = usable
        .iter()
        .min_by(|a, b| a.1.stats.sd.total_cmp(&b.1.stats.sd));
    let largest = usable
        .iter()
        .max_by(|a, b| a.1.stats.sd.total_cmp(&b.1.stats.sd));
    if let (Some(lo), Some(hi)) = (smallest, largest)
        && usable.len() > 1
    {
        let ratio = hi.1.stats.sd / lo.1.stats.sd;
        comment(
            out,
            &format!(
                "Standard deviations of the features range from {} ({}) to {} ({}), a factor of {}.",
                sig3(lo.1.stats.sd),
                lo.0.name,
                sig3(hi.1.stats.sd),
                hi.0.name,
                sig3(ratio)
            ),
        );
    }
    comment(
        out,
        "Columns of a table like this are usually in different units, and without scaling the features with the largest numbers would decide the components. \"unit-variance\" centres each feature and divides it by its standard deviation (correlation PCA), so every feature weighs the same, noisy ones included.",
    );
    comment(
        out,
        "Other choices: \"center\" (covariance PCA, for features in one common unit, where a larger spread should count more), \"pareto\" (divides by the square root of the standard deviation, between the two), \"range\" (divides by max - min), \"none\" (no centring).",
    );
    let _ = writeln!(out, "method = \"unit-variance\"");
    let constant = inspection
        .with_role(Role::Excluded)
        .any(|d| matches!(&d.kind, Kind::Numeric(n) if n.stats.min == n.stats.max));
    let here = if constant {
        "The constant columns of this table are excluded above"
    } else {
        "No numeric column of this table is constant"
    };
    comment(
        out,
        &format!(
            "A feature with the same value in every row cannot be divided by its spread: \"error\" stops and names it, \"drop\" drops and reports it. {here}, so \"error\" only guards other data."
        ),
    );
    let _ = writeln!(out, "constant_features = \"error\"");
}

/// Writes `[components]`; returns the `compute` it wrote.
fn components_section(out: &mut String, inspection: &Inspection, rows: usize) -> usize {
    let usable = inspection.usable(rows).len();
    let compute = COMPUTE.min(usable).min(rows - 1).max(1);
    let _ = writeln!(out, "\n[components]");
    comment(
        out,
        "How many components are kept for the scores. \"broken-stick\" keeps the leading components that each explain more variance than the matching piece of a stick broken at random into as many pieces as there are features, a cautious rule that adapts to the data. Other choices: a count such as 3, { variance = 0.8 } (the fewest components explaining 80 %), \"kaiser\" (eigenvalues above their mean). The rules often disagree; compare them in variance.csv.",
    );
    let _ = writeln!(out, "keep = \"broken-stick\"");
    setting(
        out,
        &format!("compute = {compute}"),
        "how many components the tables report",
    );
    compute
}

/// Three figures: the scree plot, the scores of components 1 and 2 coloured
/// by the likeliest group column, and the loadings of component 1.
fn plot_section(out: &mut String, inspection: &Inspection, compute: usize) {
    let _ = writeln!(out);
    comment(
        out,
        "Figures, one [[plot]] table each, written to plots/ in the results folder and shown in the report. Other kinds: \"biplot\", \"correlation-circle\", \"outlier-map\".",
    );
    let _ = writeln!(out, "\n[[plot]]");
    setting(
        out,
        "kind = \"scree\"",
        "variance of each component: how many matter",
    );
    if compute >= 2 {
        let _ = writeln!(out, "\n[[plot]]");
        setting(
            out,
            "kind = \"scores\"",
            "rows on components 1 and 2 (x = 1, y = 2)",
        );
        match inspection.likeliest_group() {
            Some(g) => setting(
                out,
                &format!("color = {}", toml_str(&g.name)),
                "the group column most likely to separate the rows",
            ),
            None => comment(
                out,
                "No group column to colour the points by: color = \"column\" takes one of input.groups.",
            ),
        }
        setting(out, "ellipse = 0.95", "Hotelling's T² limit at 95 %");
    } else {
        comment(
            out,
            "A score plot needs two components, and this table gives one (compute = 1).",
        );
    }
    let _ = writeln!(out, "\n[[plot]]");
    setting(
        out,
        "kind = \"loadings\"",
        "how each feature weighs in component 1",
    );
    let _ = writeln!(out, "component = 1");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn toml_strings_are_escaped() {
        assert_eq!(toml_str("a\"b\\c\td"), "\"a\\\"b\\\\c\\td\"");
        assert_eq!(toml_str("x\u{1}"), "\"x\\u0001\"");
        let v: toml::Value =
            toml::from_str(&format!("k = {}", toml_str("a\"\\\t\n\u{7f}z"))).unwrap();
        assert_eq!(v["k"].as_str(), Some("a\"\\\t\n\u{7f}z"));
    }
}
