//! The document grammar: front matter (sometimes), prose, and step blocks of every kind
//! whose settings are mostly valid, sometimes near-valid (a misspelt kind, id or key, a
//! wrong type, an out-of-range number, a YAML tag, deep nesting) and sometimes broken;
//! references that resolve, dangle, name another kind or name an unreadable block; and
//! then line ends, a byte-order mark or a stray Latin-1 byte over the whole text.

use arbitrary::Unstructured;

use super::OUTSIDE;
use super::csv_files::{NAMES, Table};

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

/// A whole document that reads the given tables.
pub fn document(u: &mut Unstructured<'_>, tables: &[Table]) -> Drawn<Vec<u8>> {
    let skeleton = skeleton(u)?;
    let mut text = String::new();
    if u.ratio(1, 2)? {
        text.push_str(&front_matter(u)?);
    }
    text.push_str("# A generated experiment\n\n");
    for (kind, id) in &skeleton {
        text.push_str(prose(u)?);
        let settings = settings(u, kind, &skeleton, tables)?;
        text.push_str(&block(u, kind, id, &settings)?);
    }
    finish(u, text)
}

fn skeleton(u: &mut Unstructured<'_>) -> Drawn<Skeleton> {
    let mut steps = Skeleton::new();
    for (kind, ids, count) in KINDS {
        let count = u.int_in_range(count.clone())?;
        steps.extend(ids.iter().take(count).map(|id| (*kind, id.to_string())));
    }
    if u.ratio(1, 6)? {
        let (a, b) = (u.choose_index(steps.len())?, u.choose_index(steps.len())?);
        steps.swap(a, b);
    }
    if u.ratio(1, 12)? {
        let copied = steps[u.choose_index(steps.len())?].1.clone();
        let kind = u.choose(KINDS)?.0;
        steps.push((kind, copied));
    }
    Ok(steps)
}

/// Usually one of `usual`, now and then one of `odd`.
fn one_of(u: &mut Unstructured<'_>, usual: &[&str], odd: &[&str]) -> Drawn<String> {
    let pool = if !odd.is_empty() && u.ratio(1, 8)? {
        odd
    } else {
        usual
    };
    Ok(u.choose(pool)?.to_string())
}

/// A YAML flow list of `count` values drawn by `item`.
fn list(
    u: &mut Unstructured<'_>,
    count: std::ops::RangeInclusive<usize>,
    mut item: impl FnMut(&mut Unstructured<'_>) -> Drawn<String>,
) -> Drawn<String> {
    let items: Vec<String> = (0..u.int_in_range(count)?)
        .map(|_| item(u))
        .collect::<Drawn<_>>()?;
    Ok(format!("[{}]", items.join(", ")))
}

/// An id of a step of one of `kinds`; sometimes one that dangles or names another kind.
/// A block whose header is broken keeps its id here, so references to it are drawn too.
fn reference(u: &mut Unstructured<'_>, skeleton: &Skeleton, kinds: &[&str]) -> Drawn<String> {
    let (fitting, other): (Vec<_>, Vec<_>) = skeleton.iter().partition(|(k, _)| kinds.contains(k));
    let pick = |u: &mut Unstructured<'_>, steps: &[&(&str, String)]| -> Drawn<Option<String>> {
        Ok(match steps {
            [] => None,
            _ => Some(u.choose(steps)?.1.clone()),
        })
    };
    let chosen = match u.int_in_range(0..=11)? {
        0 => Some("nope".to_string()),
        1 => pick(u, &fitting)?.map(|id| format!("{id}x")),
        2 => pick(u, &other)?,
        _ => pick(u, &fitting)?,
    };
    Ok(chosen.unwrap_or_else(|| "nope".into()))
}

/// The settings of one block as (key, YAML value) lines.
fn settings(
    u: &mut Unstructured<'_>,
    kind: &str,
    skeleton: &Skeleton,
    tables: &[Table],
) -> Drawn<Vec<(String, String)>> {
    let mut out = Vec::new();
    match kind {
        "data" => data_settings(u, tables, &mut out)?,
        "net" => net_settings(u, &mut out)?,
        "train" => train_settings(u, skeleton, &mut out)?,
        "sweep" => sweep_settings(u, skeleton, &mut out)?,
        "compare" => compare_settings(u, skeleton, &mut out)?,
        "predict" => predict_settings(u, skeleton, &mut out)?,
        _ => export_settings(u, skeleton, &mut out)?,
    }
    Ok(out)
}

type Lines = Vec<(String, String)>;

fn push(out: &mut Lines, key: &str, value: String) {
    out.push((key.to_string(), value));
}

/// Adds `key` with a value from `usual` or `odd` in `numerator` of `denominator` blocks.
fn maybe(
    u: &mut Unstructured<'_>,
    out: &mut Lines,
    (numerator, denominator): (u8, u8),
    key: &str,
    usual: &[&str],
    odd: &[&str],
) -> Drawn<()> {
    if u.ratio(numerator, denominator)? {
        let value = one_of(u, usual, odd)?;
        push(out, key, value);
    }
    Ok(())
}

fn data_settings(u: &mut Unstructured<'_>, tables: &[Table], out: &mut Lines) -> Drawn<()> {
    let names: Vec<&str> = tables.iter().map(|t| t.name.as_str()).collect();
    let file = one_of(
        u,
        &names,
        &[
            "missing.csv",
            "../secret.csv",
            "@OUTSIDE@/secret.csv",
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
    if !u.ratio(1, 20)? {
        let target = match columns.as_slice() {
            [] => "y".to_string(),
            _ if u.ratio(1, 10)? => list(u, 1..=2, |u| Ok(u.choose(&columns)?.to_string()))?,
            _ => one_of(u, &columns, &["nope", "5", "[]", "X"])?,
        };
        push(out, "target", target);
    }
    if !columns.is_empty() && u.ratio(1, 4)? {
        let inputs = match u.ratio(1, 8)? {
            true => u.choose(&["[]", "[nope]", "x"])?.to_string(),
            false => list(u, 1..=3, |u| Ok(u.choose(&columns)?.to_string()))?,
        };
        push(out, "inputs", inputs);
    }
    maybe(u, out, (1, 3), "task", &["classify", "regress"], &["cluster", "[classify]"])?;
    maybe(u, out, (1, 3), "scale", &["standard", "minmax", "none"], &["z", "!!str none"])?;
    maybe(u, out, (1, 3), "missing", &["error", "drop"], &["skip"])?;
    let holdout = ["0.2", "0.25", "0.5"];
    maybe(u, out, (1, 2), "holdout", &holdout, &["0", "1", "-0.1", "1.5", "x", ".nan"])?;
    maybe(u, out, (1, 4), "folds", &["2", "3", "5"], &["0", "1", "100", "-2"])?;
    maybe(u, out, (1, 5), "seed", &["1", "42"], &["-1", "1e30", "18446744073709551616"])?;
    maybe(u, out, (1, 30), "validation", &["0.2"], &[])
}

/// Widths for `hidden`: small lists, and now and then a broken or deeply nested one.
fn hidden(u: &mut Unstructured<'_>) -> Drawn<String> {
    if u.ratio(1, 20)? {
        let depth = u.int_in_range(2..=40)?;
        return Ok(format!("{}2{}", "[".repeat(depth), "]".repeat(depth)));
    }
    one_of(
        u,
        &["[3]", "[4, 2]", "[8]", "[]", "[2, 2, 2]", "[5]"],
        &["[0]", "[5000]", "x", "[[2]]", "[-1]", "[4096]", "3", "[2.5]", "{a: 1}"],
    )
}

const ACTIVATIONS: &[&str] = &["sigmoid", "tanh", "relu", "leaky_relu", "linear"];
const ODD_ACTIVATIONS: &[&str] = &["tahn", "[tanh]", "!tanh", "softmax", "!!binary aGk="];

fn net_settings(u: &mut Unstructured<'_>, out: &mut Lines) -> Drawn<()> {
    if u.ratio(3, 4)? {
        let widths = hidden(u)?;
        push(out, "hidden", widths);
    }
    maybe(u, out, (1, 2), "activation", ACTIVATIONS, ODD_ACTIVATIONS)?;
    let outputs = ["auto", "sigmoid", "softmax", "linear", "tanh"];
    maybe(u, out, (1, 3), "output", &outputs, &["relu", "none"])?;
    maybe(u, out, (1, 3), "init", &["xavier", "he", "uniform"], &["zeros"])
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

fn train_settings(u: &mut Unstructured<'_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    for (key, kind) in [("data", "data"), ("net", "net")] {
        if !u.ratio(1, 20)? {
            let id = reference(u, skeleton, &[kind])?;
            push(out, key, id);
        }
    }
    let losses = ["auto", "mse", "cross_entropy"];
    maybe(u, out, (1, 4), "loss", &losses, &["hinge"])?;
    maybe(u, out, (1, 3), "optimizer", &["sgd", "adam"], &["adamw"])?;
    maybe(u, out, (1, 2), "learning_rate", LEARNING_RATES, ODD_LEARNING_RATES)?;
    maybe(u, out, (1, 3), "momentum", MOMENTA, ODD_MOMENTA)?;
    maybe(u, out, (1, 2), "batch", BATCHES, ODD_BATCHES)?;
    maybe(u, out, (19, 20), "epochs", EPOCHS, ODD_EPOCHS)?;
    maybe(u, out, (1, 6), "target_loss", &["0.5", "0.1"], &["0", "-1", ".nan"])?;
    maybe(u, out, (1, 6), "patience", &["1", "2"], &["0", "-3"])?;
    maybe(u, out, (1, 6), "l2", &["0", "0.001"], &["-1", ".inf"])?;
    maybe(u, out, (1, 6), "shuffle", &["true", "false"], &["yes", "1"])?;
    maybe(u, out, (1, 5), "precision", &["f64", "f32"], &["f16", "F32"])?;
    maybe(u, out, (1, 6), "seed", &["3"], &["-3"])?;
    maybe(u, out, (1, 30), "importance", &["false"], &[])
}

const METRICS: &[&str] = &["loss", "accuracy", "log_loss", "mse", "mae", "r2"];

/// One setting a sweep varies, with its list of values.
fn varied(u: &mut Unstructured<'_>) -> Drawn<String> {
    type Values = fn(&mut Unstructured<'_>) -> Drawn<String>;
    let settings: &[(&str, Values)] = &[
        ("learning_rate", |u| one_of(u, LEARNING_RATES, ODD_LEARNING_RATES)),
        ("momentum", |u| one_of(u, MOMENTA, ODD_MOMENTA)),
        ("epochs", |u| one_of(u, EPOCHS, ODD_EPOCHS)),
        ("batch", |u| one_of(u, BATCHES, ODD_BATCHES)),
        ("hidden", hidden),
        ("activation", |u| one_of(u, ACTIVATIONS, ODD_ACTIVATIONS)),
        ("optimizer", |u| one_of(u, &["sgd", "adam"], &["adamw"])),
        ("l2", |u| one_of(u, &["0", "0.01"], &["-1"])),
        ("data", |u| one_of(u, &["d"], &[])),
        ("speed", |u| one_of(u, &["1"], &[])),
    ];
    let (name, values) = u.choose(settings)?;
    Ok(format!("{name}: {}", list(u, 1..=3, *values)?))
}

fn sweep_settings(u: &mut Unstructured<'_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let from = reference(u, skeleton, &["train"])?;
    push(out, "from", from);
    let vary = match u.ratio(1, 12)? {
        true => u.choose(&["[]", "{}", "x"])?.to_string(),
        false => {
            let entries: Vec<String> = (0..u.int_in_range(1..=2)?)
                .map(|_| varied(u))
                .collect::<Drawn<_>>()?;
            format!("{{{}}}", entries.join(", "))
        }
    };
    push(out, "vary", vary);
    maybe(u, out, (1, 3), "repeat", &["1", "2", "3"], &["0", "-1", "1000"])?;
    maybe(u, out, (1, 3), "rank_by", METRICS, &["speed"])
}

fn compare_settings(u: &mut Unstructured<'_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let runs = match u.ratio(1, 12)? {
        true => "[]".to_string(),
        false => list(u, 1..=3, |u| reference(u, skeleton, &["train", "sweep"]))?,
    };
    push(out, "runs", runs);
    if u.ratio(1, 3)? {
        let metrics = list(u, 0..=3, |u| one_of(u, METRICS, &["speed"]))?;
        push(out, "metrics", metrics);
    }
    maybe(u, out, (1, 3), "chart", &["loss", "metric", "none"], &["pie"])?;
    maybe(u, out, (1, 4), "log_scale", &["true", "false"], &["maybe"])
}

/// Where a predict or export writes: usually a new file in the project; sometimes
/// outside it, over something it reads, onto a folder, or a name that is no file.
fn write_path(u: &mut Unstructured<'_>) -> Drawn<String> {
    one_of(
        u,
        &["out.csv", "model.json", "out/deep/model.json", "pred.csv"],
        &[
            "../escape.json",
            &format!("{OUTSIDE}/abs.json"),
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
        ],
    )
}

fn predict_settings(u: &mut Unstructured<'_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let model = reference(u, skeleton, &["train"])?;
    push(out, "model", model);
    let file = one_of(u, NAMES, &["missing.csv", "sub", "@OUTSIDE@/secret.csv"])?;
    push(out, "file", file);
    if u.ratio(1, 2)? {
        let write = write_path(u)?;
        push(out, "write", write);
    }
    Ok(())
}

fn export_settings(u: &mut Unstructured<'_>, skeleton: &Skeleton, out: &mut Lines) -> Drawn<()> {
    let model = reference(u, skeleton, &["train"])?;
    push(out, "model", model);
    let write = write_path(u)?;
    push(out, "write", write);
    maybe(u, out, (1, 20), "format", &["onnx"], &[])
}

/// One fenced step block; its header line, keys, layout and fence may be mutated.
fn block(u: &mut Unstructured<'_>, kind: &str, id: &str, settings: &Lines) -> Drawn<String> {
    let fence = one_of(u, &["```"], &["~~~", "````"])?;
    let mut lines = vec![format!("{fence}{}", header(u, kind, id)?)];
    for (key, value) in settings {
        let key = match u.int_in_range(0..=39)? {
            0 => misspell(u, key)?,
            1 => "colour".to_string(),
            _ => key.clone(),
        };
        lines.push(format!("{key}: {value}"));
    }
    mutate_body(u, &mut lines)?;
    if !u.ratio(1, 40)? {
        lines.push(fence);
    }
    if u.ratio(1, 25)? {
        nest(u, &mut lines)?;
    }
    Ok(lines.join("\n") + "\n\n")
}

/// The info string after the fence: `yaml KIND ID`, or one of the ways it goes wrong.
fn header(u: &mut Unstructured<'_>, kind: &str, id: &str) -> Drawn<String> {
    Ok(match u.int_in_range(0..=39)? {
        0 => format!("yaml {} {id}", misspell(u, kind)?),
        1 => format!("yaml {kind} {id} extra"),
        2 => format!("yaml {kind} {id}/all"),
        3 => format!("yaml {} {id}", kind.to_uppercase()),
        4 => format!("yaml {kind}"),
        5 => format!("yml {kind} {id}"),
        6 => format!("yaml  {kind}   {id} "),
        _ => format!("yaml {kind} {id}"),
    })
}

/// A word with one letter dropped, doubled or swapped with the next.
fn misspell(u: &mut Unstructured<'_>, word: &str) -> Drawn<String> {
    let mut chars: Vec<char> = word.chars().collect();
    if chars.len() < 2 {
        return Ok(format!("{word}x"));
    }
    let at = u.choose_index(chars.len() - 1)?;
    match u.int_in_range(0..=2)? {
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
fn mutate_body(u: &mut Unstructured<'_>, lines: &mut Vec<String>) -> Drawn<()> {
    if lines.len() < 2 || !u.ratio(1, 6)? {
        return Ok(());
    }
    let at = 1 + u.choose_index(lines.len() - 1)?;
    match u.int_in_range(0..=6)? {
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
fn nest(u: &mut Unstructured<'_>, lines: &mut [String]) -> Drawn<()> {
    let (first, rest) = match u.arbitrary()? {
        true => ("- ", "  "),
        false => ("> ", "> "),
    };
    for (i, line) in lines.iter_mut().enumerate() {
        line.insert_str(0, if i == 0 { first } else { rest });
    }
    Ok(())
}

fn front_matter(u: &mut Unstructured<'_>) -> Drawn<String> {
    let mut text = String::from("---\ntitle: A generated experiment\n");
    if u.ratio(1, 3)? {
        let seed = one_of(u, &["1", "7"], &["abc", "-1", "[1]"])?;
        text.push_str(&format!("seed: {seed}\n"));
    }
    if u.ratio(1, 10)? {
        text.push_str("titel: misspelt\n");
    }
    if !u.ratio(1, 20)? {
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

fn prose(u: &mut Unstructured<'_>) -> Drawn<&'static str> {
    u.choose(PROSE).copied()
}

/// Line ends (LF, CRLF, CR or a mix), a byte-order mark, a missing final newline,
/// a Latin-1 byte.
fn finish(u: &mut Unstructured<'_>, text: String) -> Drawn<Vec<u8>> {
    let mut text = match u.int_in_range(0..=11)? {
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
    if u.ratio(1, 15)? {
        text.insert(0, '\u{FEFF}');
    }
    if u.ratio(1, 10)? {
        text.truncate(text.trim_end().len());
    }
    let mut bytes = text.into_bytes();
    if u.ratio(1, 60)? {
        bytes.push(0xE9);
    }
    Ok(bytes)
}
