//! Small CSV files: numeric and text columns of 10 to 60 rows, with a few cells or rows
//! broken on purpose (gaps, `inf`, quotes, ragged rows) and sometimes an empty file, a
//! header alone, a byte-order mark or CRLF line ends.

use arbitrary::Unstructured;

/// The files a project may hold, in the order they are made (the oracle makes `sub` a
/// folder even when no file goes in it, so `file:` and `write:` can name a folder).
pub const NAMES: &[&str] = &["a.csv", "b.csv", "sub/c.csv"];

/// What a document needs to know of a CSV file to name its columns.
#[derive(Clone, Debug)]
pub struct Table {
    pub name: String,
    pub columns: Vec<String>,
}

/// Column names; a flawed header repeats one or leaves one empty.
const COLUMN_NAMES: &[&str] = &[
    "x",
    "y",
    "size",
    "weight",
    "colour",
    "label",
    "status",
    "temp",
    "ünïcode",
];

/// Texts that break a cell in one of the ways a real export does.
const BROKEN_CELLS: &[&str] = &[
    "",
    "inf",
    "-inf",
    "NaN",
    "1e308",
    "-1e308",
    "\"quoted, with a comma\"",
    "\"two\nlines\"",
    "\"\"",
    "é",
    " 3 ",
    "1,5",
    "0x10",
    "\"unclosed",
];

#[derive(Clone, Copy)]
enum Column {
    /// Real numbers around zero.
    Numeric,
    /// Whole numbers below the bound: a numeric class label.
    Classes(u64),
    /// A few words: one-hot encoded as an input, classes as a target.
    Words,
    Constant,
}

/// One CSV file named `name` and the columns its header lists.
pub fn csv_file(u: &mut Unstructured<'_>, name: &str) -> arbitrary::Result<(Table, Vec<u8>)> {
    let columns = header(u)?;
    let table = Table {
        name: name.to_string(),
        columns: columns.clone(),
    };
    let shape = u.int_in_range(0..=29)?;
    if shape == 0 {
        return Ok((table, Vec::new()));
    }
    let mut rows = vec![columns];
    if shape > 1 {
        rows.extend(body(u, rows[0].len())?);
    }
    let line_end = if u.ratio(1, 5)? { "\r\n" } else { "\n" };
    let mut text = String::new();
    if u.ratio(1, 10)? {
        text.push('\u{FEFF}');
    }
    for row in rows {
        text.push_str(&row.join(","));
        text.push_str(line_end);
    }
    Ok((table, text.into_bytes()))
}

/// Two to five distinct column names; one header in twenty repeats a name or leaves one
/// empty.
fn header(u: &mut Unstructured<'_>) -> arbitrary::Result<Vec<String>> {
    let mut pool: Vec<&str> = COLUMN_NAMES.to_vec();
    let mut columns = Vec::new();
    for _ in 0..u.int_in_range(2..=5)? {
        columns.push(pool.remove(u.choose_index(pool.len())?).to_string());
    }
    if u.ratio(1, 20)? {
        let last = columns.len() - 1;
        columns[last] = match u.arbitrary()? {
            true => columns[0].clone(),
            false => String::new(),
        };
    }
    Ok(columns)
}

/// The rows under the header, with a few cells and rows broken.
fn body(u: &mut Unstructured<'_>, width: usize) -> arbitrary::Result<Vec<Vec<String>>> {
    let kinds: Vec<Column> = (0..width)
        .map(|_| {
            Ok(match u.int_in_range(0..=5)? {
                0..=2 => Column::Numeric,
                3 => Column::Classes(u.int_in_range(2..=4)?),
                4 => Column::Words,
                _ => Column::Constant,
            })
        })
        .collect::<arbitrary::Result<_>>()?;
    // The bulk of the values comes from a small generator seeded once, so the fuzzer's
    // bytes go to the file's shape and its broken cells, not to every digit.
    let mut values = SplitMix(u.arbitrary()?);
    let row_count = u.int_in_range(10..=60)?;
    let mut rows: Vec<Vec<String>> = (0..row_count)
        .map(|_| kinds.iter().map(|&kind| cell(kind, &mut values)).collect())
        .collect();
    let broken = if u.ratio(1, 6)? {
        u.int_in_range(1..=3)?
    } else {
        0
    };
    for _ in 0..broken {
        let row = u.choose_index(rows.len())?;
        let column = u.choose_index(width)?;
        rows[row][column] = u.choose(BROKEN_CELLS)?.to_string();
    }
    if u.ratio(1, 25)? {
        let row = u.choose_index(rows.len())?;
        if u.arbitrary()? {
            rows[row].pop();
        } else {
            rows[row].push("extra".into());
        }
    }
    Ok(rows)
}

fn cell(kind: Column, values: &mut SplitMix) -> String {
    match kind {
        Column::Numeric => format!("{:.3}", values.unit() * 10.0 - 5.0),
        Column::Classes(bound) => (values.next() % bound).to_string(),
        Column::Words => ["red", "green", "blue"][(values.next() % 3) as usize].to_string(),
        Column::Constant => "1".to_string(),
    }
}

/// SplitMix64 (Steele, Lea and Flood, 2014): a tiny generator for cell values.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// A number in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}
