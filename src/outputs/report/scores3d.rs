//! The rotatable 3-D view of the scores: its section, its legend, the colour
//! of each point and the data the script reads, serialised with serde as JSON
//! that cannot end its script element.

use super::PALETTE;
use super::html::{escape, script_safe};
use crate::outputs::view::{FlaggedLine, Scores3d};
use crate::text::significant;
use serde::Serialize;
use serde_json::value::RawValue;
use std::collections::{BTreeMap, BTreeSet};

/// The colour of every point when the scores have no group column.
const SINGLE_COLOUR: &str = "#0072B2";

pub(super) fn scores_3d(out: &mut String, s: &Scores3d, flagged: &[FlaggedLine]) {
    let colouring = Colouring::new(s);
    let flagged_labels: BTreeSet<&str> = flagged.iter().map(|f| f.label.as_str()).collect();
    let flagged_points: Vec<usize> = (0..s.points.len())
        .filter(|&i| {
            s.labels
                .get(i)
                .is_some_and(|l| flagged_labels.contains(l.as_str()))
        })
        .collect();

    out.push_str("<section id=\"scores-3d\">\n<h2>Scores on the first three components</h2>\n");
    out.push_str(&format!(
        "<p class=\"sx-lede\">{} rows on {}, {} and {}.</p>\n",
        s.points.len(),
        escape(&s.axis_titles[0]),
        escape(&s.axis_titles[1]),
        escape(&s.axis_titles[2])
    ));
    out.push_str("<noscript><p class=\"sx-note\">The rotating 3-D view needs JavaScript, which is switched off; everything else in this report is shown without it.</p></noscript>\n");
    out.push_str("<div id=\"sx3d-box\" hidden>\n<p class=\"sx-hint\">Drag to rotate (mouse or touch), or use the arrow keys after selecting the view; double-click or press 0 to reset. Point at a dot to see its row.</p>\n");
    out.push_str(&format!(
        "<canvas id=\"sx3d-canvas\" width=\"640\" height=\"480\" tabindex=\"0\" role=\"img\" aria-label=\"Rotatable scatter of the scores on {}, {} and {}\"></canvas>\n",
        escape(&s.axis_titles[0]),
        escape(&s.axis_titles[1]),
        escape(&s.axis_titles[2])
    ));
    out.push_str("<p id=\"sx3d-info\" class=\"sx-info\" aria-live=\"polite\"></p>\n");
    // The legend.
    out.push_str("<ul class=\"sx-legend\">");
    if let Some(name) = &colouring.group {
        out.push_str(&format!(
            "<li class=\"sx-legend-title\">{}:</li>",
            escape(name)
        ));
        for (label, colour) in &colouring.legend {
            out.push_str(&format!(
                "<li><span class=\"sx-sw {}\"></span>{}</li>",
                swatch_class(colour),
                escape(label)
            ));
        }
    } else {
        out.push_str(&format!(
            "<li><span class=\"sx-sw {}\"></span>each row</li>",
            swatch_class(SINGLE_COLOUR)
        ));
    }
    if !flagged_points.is_empty() {
        out.push_str("<li><span class=\"sx-sw sx-ring\"></span>dark ring: a flagged row</li>");
    }
    out.push_str("</ul>\n</div>\n");

    // The data, as JSON that cannot end its script element.
    let data = ViewData {
        axes: &s.axis_titles,
        group: colouring.group.as_deref(),
        values: &colouring.values,
        colours: &colouring.colours,
        value: &colouring.of_point,
        flagged: &flagged_points,
        labels: &s.labels,
        points: s.points.iter().map(|p| p.map(coordinate)).collect(),
    };
    let json = serde_json::to_string(&data).expect("the view's data serialises");
    out.push_str("<script type=\"application/json\" id=\"sx3d-data\">");
    out.push_str(&script_safe(&json));
    out.push_str("</script>\n</section>\n");
}

/// The data the script reads, in the order it is written.
#[derive(Serialize)]
struct ViewData<'a> {
    /// The three axis titles.
    axes: &'a [String; 3],
    /// The group column, or `null`.
    group: Option<&'a str>,
    /// Each distinct group value, and its colour.
    values: &'a [String],
    colours: &'a [&'static str],
    /// Each point's index into `values`.
    value: &'a [usize],
    /// The indices of the flagged points.
    flagged: &'a [usize],
    labels: &'a [String],
    /// Each point's three scores, written by [`json_number`].
    points: Vec<[Box<RawValue>; 3]>,
}

/// A score as a JSON number of six significant digits: serde_json would write
/// every digit ryu needs to round-trip, which the picture does not need.
fn coordinate(v: f64) -> Box<RawValue> {
    RawValue::from_string(json_number(v)).expect("a number or null is JSON")
}

/// How the 3-D view colours its points.
struct Colouring {
    /// The group column, if any.
    group: Option<String>,
    /// Each distinct value (sorted), or one entry without a group.
    values: Vec<String>,
    /// The colour of each entry of `values`.
    colours: Vec<&'static str>,
    /// Each point's index into `values`.
    of_point: Vec<usize>,
    /// (label, colour) in legend order.
    legend: Vec<(String, &'static str)>,
}

impl Colouring {
    /// Up to eight values get a colour each, in sorted order. With more, the seven
    /// most common (ties by name) get the first seven colours and the rest share
    /// the eighth, shown as "other".
    fn new(s: &Scores3d) -> Colouring {
        let n = s.points.len();
        let Some((name, raw)) = s.group.as_ref().filter(|(_, v)| v.len() == n) else {
            return Colouring {
                group: None,
                values: vec![String::new()],
                colours: vec![SINGLE_COLOUR],
                of_point: vec![0; n],
                legend: Vec::new(),
            };
        };
        let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
        for v in raw {
            *counts.entry(v.as_str()).or_default() += 1;
        }
        let values: Vec<String> = counts.keys().map(|v| v.to_string()).collect();
        let index: BTreeMap<&str, usize> =
            counts.keys().enumerate().map(|(i, v)| (*v, i)).collect();
        let of_point = raw.iter().map(|v| index[v.as_str()]).collect();
        let shown = |v: &str| {
            if v.is_empty() {
                "(empty)".to_string()
            } else {
                v.to_string()
            }
        };
        let (colours, legend) = if values.len() <= PALETTE.len() {
            let colours: Vec<&'static str> = (0..values.len()).map(|i| PALETTE[i]).collect();
            let legend = values
                .iter()
                .zip(&colours)
                .map(|(v, c)| (shown(v), *c))
                .collect();
            (colours, legend)
        } else {
            let mut ranked: Vec<(&str, usize)> = counts.iter().map(|(v, c)| (*v, *c)).collect();
            ranked.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
            let top = PALETTE.len() - 1;
            let mut colours = vec![PALETTE[top]; values.len()];
            let mut legend = Vec::new();
            for (rank, (v, _)) in ranked.iter().take(top).enumerate() {
                colours[index[v]] = PALETTE[rank];
                legend.push((shown(v), PALETTE[rank]));
            }
            legend.push((
                format!("other ({} values)", values.len() - top),
                PALETTE[top],
            ));
            (colours, legend)
        };
        Colouring {
            group: Some(name.clone()),
            values,
            colours,
            of_point,
            legend,
        }
    }
}

/// The CSS class of a legend swatch of a palette colour.
fn swatch_class(colour: &str) -> String {
    match PALETTE.iter().position(|c| *c == colour) {
        Some(i) => format!("sx-c{i}"),
        None => "sx-c4".to_string(),
    }
}

/// A number for the embedded JSON: six significant digits (plenty for a
/// picture), or `null` for a value that is not finite.
fn json_number(v: f64) -> String {
    if !v.is_finite() {
        return "null".to_string();
    }
    let s = significant(v, 6);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn many_groups_fold_into_other() {
        let values: Vec<String> = (0..12).map(|i| format!("v{:02}", i % 10)).collect();
        let s = Scores3d {
            axis_titles: ["a".into(), "b".into(), "c".into()],
            points: vec![[0.0; 3]; 12],
            labels: (0..12).map(|i| i.to_string()).collect(),
            group: Some(("g".into(), values)),
        };
        let c = Colouring::new(&s);
        assert_eq!(c.values.len(), 10);
        assert_eq!(c.legend.len(), 8);
        assert_eq!(c.legend[0], ("v00".to_string(), PALETTE[0]));
        assert_eq!(c.legend[7].0, "other (3 values)");
        assert_eq!(c.colours[9], PALETTE[7]);
    }

    #[test]
    fn view_data_keeps_its_order_and_six_significant_digits() {
        // The data is serialised with serde; the scores stay at six significant
        // digits (not the round-trip digits serde_json would write), so the
        // page's bytes did not change when the JSON stopped being built by hand.
        let s = Scores3d {
            axis_titles: ["PC1".into(), "PC2".into(), "PC3 <b>".into()],
            points: vec![
                [1.0, -0.000_012_345_678, 1_234_567.0],
                [f64::NAN, 0.1 + 0.2, -2.5],
            ],
            labels: vec!["a".into(), "</script>".into()],
            group: None,
        };
        let flagged = vec![FlaggedLine {
            label: "</script>".into(),
            t2: 9.0,
            spe: 1.0,
            t2_above: true,
            spe_above: false,
            top: Vec::new(),
        }];
        let mut out = String::new();
        scores_3d(&mut out, &s, &flagged);
        let start = out.find("id=\"sx3d-data\">").unwrap() + 15;
        let end = start + out[start..].find("</script>").unwrap();
        assert_eq!(
            &out[start..end],
            "{\"axes\":[\"PC1\",\"PC2\",\"PC3 \\u003cb>\"],\"group\":null,\"values\":[\"\"],\"colours\":[\"#0072B2\"],\"value\":[0,0],\"flagged\":[1],\"labels\":[\"a\",\"\\u003c/script>\"],\"points\":[[1,-1.23457e-5,1.23457e6],[null,0.3,-2.5]]}"
        );
    }
}
