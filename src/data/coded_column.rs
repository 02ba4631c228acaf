//! One column of a table kept compactly: each distinct cell text once, and per row
//! the number (code) of its text, stored in the narrowest integer width that holds
//! every code.
//!
//! CSV columns repeat a few values (categories, flags, pixel levels) over many
//! rows, so a `String` per cell costs many times the file's size, while codes cost
//! about a byte per cell; encoding can also parse each distinct text once.

use std::hash::BuildHasher;

use hashbrown::{DefaultHashBuilder, HashTable};

/// A column's distinct texts, in order of first appearance, and each row's code.
#[derive(Clone, Debug, Default)]
pub(crate) struct CodedColumn {
    /// Every distinct text, one after another.
    text: String,
    /// Where each distinct text ends in `text`; text `i` starts where `i - 1` ends.
    ends: Vec<usize>,
    codes: Codes,
}

impl CodedColumn {
    /// Number of distinct texts; codes run from 0 to this minus one.
    pub(crate) fn distinct(&self) -> usize {
        self.ends.len()
    }

    /// Number of rows.
    pub(crate) fn rows(&self) -> usize {
        self.codes.len()
    }

    /// The code of row `row`'s text.
    pub(crate) fn code(&self, row: usize) -> usize {
        self.codes.get(row)
    }

    /// The distinct text numbered `code`.
    pub(crate) fn text(&self, code: usize) -> &str {
        let start = if code == 0 { 0 } else { self.ends[code - 1] };
        &self.text[start..self.ends[code]]
    }

    /// Row `row`'s text.
    pub(crate) fn cell(&self, row: usize) -> &str {
        self.text(self.code(row))
    }

    /// The distinct texts in code order.
    pub(crate) fn texts(&self) -> impl Iterator<Item = &str> {
        (0..self.distinct()).map(|code| self.text(code))
    }
}

/// Codes in the narrowest width that holds the largest: a column with at most 256
/// distinct texts costs one byte per row.
#[derive(Clone, Debug)]
enum Codes {
    U8(Vec<u8>),
    U16(Vec<u16>),
    U32(Vec<u32>),
}

impl Default for Codes {
    fn default() -> Codes {
        Codes::U8(Vec::new())
    }
}

impl Codes {
    fn len(&self) -> usize {
        match self {
            Codes::U8(codes) => codes.len(),
            Codes::U16(codes) => codes.len(),
            Codes::U32(codes) => codes.len(),
        }
    }

    fn get(&self, row: usize) -> usize {
        match self {
            Codes::U8(codes) => usize::from(codes[row]),
            Codes::U16(codes) => usize::from(codes[row]),
            Codes::U32(codes) => codes[row] as usize,
        }
    }

    /// Appends `code`, first widening every code when it does not fit.
    fn push(&mut self, code: u32) {
        if let Codes::U8(codes) = self
            && u8::try_from(code).is_err()
        {
            *self = Codes::U16(codes.iter().map(|&c| u16::from(c)).collect());
        }
        if let Codes::U16(codes) = self
            && u16::try_from(code).is_err()
        {
            *self = Codes::U32(codes.iter().map(|&c| u32::from(c)).collect());
        }
        match self {
            Codes::U8(codes) => codes.push(code as u8),
            Codes::U16(codes) => codes.push(code as u16),
            Codes::U32(codes) => codes.push(code),
        }
    }
}

/// Why a cell could not be added to a column.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum PushError {
    /// The cell's bytes are not UTF-8 text.
    InvalidUtf8,
    /// The column already holds 2³² distinct texts, the most a code can number.
    TooManyDistinct,
}

/// Builds a [`CodedColumn`] row by row, finding each cell's code by hash.
#[derive(Default)]
pub(super) struct ColumnBuilder {
    column: CodedColumn,
    /// The codes of the distinct texts, hashed by their bytes.
    lookup: HashTable<u32>,
    hasher: DefaultHashBuilder,
}

impl ColumnBuilder {
    /// Appends a row whose cell holds `bytes`. Only a text not seen before is checked
    /// for UTF-8 and stored; a repeated one costs a hash look-up.
    pub(super) fn push(&mut self, bytes: &[u8]) -> Result<(), PushError> {
        let column = &mut self.column;
        let hash = self.hasher.hash_one(bytes);
        let found = self
            .lookup
            .find(hash, |&code| column.text(code as usize).as_bytes() == bytes);
        let code = match found {
            Some(&code) => code,
            None => {
                let text = std::str::from_utf8(bytes).map_err(|_| PushError::InvalidUtf8)?;
                let code =
                    u32::try_from(column.distinct()).map_err(|_| PushError::TooManyDistinct)?;
                column.text.push_str(text);
                column.ends.push(column.text.len());
                let hasher = &self.hasher;
                self.lookup.insert_unique(hash, code, |&code| {
                    hasher.hash_one(column.text(code as usize).as_bytes())
                });
                code
            }
        };
        column.codes.push(code);
        Ok(())
    }

    /// The column, without the look-up table, which reading alone needs.
    pub(super) fn finish(self) -> CodedColumn {
        let mut column = self.column;
        column.text.shrink_to_fit();
        column.ends.shrink_to_fit();
        column
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn build(cells: &[&str]) -> CodedColumn {
        let mut builder = ColumnBuilder::default();
        for cell in cells {
            builder.push(cell.as_bytes()).unwrap();
        }
        builder.finish()
    }

    #[test]
    fn repeated_texts_share_a_code_and_cells_read_back_exactly() {
        let cells = ["north", " 1.50", "", "north", "süd", ""];
        let column = build(&cells);
        assert_eq!(column.distinct(), 4);
        assert_eq!(
            column.texts().collect::<Vec<_>>(),
            vec!["north", " 1.50", "", "süd"]
        );
        let codes: Vec<usize> = (0..6).map(|r| column.code(r)).collect();
        assert_eq!(codes, vec![0, 1, 2, 0, 3, 2]);
        for (row, cell) in cells.iter().enumerate() {
            assert_eq!(column.cell(row), *cell);
        }
    }

    #[test]
    fn codes_widen_as_the_dictionary_grows() {
        for distinct in [256, 257, 65_536, 65_537] {
            let cells: Vec<String> = (0..distinct).map(|i| i.to_string()).collect();
            let mut builder = ColumnBuilder::default();
            for cell in cells.iter().chain(&cells[..3]) {
                builder.push(cell.as_bytes()).unwrap();
            }
            let column = builder.finish();
            let width = match column.codes {
                Codes::U8(_) => 8,
                Codes::U16(_) => 16,
                Codes::U32(_) => 32,
            };
            let expected = match distinct {
                256 => 8,
                257 | 65_536 => 16,
                _ => 32,
            };
            assert_eq!(width, expected, "{distinct} distinct texts");
            assert_eq!(column.distinct(), distinct);
            for (row, cell) in cells.iter().enumerate() {
                assert_eq!(column.cell(row), cell);
            }
            // The repeats at the end found the codes given before widening.
            assert_eq!(column.code(distinct + 2), 2);
            assert_eq!(column.cell(distinct + 1), "1");
        }
    }

    #[test]
    fn invalid_utf8_is_refused_and_not_stored() {
        let mut builder = ColumnBuilder::default();
        builder.push(b"ok").unwrap();
        assert_eq!(builder.push(b"\xff\xfe"), Err(PushError::InvalidUtf8));
        let column = builder.finish();
        assert_eq!(column.texts().collect::<Vec<_>>(), vec!["ok"]);
    }
}
