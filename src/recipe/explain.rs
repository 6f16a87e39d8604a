//! `sextant explain`: the analysis a recipe describes, as numbered plain
//! sentences with every default made explicit, for a reviewer who would rather
//! not read TOML. The table is not read, so nothing here depends on the data.

use super::LoadedRecipe;
use super::plan::input_plan;
use super::raw::{
    ConstantPolicy, DEFAULT_COMPUTE, DEFAULT_KEEP, DecompositionMethod, Keep, MissingMethod,
};
use crate::text::percent_short;
use std::fmt::Write;
use toml::Spanned;

fn list(items: &[Spanned<String>]) -> String {
    let names: Vec<String> = items.iter().map(|s| format!("`{}`", s.get_ref())).collect();
    join_words(&names)
}

/// Joins with commas and a final "and".
fn join_words(items: &[String]) -> String {
    match items {
        [] => String::new(),
        [one] => one.clone(),
        [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
    }
}

/// The numbered sentences.
pub fn explain(recipe: &LoadedRecipe) -> Vec<String> {
    let raw = &recipe.raw;
    let input = input_plan(recipe);
    let mut s = Vec::new();

    let delimiter = match input.options.delimiter {
        b'\t' => "tab".to_string(),
        b',' => "comma".to_string(),
        d => format!("`{}`", d as char),
    };
    let tokens: Vec<String> = input
        .options
        .missing_tokens
        .iter()
        .map(|t| format!("\"{t}\""))
        .collect();
    s.push(format!(
        "Read the table `{}` (relative to the recipe's folder) as {delimiter}-separated text with a header row; cells reading {} count as missing.",
        raw.input.file.get_ref(),
        join_words(&tokens).replace(" and ", " or ")
    ));
    s.extend(number_marks(&input.options));
    if let Some(pin) = &raw.input.sha256 {
        s.push(format!(
            "Refuse to run unless the table's SHA-256 is {}.",
            pin.get_ref().0
        ));
    }
    match &raw.input.id {
        Some(id) => s.push(format!(
            "Label rows by the column `{}`, whose values must be present and unique.",
            id.get_ref()
        )),
        None => s.push("Label rows by their number in the table (no id column is set).".into()),
    }
    if !raw.input.groups.is_empty() {
        s.push(format!(
            "Carry the group {} {} into the results; {} no part in the analysis.",
            if raw.input.groups.len() == 1 {
                "column"
            } else {
                "columns"
            },
            list(&raw.input.groups),
            if raw.input.groups.len() == 1 {
                "it takes"
            } else {
                "they take"
            }
        ));
    }
    let mut features = match &raw.input.features {
        Some(f) => format!("Use as features the columns matching {}", list(f)),
        None => "Use as features every numeric column that is not the id or a group".to_string(),
    };
    if !raw.input.exclude.is_empty() {
        let _ = write!(
            features,
            ", except those matching {}",
            list(&raw.input.exclude)
        );
    }
    features.push_str("; a mostly numeric column with a stray text cell stops the run.");
    s.push(features);

    let t = &raw.transform;
    for (name, items, domain) in [
        ("base-10 logarithm", &t.log10, "an observed value ≤ 0"),
        ("natural logarithm", &t.ln, "an observed value ≤ 0"),
        ("square root", &t.sqrt, "a negative observed value"),
    ] {
        if !items.is_empty() {
            s.push(format!(
                "Take the {name} of {}; {domain} stops the run.",
                list(items)
            ));
        }
    }
    if t.log10.is_empty() && t.ln.is_empty() && t.sqrt.is_empty() {
        s.push("Transform no feature.".into());
    }

    let m = &raw.missing;
    s.push(format!(
        "Drop every feature with more than {} of its cells missing, and report it; missing cells are filled on the transformed scale.",
        percent_short(m.max_feature_missing.0)
    ));
    s.push(match m.method {
        MissingMethod::DropRows => "Then drop every row that still has a missing cell in a feature.".into(),
        MissingMethod::Mean => "Then fill each remaining missing cell with the mean of its feature's observed cells (filling shrinks the variance).".into(),
        MissingMethod::Median => "Then fill each remaining missing cell with the median of its feature's observed cells (filling shrinks the variance).".into(),
        MissingMethod::IterativePca => {
            let it = &m.iterative();
            format!(
                "Then fill the remaining missing cells by {} iterative PCA with {} (Josse & Husson 2012), starting from the feature {}s: refit the model to the completed table and refill the cells, with a fixed-order squared extrapolation of the steps (Varadhan & Roland 2008), until one refit changes the filled cells by less than {:e} of their size (‖new − old‖ / ‖new‖ over the filled cells), at most {} refits{}.",
                match it.variant {
                    super::raw::IterativeVariant::Regularized => "regularized (each kept component shrunk by 1 − σ̂²/λ, σ̂² the residual sum of squares over np − p − nS − pS + S² + S, λ with divisor n − 1)",
                    super::raw::IterativeVariant::Em => "plain EM",
                },
                crate::text::count(super::plan::imputation_components(recipe), "component", "components"),
                match it.start {
                    super::raw::StartValue::Mean => "mean",
                    super::raw::StartValue::Median => "median",
                },
                it.tolerance.0,
                it.max_iterations.0,
                if it.allow_unconverged { "; a fill that has not converged is accepted and reported" } else { "; not converging stops the run" }
            )
        }
        MissingMethod::Knn => format!(
            "Then fill each remaining missing cell with the mean of the {} nearest rows that observe it; the distance between two rows is the root of the mean squared difference over the standardised features both observe (the mean, not the sum, so that rows sharing fewer observed features do not look nearer only for having fewer terms); ties go to the lower row.",
            m.knn().neighbours.0
        ),
    });

    let sc = &raw.scaling;
    s.push(sc.method.explanation().into());
    if sc.method.divides() {
        s.push(match sc.constant_policy() {
            ConstantPolicy::Error => "A feature with no spread stops the run.".into(),
            ConstantPolicy::Drop => "Drop and report any feature with no spread.".into(),
        });
    }

    let method = raw
        .components
        .method
        .as_ref()
        .map_or(DecompositionMethod::Exact, |m| *m.get_ref());
    s.push(match method {
        DecompositionMethod::Exact => "Compute the eigenvalues and loadings of that matrix with divisor n − 1; make the largest loading of each component positive (ties go to the first feature).".into(),
        DecompositionMethod::Qr => "Compute the eigenvalues and loadings of that matrix (divisor n − 1) from the singular values of the scaled data itself: a Householder QR of its rows in fixed blocks of 1,024, then the singular values and right singular vectors of the small triangular factor by one-sided Jacobi (Golub & Van Loan 2013, §5.4), so the smallest eigenvalues, and the SPE limits built on them, keep their digits (the cross-products route loses them below about 1e-8 of the largest); make the largest loading of each component positive (ties go to the first feature).".into(),
        DecompositionMethod::Randomized => {
            let r = raw
                .components
                .randomized
                .as_ref()
                .map(|r| r.get_ref().clone())
                .unwrap_or_default();
            format!(
                "Compute only the leading eigenvalues and loadings of that matrix (divisor n − 1) by the randomized method of Halko, Martinsson & Tropp (2011): multiply the data by {} more than the components wanted, drawn from seed {}, refine with {}, and solve the small eigenproblem of that sketch; the rest of the spectrum is known only through its sum and sum of squares, so T² and SPE are exact but the SPE limit uses Box's approximation. Make the largest loading of each component positive (ties go to the first feature).",
                crate::text::count(r.oversampling.0, "random normal direction", "random normal directions"),
                r.seed,
                crate::text::count(r.power_iterations.0, "power iteration", "power iterations")
            )
        }
    });
    let c = &raw.components;
    let compute = c
        .compute
        .as_ref()
        .map_or(DEFAULT_COMPUTE, |n| n.get_ref().0.get());
    let keep = c.keep.as_ref().map(|k| *k.get_ref());
    s.push(match keep {
        None => format!("Keep {DEFAULT_KEEP} components (the default, as no rule is set); more than the data's rank stops the run."),
        Some(Keep::Count(k)) => format!("Keep {}; more than the data's rank stops the run.", crate::text::count(k.get(), "component", "components")),
        Some(Keep::Variance(v)) => format!("Keep the fewest components whose cumulative share of the variance reaches {}.", percent_short(v.0)),
        Some(Keep::Kaiser) => "Keep the components whose eigenvalue exceeds the mean eigenvalue (Kaiser's rule; the mean is the total variance over all p features, 1 for a correlation matrix, even when the data's rank is below p).".into(),
        Some(Keep::BrokenStick) => "Keep the leading components that each explain more than the broken-stick expectation for a stick broken into p pieces, p the number of features, even when the data's rank is below p.".into(),
        Some(Keep::ParallelAnalysis) => {
            let pa = &c.parallel();
            format!(
                "Keep the leading components whose eigenvalues exceed the {}th percentile of those of {} random tables of the same shape ({}), drawn from seed {} (Horn's parallel analysis).",
                pa.percentile.0,
                pa.replicates.0,
                match pa.random_data {
                    super::raw::RandomData::PermutedColumns => "each column of the scaled data shuffled on its own",
                    super::raw::RandomData::Normal => "normal values with each column's spread",
                },
                pa.seed
            )
        }
        Some(Keep::CrossValidation) => {
            let cv = &c.cross_validation();
            format!(
                "Keep the number of components that best predicts held-out cells from the rest of their row, over {} {} folds of rows ({}).",
                cv.folds.0,
                match cv.folds_by {
                    super::raw::FoldsBy::Interleaved => "interleaved",
                    super::raw::FoldsBy::Contiguous => "contiguous",
                },
                match cv.choose {
                    super::raw::CvChoice::Minimum => "the count with the smallest prediction error",
                    super::raw::CvChoice::OneStandardError => "the fewest components within one standard error of the smallest prediction error",
                }
            )
        }
    });
    let levels: Vec<String> = raw
        .diagnostics
        .confidence
        .0
        .iter()
        .map(|c| percent_short(*c))
        .collect();
    s.push(format!(
        "For every row compute Hotelling's T² over the kept components and the squared prediction error (SPE) after them, and flag rows above their limits at {} confidence (T² by the Beta form for the analysed rows; SPE by the {} approximation; where a limit does not exist for the data, its flag columns in scores.csv are left empty and the manifest and report say why); list each flagged row's feature contributions: signed per-feature terms of T², Σₐ (tₐ/λₐ) pⱼₐ zⱼ summed over the kept components, and squared residuals eⱼ² for SPE, each summing to the row's value (Westerhuis, Gurden & Smilde 2000).",
        join_words(&levels),
        match raw.diagnostics.spe_limit {
            super::raw::SpeLimit::JacksonMudholkar => "Jackson–Mudholkar",
            super::raw::SpeLimit::Box => "Box",
        }
    ));
    s.push(format!("Report {compute} components in the variance and loadings tables (fewer if the data's rank is lower, more if more are kept)."));
    if let Some(sentence) = label_sentence(raw) {
        s.push(sentence);
    }
    s.push(format!(
        "Write scores, loadings, variance, preprocessing, the filled cells, the contributions of flagged rows, the model for scoring new rows, {}, a report page and a manifest with SHA-256 hashes to `{}`, replacing an earlier folder only if it came from the same recipe and inputs.",
        crate::text::count(raw.plots.len(), "plot", "plots"),
        raw.output.folder.get_ref()
    ));
    s
}

/// How the scatter plots label rows, when the recipe draws any.
fn label_sentence(raw: &super::raw::RawRecipe) -> Option<String> {
    use super::raw::PlotKind::{Biplot, OutlierMap, Scores};
    let limits: Vec<usize> = raw
        .plots
        .iter()
        .map(|p| p.get_ref())
        .filter(|p| matches!(p.kind, Scores | Biplot | OutlierMap))
        .map(|p| {
            p.max_labels
                .as_ref()
                .map_or(super::plots::DEFAULT_MAX_LABELS, |m| m.get_ref().0.get())
        })
        .collect();
    let (least, most) = (limits.iter().min()?, limits.iter().max()?);
    let count = if least == most {
        format!("{most}")
    } else {
        format!("{least} to {most} (each plot's `max_labels`)")
    };
    Some(format!(
        "On the score plots, biplots and outlier maps, write the ids of at most {count} rows per plot (the rows farthest beyond their limits first); a label that would overlap another is left out and named in the caption, and above `density_above` rows every row is drawn as a density coloured by whether it is above a limit."
    ))
}

/// The explanation as printed: the title, then the numbered sentences.
pub fn render(recipe: &LoadedRecipe) -> String {
    let mut out = String::new();
    if let Some(title) = &recipe.raw.title {
        let _ = writeln!(out, "{title}\n");
    }
    for (i, sentence) in explain(recipe).iter().enumerate() {
        let _ = writeln!(out, "{:>2}. {sentence}", i + 1);
    }
    out
}

/// The sentences on a decimal comma, a thousands separator and the missing
/// codes of single columns: none for a table read with the defaults.
fn number_marks(options: &crate::table::ReadOptions) -> Vec<String> {
    let mut s = Vec::new();
    let mark = |b: u8| match b {
        b' ' => "a space".to_string(),
        b => format!("`{}`", b as char),
    };
    if options.decimal != b'.' || options.thousands.is_some() {
        let example = match (options.decimal, options.thousands) {
            (b',', Some(t)) => format!("1{}234,5", t as char),
            (b',', None) => "3,14".into(),
            (_, Some(t)) => format!("1{}234.5", t as char),
            _ => "3.14".into(),
        };
        let thousands = options.thousands.map_or(String::new(), |t| {
            format!(", with {} between groups of three digits", mark(t))
        });
        s.push(format!(
            "Read numbers with {} as the decimal mark{thousands}, as in {example}; a cell in any other form is not a number.",
            mark(options.decimal)
        ));
    }
    for (column, codes) in &options.missing_per_column {
        let shown: Vec<String> = codes
            .iter()
            .map(|c| match c {
                crate::table::read::MissingCode::Number(v) => crate::text::number(*v),
                crate::table::read::MissingCode::Text(t) => format!("\"{t}\""),
            })
            .collect();
        s.push(format!(
            "In the column `{column}` only, also count {} as missing.",
            join_words(&shown).replace(" and ", " or ")
        ));
    }
    s
}
