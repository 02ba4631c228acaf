//! The document grammar: front matter (sometimes), prose, and step blocks of every kind
//! whose settings are mostly valid, sometimes near-valid (a misspelt kind, id or key, a
//! wrong type, an out-of-range number, a YAML tag, deep nesting) and sometimes broken;
//! references that resolve, dangle, name another kind or name an unreadable block; and
//! then line ends, a byte-order mark or a stray Latin-1 byte over the whole text.

use arbitrary::Unstructured;

use super::csv_files::{NAMES, Table};

/// A readable file outside the project, and a path to write outside it, both absolute:
/// the oracle puts the outside folder in place of `super::OUTSIDE`. Quoted, as YAML
/// cannot start a plain value with `@`.
const OUTSIDE_SECRET: &str = "\"@OUTSIDE@/secret.csv\"";
const OUTSIDE_WRITE: &str = "\"@OUTSIDE@/abs.json\"";

type Drawn<T> = arbitrary::Result<T>;

/// Each kind with the ids its steps may take and how many of them a document holds.
const KINDS: &[(&str, &[&str], std::ops::RangeInclusive<usize>)] = &[
    ("data", &["d", "d2"], 1..=2),
    ("net", &["n", "wide"], 1..=2),
    ("train", &["t", "t2", "t3"], 1..=3),
    ("sweep", &["s"], 0..=1),
    ("compare", &["c"], 0..=1),
    ("predict", &["p"], 0..=1),
    ("export", &["e"], 0..=1),
];

/// The steps of a document before their settings: (kind, id) in document order.
type Skeleton = Vec<(&'static str, String)>;

/// The grammar's source of choices: the fuzzer's bytes, and how often a place that
/// can be broken is.
pub struct Draw<'a, 'b> {
    u: &'a mut Unstructured<'b>,
    /// Chance per thousand that one breakable place is broken.
    breakage: u16,
}

/// Breakage per thousand places, one drawn per document: many documents are whole (so
/// their steps run), some have a flaw or two, a few are riddled.
const BREAKAGE: &[u16] = &[0, 0, 0, 0, 2, 6, 15, 50];

impl Draw<'_, '_> {
    /// Whether this place is broken.
    fn breaks(&mut self) -> Drawn<bool> {
        Ok(self.u.int_in_range(0..=999)? < self.breakage)
    }
}

/// A whole document that reads the given tables.
pub fn document(u: &mut Unstructured<'_>, tables: &[Table]) -> Drawn<Vec<u8>> {
    let breakage = *u.choose(BREAKAGE)?;
    let g = &mut Draw { u, breakage };
    let skeleton = skeleton(g)?;
    let mut text = String::new();
    if g.u.ratio(1, 2)? {
        text.push_str(&front_matter(g)?);
    }
    text.push_str("# A generated experiment\n\n");
    for (kind, id) in &skeleton {
        text.push_str(prose(g)?);
        let settings = settings(g, kind, &skeleton, tables)?;
        text.push_str(&block(g, kind, id, &settings)?);
    }
    finish(g, text)
}

fn skeleton(g: &mut Draw<'_, '_>) -> Drawn<Skeleton> {
    let mut steps = Skeleton::new();
    for (kind, ids, count) in KINDS {
        let count = g.u.int_in_range(count.clone())?;
        steps.extend(ids.iter().take(count).map(|id| (*kind, id.to_string())));
    }
    if g.u.ratio(1, 6)? {
        let (a, b) = (
            g.u.choose_index(steps.len())?,
            g.u.choose_index(steps.len())?,
        );
        steps.swap(a, b);
    }
    if g.breaks()? {
        let copied = steps[g.u.choose_index(steps.len())?].1.clone();
        let kind = g.u.choose(KINDS)?.0;
        steps.push((kind, copied));
    }
    Ok(steps)
}

/// Usually one of `usual`, now and then one of `odd`.
fn one_of(g: &mut Draw<'_, '_>, usual: &[&str], odd: &[&str]) -> Drawn<String> {
    let pool = if !odd.is_empty() && g.breaks()? {
        odd
    } else {
        usual
    };
    Ok(g.u.choose(pool)?.to_string())
}

/// A YAML flow list of `count` values drawn by `item`; a value drawn twice is kept
/// twice only when the document breaks there (stet refuses repeated values).
fn list(
    g: &mut Draw<'_, '_>,
    count: std::ops::RangeInclusive<usize>,
    mut item: impl FnMut(&mut Draw<'_, '_>) -> Drawn<String>,
) -> Drawn<String> {
    let mut items: Vec<String> = (0..g.u.int_in_range(count)?)
        .map(|_| item(g))
        .collect::<Drawn<_>>()?;
    if !g.breaks()? {
        distinct(&mut items, |item| item.clone());
    }
    Ok(format!("[{}]", items.join(", ")))
}

/// Keeps the first of each group of items with the same `key`.
fn distinct(items: &mut Vec<String>, key: impl Fn(&String) -> String) {
    let mut seen = std::collections::HashSet::new();
    items.retain(|item| seen.insert(key(item)));
}

/// An id of a step of one of `kinds`; sometimes one that dangles or names another kind.
/// A block whose header is broken keeps its id here, so references to it are drawn too.
fn reference(g: &mut Draw<'_, '_>, skeleton: &Skeleton, kinds: &[&str]) -> Drawn<String> {
    let (fitting, other): (Vec<_>, Vec<_>) = skeleton.iter().partition(|(k, _)| kinds.contains(k));
    let pick = |g: &mut Draw<'_, '_>, steps: &[&(&str, String)]| -> Drawn<Option<String>> {
        Ok(match steps {
            [] => None,
            _ => Some(g.u.choose(steps)?.1.clone()),
        })
    };
    let chosen = match g.breaks()? {
        true => match g.u.int_in_range(0..=2)? {
            0 => Some("nope".to_string()),
            1 => pick(g, &fitting)?.map(|id| format!("{id}x")),
            _ => pick(g, &other)?,
        },
        false => pick(g, &fitting)?,
    };
    Ok(chosen.unwrap_or_else(|| "nope".into()))
}

/// The settings of one block as (key, YAML value) lines.
fn settings(
    g: &mut Draw<'_, '_>,
    kind: &str,
    skeleton: &Skeleton,
    tables: &[Table],
) -> Drawn<Vec<(String, String)>> {
    let mut out = Vec::new();
    match kind {
        "data" => data_settings(g, tables, &mut out)?,
        "net" => net_settings(g, &mut out)?,
        "train" => train_settings(g, skeleton, &mut out)?,
        "sweep" => sweep_settings(g, skeleton, &mut out)?,
        "compare" => compare_settings(g, skeleton, &mut out)?,
        "predict" => predict_settings(g, skeleton, &mut out)?,
        _ => export_settings(g, skeleton, &mut out)?,
    }
    Ok(out)
}

type Lines = Vec<(String, String)>;

fn push(out: &mut Lines, key: &str, value: String) {
    out.push((key.to_string(), value));
}

/// Adds `key` with a value from `usual` or `odd` in `numerator` of `denominator` blocks.
fn maybe(
    g: &mut Draw<'_, '_>,
    out: &mut Lines,
    (numerator, denominator): (u8, u8),
    key: &str,
    usual: &[&str],
    odd: &[&str],
) -> Drawn<()> {
    if g.u.ratio(numerator, denominator)? {
        let value = one_of(g, usual, odd)?;
        push(out, key, value);
    }
    Ok(())
}

/// A setting the design names but stet does not know (yet), in a flawed block.
fn unknown(g: &mut Draw<'_, '_>, out: &mut Lines, key: &str, value: &str) -> Drawn<()> {
    if g.breaks()? {
        push(out, key, value.to_string());
    }
    Ok(())
}

/// A column name as YAML: the empty name must be quoted, or it reads as null.
fn column(name: &str) -> String {
    match name {
        "" => "\"\"".to_string(),
        _ => name.to_string(),
    }
}

/// A target column (two now and then) and sometimes the inputs, a subset of the other
/// columns; a flawed block names no column, a missing one, or none at all.
fn target_and_inputs(g: &mut Draw<'_, '_>, columns: &[&str], out: &mut Lines) -> Drawn<()> {
    if g.breaks()? {
        let target = g.u.choose(&["nope", "5", "[]", "X"])?;
        push(out, "target", target.to_string());
        return Ok(());
    }
    let first = g.u.choose_index(columns.len())?;
    let mut targets = vec![first];
    if columns.len() > 2 && g.u.ratio(1, 10)? {
        targets.push((first + 1) % columns.len());
    }
    let target = match targets.as_slice() {
        [one] => column(columns[*one]),
        several => {
            let names: Vec<String> = several.iter().map(|&i| column(columns[i])).collect();
            format!("[{}]", names.join(", "))
        }
    };
    push(out, "target", target);
    if g.u.ratio(1, 4)? {
        let mut inputs = Vec::new();
        for (i, name) in columns.iter().enumerate() {
            if !targets.contains(&i) && g.u.arbitrary()? {
                inputs.push(column(name));
            }
        }
        if inputs.is_empty() {
            let spare = (0..columns.len()).find(|i| !targets.contains(i));
            inputs.extend(spare.map(|i| column(columns[i])));
        }
        let inputs = match g.breaks()? {
            true => g.u.choose(&["[]", "[nope]", "x"])?.to_string(),
            false => format!("[{}]", inputs.join(", ")),
        };
        push(out, "inputs", inputs);
    }
    Ok(())
}

fn data_settings(g: &mut Draw<'_, '_>, tables: &[Table], out: &mut Lines) -> Drawn<()> {
    let names: Vec<&str> = tables.iter().map(|t| t.name.as_str()).collect();
    let file = one_of(
        g,
        &names,
        &[
            "missing.csv",
            "../secret.csv",
            OUTSIDE_SECRET,
            "link/secret.csv",
            "sub",
            "doc.md",
            "\"\"",
        ],
    )?;
    let columns = tables
        .iter()
        .find(|t| t.name == file)
        .map_or_else(Vec::new, |t| t.columns.clone());
    let columns: Vec<&str> = columns.iter().map(String::as_str).collect();
    push(out, "file", file.clone());
    if columns.is_empty() {
        push(out, "target", "y".into());
    } else {
        target_and_inputs(g, &columns, out)?;
    }
    maybe(
        g,
        out,
        (1, 3),
        "task",
        &["classify", "regress"],
        &["cluster", "[classify]"],
    )?;
    maybe(
        g,
        out,
        (1, 3),
        "scale",
        &["standard", "minmax", "none"],
        &["z", "!!str none"],
    )?;
    maybe(g, out, (1, 3), "missing", &["error", "drop"], &["skip"])?;
    // Either split, or none; both is a flaw.
    let both = g.breaks()?;
    let holdout = ["0.2", "0.25", "0.5"];
    let odd_holdout = ["0", "1", "-0.1", "1.5", "x", ".nan"];
    let folds = ["2", "3", "5"];
    let odd_folds = ["0", "1", "100", "-2"];
    match g.u.int_in_range(0..=3)? {
        0 | 1 => maybe(g, out, (1, 1), "holdout", &holdout, &odd_holdout)?,
        2 => maybe(g, out, (1, 1), "folds", &folds, &odd_folds)?,
        _ => {}
    }
    if both {
        maybe(g, out, (1, 1), "folds", &folds, &odd_folds)?;
    }
    maybe(
        g,
        out,
        (1, 5),
        "seed",
        &["1", "42"],
        &["-1", "1e30", "18446744073709551616"],
    )?;
    maybe(
        g,
        out,
        (1, 3),
        "validation",
        &["0.2", "0.25", "0.5"],
        &["0", "1", "-0.1", "1.5", "x", ".nan"],
    )
}

/// Widths for `hidden`: small lists, and now and then a broken or deeply nested one.
fn hidden(g: &mut Draw<'_, '_>) -> Drawn<String> {
    if g.breaks()? {
        let depth = g.u.int_in_range(2..=40)?;
        return Ok(format!("{}2{}", "[".repeat(depth), "]".repeat(depth)));
    }
    one_of(
        g,
        &["[3]", "[4, 2]", "[8]", "[]", "[2, 2, 2]", "[5]"],
        &[
            "[0]", "[5000]", "x", "[[2]]", "[-1]", "[4096]", "3", "[2.5]", "{a: 1}",
        ],
    )
}

const ACTIVATIONS: &[&str] = &["sigmoid", "tanh", "relu", "leaky_relu", "linear"];
const ODD_ACTIVATIONS: &[&str] = &["tahn", "[tanh]", "!tanh", "softmax", "!!binary aGk="];

fn net_settings(g: &mut Draw<'_, '_>, out: &mut Lines) -> Drawn<()> {
    // A net block with no settings at all is a flaw.
    if !g.breaks()? {
        let widths = hidden(g)?;
        push(out, "hidden", widths);
    }
    maybe(g, out, (1, 2), "activation", ACTIVATIONS, ODD_ACTIVATIONS)?;
    let outputs = ["auto", "sigmoid", "softmax", "linear", "tanh"];
    maybe(g, out, (1, 3), "output", &outputs, &["relu", "none"])?;
    maybe(
        g,
        out,
        (1, 3),
        "init",
        &["xavier", "he", "uniform"],
        &["zeros"],
    )
}

const LEARNING_RATES: &[&str] = &["0.1", "0.05", "0.01"];
const ODD_LEARNING_RATES: &[&str] = &["0", "-1", "1e10", ".nan", ".inf", "fast"];
const MOMENTA: &[&str] = &["0", "0.5", "0.9"];
const ODD_MOMENTA: &[&str] = &["1.5", "-0.5", "1"];
const BATCHES: &[&str] = &["1", "4", "16", "full"];
const ODD_BATCHES: &[&str] = &["0", "-1", "all", "1.5"];
/// Tiny, so that a build stays well under the oracle's deadline.
const EPOCHS: &[&str] = &["1", "2", "3", "5"];
const ODD_EPOCHS: &[&str] = &[
    "0",
    "-1",
    "x",
    "1000000000000",
    "18446744073709551615",
    "4294967296",
];

fn train_settings(g: &mut Draw<'_, '_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    for (key, kind) in [("data", "data"), ("net", "net")] {
        if !g.breaks()? {
            let id = reference(g, skeleton, &[kind])?;
            push(out, key, id);
        }
    }
    let losses = ["auto", "mse", "cross_entropy"];
    maybe(g, out, (1, 4), "loss", &losses, &["hinge"])?;
    maybe(g, out, (1, 3), "optimizer", &["sgd", "adam"], &["adamw"])?;
    maybe(
        g,
        out,
        (1, 2),
        "learning_rate",
        LEARNING_RATES,
        ODD_LEARNING_RATES,
    )?;
    // Momentum under adam is refused; written there only when the document breaks.
    let adam = out
        .iter()
        .any(|(key, value)| key == "optimizer" && value == "adam");
    if !adam || g.breaks()? {
        maybe(g, out, (1, 3), "momentum", MOMENTA, ODD_MOMENTA)?;
    }
    maybe(g, out, (1, 2), "batch", BATCHES, ODD_BATCHES)?;
    maybe(g, out, (19, 20), "epochs", EPOCHS, ODD_EPOCHS)?;
    maybe(
        g,
        out,
        (1, 6),
        "target_loss",
        &["0.5", "0.1"],
        &["0", "-1", ".nan"],
    )?;
    maybe(g, out, (1, 6), "patience", &["1", "2"], &["0", "-3"])?;
    maybe(g, out, (1, 6), "l2", &["0", "0.001"], &["-1", ".inf"])?;
    maybe(g, out, (1, 6), "shuffle", &["true", "false"], &["yes", "1"])?;
    maybe(
        g,
        out,
        (1, 5),
        "precision",
        &["f64", "f32"],
        &["f16", "F32"],
    )?;
    maybe(g, out, (1, 6), "seed", &["3"], &["-3"])?;
    unknown(g, out, "importance", "false")
}

const METRICS: &[&str] = &["loss", "accuracy", "log_loss", "mse", "mae", "r2"];

/// One setting a sweep varies, with its list of values.
fn varied(g: &mut Draw<'_, '_>) -> Drawn<String> {
    type Values = fn(&mut Draw<'_, '_>) -> Drawn<String>;
    let settings: &[(&str, Values)] = &[
        ("learning_rate", |g| {
            one_of(g, LEARNING_RATES, ODD_LEARNING_RATES)
        }),
        ("momentum", |g| one_of(g, MOMENTA, ODD_MOMENTA)),
        ("epochs", |g| one_of(g, EPOCHS, ODD_EPOCHS)),
        ("batch", |g| one_of(g, BATCHES, ODD_BATCHES)),
        ("hidden", hidden),
        ("activation", |g| one_of(g, ACTIVATIONS, ODD_ACTIVATIONS)),
        ("optimizer", |g| one_of(g, &["sgd", "adam"], &["adamw"])),
        ("l2", |g| one_of(g, &["0", "0.01"], &["-1"])),
    ];
    // Settings a sweep cannot vary: one that picks the data, one that does not exist.
    let unvaried: &[(&str, Values)] =
        &[("data", |_| Ok("d".into())), ("speed", |_| Ok("1".into()))];
    let pool = if g.breaks()? { unvaried } else { settings };
    let (name, values) = g.u.choose(pool)?;
    Ok(format!("{name}: {}", list(g, 1..=3, *values)?))
}

fn sweep_settings(g: &mut Draw<'_, '_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let from = reference(g, skeleton, &["train"])?;
    push(out, "from", from);
    let vary = match g.breaks()? {
        true => g.u.choose(&["[]", "{}", "x"])?.to_string(),
        false => {
            let mut entries: Vec<String> = (0..g.u.int_in_range(1..=2)?)
                .map(|_| varied(g))
                .collect::<Drawn<_>>()?;
            if !g.breaks()? {
                distinct(&mut entries, |entry| {
                    entry.split(':').next().unwrap_or_default().to_string()
                });
            }
            format!("{{{}}}", entries.join(", "))
        }
    };
    push(out, "vary", vary);
    maybe(
        g,
        out,
        (1, 3),
        "repeat",
        &["1", "2", "3"],
        &["0", "-1", "1000"],
    )?;
    maybe(g, out, (1, 3), "rank_by", METRICS, &["speed"])
}

fn compare_settings(g: &mut Draw<'_, '_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let runs = match g.breaks()? {
        true => "[]".to_string(),
        false => list(g, 1..=3, |g| reference(g, skeleton, &["train", "sweep"]))?,
    };
    push(out, "runs", runs);
    if g.u.ratio(1, 3)? {
        let metrics = list(g, 1..=3, |g| one_of(g, METRICS, &["speed"]))?;
        push(out, "metrics", metrics);
    }
    maybe(
        g,
        out,
        (1, 3),
        "chart",
        &["loss", "metric", "none"],
        &["pie"],
    )?;
    maybe(g, out, (1, 4), "log_scale", &["true", "false"], &["maybe"])
}

/// Where a predict or export writes: usually a new file in the project; sometimes
/// outside it, over something it reads, onto a folder, or a name that is no file.
fn write_path(g: &mut Draw<'_, '_>) -> Drawn<String> {
    // Not a flaw of the document's form, so drawn apart from its breakage: a third of
    // the writes aim where stet must refuse to write.
    let pool: &[&str] = if g.u.ratio(1, 3)? {
        &[
            "../escape.json",
            OUTSIDE_WRITE,
            "link/through.json",
            NAMES[0],
            "doc.md",
            "report.html",
            "sub",
            ".",
            ".stet-project",
            "\"\"",
            "~",
            "null",
            "sub/../x.json",
            ".stet/x",
        ]
    } else {
        &["out.csv", "model.json", "out/deep/model.json", "pred.csv"]
    };
    Ok(g.u.choose(pool)?.to_string())
}

fn predict_settings(g: &mut Draw<'_, '_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let model = reference(g, skeleton, &["train", "sweep"])?;
    push(out, "model", model);
    let file = one_of(g, NAMES, &["missing.csv", "sub", OUTSIDE_SECRET])?;
    push(out, "file", file);
    if g.u.ratio(1, 2)? {
        let write = write_path(g)?;
        push(out, "write", write);
    }
    Ok(())
}

fn export_settings(g: &mut Draw<'_, '_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let model = reference(g, skeleton, &["train", "sweep"])?;
    push(out, "model", model);
    let write = write_path(g)?;
    push(out, "write", write);
    maybe(
        g,
        out,
        (1, 2),
        "format",
        &["json", "onnx"],
        &["pdf", "[onnx]"],
    )
}

/// One fenced step block; its header line, keys, layout and fence may be mutated.
fn block(g: &mut Draw<'_, '_>, kind: &str, id: &str, settings: &Lines) -> Drawn<String> {
    let fence = match g.u.int_in_range(0..=19)? {
        0 => "~~~",
        1 => "````",
        _ => "```",
    };
    let mut lines = vec![format!("{fence}{}", header(g, kind, id)?)];
    for (key, value) in settings {
        let key = match g.breaks()? {
            true if g.u.arbitrary()? => misspell(g, key)?,
            true => "colour".to_string(),
            false => key.clone(),
        };
        lines.push(format!("{key}: {value}"));
    }
    mutate_body(g, &mut lines)?;
    if !g.breaks()? {
        lines.push(fence.to_string());
    }
    if g.breaks()? {
        nest(g, &mut lines)?;
    }
    Ok(lines.join("\n") + "\n\n")
}

/// The info string after the fence: `yaml KIND ID`, or one of the ways it goes wrong.
fn header(g: &mut Draw<'_, '_>, kind: &str, id: &str) -> Drawn<String> {
    if g.u.ratio(1, 20)? {
        return Ok(format!("yaml  {kind}   {id} "));
    }
    if !g.breaks()? {
        return Ok(format!("yaml {kind} {id}"));
    }
    Ok(match g.u.int_in_range(0..=5)? {
        0 => format!("yaml {} {id}", misspell(g, kind)?),
        1 => format!("yaml {kind} {id} extra"),
        2 => format!("yaml {kind} {id}/all"),
        3 => format!("yaml {} {id}", kind.to_uppercase()),
        4 => format!("yaml {kind}"),
        _ => format!("yml {kind} {id}"),
    })
}

/// A word with one letter dropped, doubled or swapped with the next.
fn misspell(g: &mut Draw<'_, '_>, word: &str) -> Drawn<String> {
    let mut chars: Vec<char> = word.chars().collect();
    if chars.len() < 2 {
        return Ok(format!("{word}x"));
    }
    let at = g.u.choose_index(chars.len() - 1)?;
    match g.u.int_in_range(0..=2)? {
        0 => {
            chars.remove(at);
        }
        1 => chars.insert(at, chars[at]),
        _ => chars.swap(at, at + 1),
    }
    Ok(chars.into_iter().collect())
}

/// Near-valid YAML: a repeated key, a tab, an anchor, a list item, a nested map,
/// a line of garbage, or no settings at all.
fn mutate_body(g: &mut Draw<'_, '_>, lines: &mut Vec<String>) -> Drawn<()> {
    if lines.len() < 2 || !g.breaks()? {
        return Ok(());
    }
    let at = 1 + g.u.choose_index(lines.len() - 1)?;
    match g.u.int_in_range(0..=6)? {
        0 => lines.insert(at, lines[at].clone()),
        1 => lines[at].insert(0, '\t'),
        2 => lines[at] = lines[at].replacen(": ", ": &anchor ", 1),
        3 => lines[at].insert_str(0, "- "),
        4 => lines[at] = lines[at].replacen(": ", ":\n  inner: ", 1),
        5 => lines.insert(at, "::: ][ {".into()),
        _ => lines.truncate(1),
    }
    Ok(())
}

/// Puts a block inside a list item or a quote, where a step must not be.
fn nest(g: &mut Draw<'_, '_>, lines: &mut [String]) -> Drawn<()> {
    let (first, rest) = match g.u.arbitrary()? {
        true => ("- ", "  "),
        false => ("> ", "> "),
    };
    for (i, line) in lines.iter_mut().enumerate() {
        line.insert_str(0, if i == 0 { first } else { rest });
    }
    Ok(())
}

fn front_matter(g: &mut Draw<'_, '_>) -> Drawn<String> {
    let mut text = String::from("---\ntitle: A generated experiment\n");
    if g.u.ratio(1, 3)? {
        let seed = one_of(g, &["1", "7"], &["abc", "-1", "[1]"])?;
        text.push_str(&format!("seed: {seed}\n"));
    }
    if g.breaks()? {
        text.push_str("titel: misspelt\n");
    }
    if !g.breaks()? {
        text.push_str("---\n");
    }
    Ok(text)
}

const PROSE: &[&str] = &[
    "Some prose about the next step.\n\n",
    "| a | b |\n| - | - |\n| 1 | 2 |\n\n",
    "<script>alert(1)</script>\n\n",
    "[a link](javascript:alert(1)) and ![a picture](http://example.invalid/p.png)\n\n",
    "```yaml\nplain: code\n```\n\n",
    "```python\nprint('not a step')\n```\n\n",
    "## A heading\n\n",
    "",
];

fn prose(g: &mut Draw<'_, '_>) -> Drawn<&'static str> {
    g.u.choose(PROSE).copied()
}

/// Line ends (LF, CRLF, CR or a mix), a byte-order mark, a missing final newline,
/// a Latin-1 byte.
fn finish(g: &mut Draw<'_, '_>, text: String) -> Drawn<Vec<u8>> {
    let mut text = match g.u.int_in_range(0..=19)? {
        0 => text.replace('\n', "\r\n"),
        1 => text.replace('\n', "\r"),
        2 => {
            let half = text.len() / 2;
            let cut = (half..text.len())
                .find(|&i| text.is_char_boundary(i))
                .unwrap_or(text.len());
            format!("{}{}", &text[..cut].replace('\n', "\r\n"), &text[cut..])
        }
        _ => text,
    };
    if g.u.ratio(1, 15)? {
        text.insert(0, '\u{FEFF}');
    }
    if g.u.ratio(1, 10)? {
        text.truncate(text.trim_end().len());
    }
    let mut bytes = text.into_bytes();
    if g.breaks()? {
        bytes.push(0xE9);
    }
    Ok(bytes)
}
