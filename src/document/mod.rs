//! Markdown → a list of prose pieces and step blocks, each with its source span.
//!
//! A step is a top-level fenced block whose info string is `yaml KIND ID`. Everything
//! else (prose, other code blocks, plain `yaml` blocks) is prose, kept as Markdown
//! source so that the report renders it and so that it never enters a cache key.

pub mod front;
pub(crate) mod names;
pub mod problem;
pub(crate) mod spec;
pub mod yaml;

use std::ops::Range;

use pulldown_cmark::{CodeBlockKind, Event, Options, Parser, Tag, TagEnd};

pub(crate) use front::FrontMatter;
use problem::nearest;
pub use problem::{Decoration, DocumentErrors, Problem};
pub use spec::{StepKind, StepSpec};

/// A parsed document: front matter and the pieces of its body in order.
#[derive(Clone, Debug)]
pub struct Document {
    pub source: String,
    pub(crate) front: FrontMatter,
    pub(crate) pieces: Vec<Piece>,
    /// Ids of step blocks whose info string had a problem: references to them are not
    /// reported again.
    pub(crate) unreadable_ids: Vec<String>,
}

/// A run of prose, or one step.
#[derive(Clone, Debug)]
pub(crate) enum Piece {
    /// Markdown source of the prose between steps.
    Prose(String),
    Step(StepBlock),
}

/// One step block as written: kind, id, raw YAML and where it sits in the source.
#[derive(Clone, Debug)]
pub struct StepBlock {
    pub kind: StepKind,
    pub id: String,
    pub yaml: String,
    /// Byte offset of the YAML text in the document.
    pub(crate) yaml_offset: usize,
    /// Byte range of the info string (`yaml KIND ID`).
    pub(crate) info_span: Range<usize>,
    /// Byte range of the whole fenced block.
    pub span: Range<usize>,
}

impl StepBlock {
    /// The block's YAML with its place in the document, for position-aware parsing.
    pub(crate) fn yaml_block(&self) -> yaml::Block<'_> {
        yaml::Block {
            text: &self.yaml,
            offset: self.yaml_offset,
        }
    }
}

impl Document {
    pub fn steps(&self) -> impl Iterator<Item = &StepBlock> {
        self.pieces.iter().filter_map(|piece| match piece {
            Piece::Step(step) => Some(step),
            Piece::Prose(_) => None,
        })
    }
}

/// Markdown extensions the report supports (GitHub tables and friends).
pub(crate) fn markdown_options() -> Options {
    Options::ENABLE_TABLES
        | Options::ENABLE_STRIKETHROUGH
        | Options::ENABLE_FOOTNOTES
        | Options::ENABLE_TASKLISTS
}

/// The document text as the parser reads it: a leading UTF-8 byte-order mark removed
/// (some editors write one, and it would hide the front matter), and each CR not
/// followed by LF (old Mac line ends) made an LF. That swap keeps every byte where it
/// was, so positions in problems are positions in the file, with the mark zero-width.
pub(crate) fn normalised(source: String) -> String {
    let mut bytes = match source.strip_prefix('\u{FEFF}') {
        Some(rest) => rest.as_bytes().to_vec(),
        None => source.into_bytes(),
    };
    for i in 0..bytes.len() {
        if bytes[i] == b'\r' && bytes.get(i + 1) != Some(&b'\n') {
            bytes[i] = b'\n';
        }
    }
    String::from_utf8(bytes).expect("swapping one ASCII byte for another keeps UTF-8")
}

/// Splits a document into front matter, prose and step blocks. Every problem found is
/// collected rather than stopping at the first; the document is still returned (without
/// the blocks that could not be read) so that its steps can be checked too. Only an
/// empty document gives none.
pub fn parse(source: &str) -> (Option<Document>, Vec<Problem>) {
    let mut problems = Vec::new();
    if source.trim().is_empty() {
        let problem = Problem::new(
            0..0,
            "the document is empty: expected Markdown prose and at least one step block such as ```yaml data NAME",
        );
        return (None, vec![problem]);
    }
    let front_split = front::split(source);
    let front = front::parse(front_split.yaml, &mut problems);
    let body_start = front_split.body_start;
    let mut unreadable_ids = Vec::new();
    let blocks = find_step_blocks(source, body_start, &mut problems, &mut unreadable_ids);

    let mut pieces = Vec::new();
    let mut cursor = body_start;
    for block in blocks {
        push_prose(&mut pieces, &source[cursor..block.span.start]);
        cursor = block.span.end;
        pieces.push(Piece::Step(block));
    }
    push_prose(&mut pieces, &source[cursor..]);

    if problems.is_empty() && !pieces.iter().any(|p| matches!(p, Piece::Step(_))) {
        problems.push(Problem::new(
            body_start..body_start,
            "the document has no steps: expected at least one fenced block with an info string like `yaml data NAME`",
        ));
    }
    let document = Document {
        source: source.to_string(),
        front,
        pieces,
        unreadable_ids,
    };
    (Some(document), problems)
}

fn push_prose(pieces: &mut Vec<Piece>, text: &str) {
    if !text.trim().is_empty() {
        pieces.push(Piece::Prose(text.to_string()));
    }
}

/// State of the fenced block being read.
struct OpenBlock {
    info: String,
    span: Range<usize>,
    text: String,
    text_offset: Option<usize>,
    nested: bool,
}

fn find_step_blocks(
    source: &str,
    body_start: usize,
    problems: &mut Vec<Problem>,
    unreadable_ids: &mut Vec<String>,
) -> Vec<StepBlock> {
    let body = &source[body_start..];
    let mut blocks = Vec::new();
    let mut depth = 0usize;
    let mut open: Option<OpenBlock> = None;
    for (event, range) in Parser::new_ext(body, markdown_options()).into_offset_iter() {
        let range = range.start + body_start..range.end + body_start;
        match event {
            Event::Start(Tag::CodeBlock(CodeBlockKind::Fenced(info))) => {
                open = Some(OpenBlock {
                    info: info.to_string(),
                    span: range,
                    text: String::new(),
                    text_offset: None,
                    nested: depth > 0,
                });
                depth += 1;
            }
            Event::Text(text) if open.is_some() => {
                let block = open.as_mut().expect("checked above");
                block.text_offset.get_or_insert(range.start);
                block.text.push_str(&text);
            }
            Event::End(TagEnd::CodeBlock) => {
                depth -= 1;
                if let Some(block) = open.take() {
                    let id = block.info.split_whitespace().nth(2).map(str::to_string);
                    let before = problems.len();
                    match step_block(source, block, problems) {
                        Some(step) => blocks.push(step),
                        None if problems.len() > before => unreadable_ids.extend(id),
                        None => {}
                    }
                }
            }
            Event::Start(_) => depth += 1,
            Event::End(_) => depth -= 1,
            _ => {}
        }
    }
    blocks
}

/// Turns a fenced block into a step if its info string asks for one.
fn step_block(source: &str, block: OpenBlock, problems: &mut Vec<Problem>) -> Option<StepBlock> {
    let mut words = block.info.split_whitespace();
    if words.next() != Some("yaml") {
        return None;
    }
    let kind_word = words.next()?;
    let info_span = info_span(source, &block.span, &block.info);
    let Some(kind) = StepKind::from_word(kind_word) else {
        let problem = Problem::new(info_span, format!("'{kind_word}' is not a step kind"));
        let kinds = StepKind::ALL.iter().map(|kind| kind.word());
        problems.push(match nearest(kind_word, kinds) {
            Some(suggestion) => problem.with_help(format!("did you mean '{suggestion}'?")),
            None => problem.with_help(format!(
                "the step kinds are: {}",
                StepKind::ALL.map(|kind| kind.word()).join(", ")
            )),
        });
        return None;
    };
    let Some(id) = words.next() else {
        problems.push(
            Problem::new(info_span, format!("the {kind_word} step has no id")).with_help(format!(
                "write `yaml {kind_word} NAME` so later steps can refer to it"
            )),
        );
        return None;
    };
    if let Some(extra) = words.next() {
        problems.push(Problem::new(
            info_span,
            format!("unexpected '{extra}' after the step id '{id}': expected `yaml KIND ID`"),
        ));
        return None;
    }
    if !is_valid_id(id) {
        problems.push(
            Problem::new(info_span, format!("'{id}' is not a valid step id"))
                .with_help("an id starts with a letter and uses letters, digits, '_' and '-'"),
        );
        return None;
    }
    if block.nested {
        problems.push(
            Problem::new(info_span, format!("step '{id}' is inside a list or quote"))
                .with_help("steps must be top-level blocks, not indented"),
        );
        return None;
    }
    let yaml_offset = block
        .text_offset
        .unwrap_or_else(|| content_start(source, &block.span));
    Some(StepBlock {
        kind,
        id: id.to_string(),
        yaml: block.text,
        yaml_offset,
        info_span,
        span: block.span,
    })
}

fn is_valid_id(id: &str) -> bool {
    let mut chars = id.chars();
    chars.next().is_some_and(|c| c.is_ascii_alphabetic())
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
}

/// The byte range of the info string on the opening fence line.
fn info_span(source: &str, span: &Range<usize>, info: &str) -> Range<usize> {
    let fence_line = &source[span.start..content_start(source, span)];
    match fence_line.find(info.trim()) {
        Some(i) => span.start + i..span.start + i + info.trim().len(),
        None => span.start..span.start + fence_line.trim_end().len(),
    }
}

/// Where the line after the opening fence starts.
fn content_start(source: &str, span: &Range<usize>) -> usize {
    source[span.start..span.end]
        .find('\n')
        .map_or(span.end, |i| span.start + i + 1)
}

#[cfg(test)]
mod tests {
    use super::problem::line_and_column;
    use super::*;

    const DOC: &str = "---\ntitle: Test\n---\n# Intro\n\nSome prose.\n\n```yaml data hives\nfile: hives.csv\ntarget: status\n```\n\nMore prose.\n\n```python\nprint(1)\n```\n\n```yaml net small\nhidden: [4]\n```\n";

    fn parsed(source: &str) -> Document {
        let (document, problems) = parse(source);
        assert!(problems.is_empty(), "{problems:?}");
        document.unwrap()
    }

    #[test]
    fn steps_and_prose_come_out_in_order() {
        let doc = parsed(DOC);
        let kinds: Vec<&str> = doc
            .pieces
            .iter()
            .map(|p| match p {
                Piece::Prose(_) => "prose",
                Piece::Step(s) => s.id.as_str(),
            })
            .collect();
        assert_eq!(kinds, ["prose", "hives", "prose", "small"]);
        let hives = doc.steps().next().unwrap();
        assert_eq!(hives.kind, StepKind::Data);
        assert_eq!(hives.yaml, "file: hives.csv\ntarget: status\n");
        assert_eq!(line_and_column(DOC, hives.yaml_offset), (9, 1));
        assert_eq!(doc.front.title.as_deref(), Some("Test"));
    }

    #[test]
    fn other_code_blocks_stay_in_the_prose() {
        let doc = parsed(DOC);
        let Piece::Prose(prose) = &doc.pieces[2] else {
            panic!()
        };
        assert!(prose.contains("print(1)"));
    }

    #[test]
    fn a_misspelt_kind_suggests_the_nearest() {
        let problems = parse("```yaml trian base\nepochs: 3\n```\n").1;
        assert_eq!(problems.len(), 1);
        assert!(problems[0].message.contains("'trian' is not a step kind"));
        assert_eq!(problems[0].help.as_deref(), Some("did you mean 'train'?"));
    }

    #[test]
    fn a_step_without_an_id_is_an_error() {
        let problems = parse("text\n\n```yaml data\nfile: x.csv\n```\n").1;
        assert!(problems[0].message.contains("no id"));
        assert_eq!(
            line_and_column("text\n\n```yaml data\n", problems[0].span.start),
            (3, 4)
        );
    }

    #[test]
    fn plain_yaml_blocks_are_not_steps() {
        let problems = parse("```yaml\na: 1\n```\n").1;
        assert!(problems[0].message.contains("no steps"));
    }

    #[test]
    fn an_empty_document_is_an_error() {
        let (document, problems) = parse("  \n");
        assert!(document.is_none());
        assert!(problems[0].message.contains("empty"));
    }

    #[test]
    fn a_byte_order_mark_and_lone_carriage_returns_are_normalised() {
        let source = "\u{FEFF}---\rtitle: T\r---\r\r```yaml net n\r\nhidden: [2]\r```\r";
        let text = normalised(source.to_string());
        assert_eq!(
            text,
            "---\ntitle: T\n---\n\n```yaml net n\r\nhidden: [2]\n```\n"
        );
        let doc = parsed(&text);
        assert_eq!(doc.front.title.as_deref(), Some("T"));
        assert_eq!(doc.steps().count(), 1);
    }

    #[test]
    fn a_step_inside_a_list_is_refused() {
        let problems = parse("- item\n\n  ```yaml data d\n  file: x.csv\n  ```\n").1;
        assert!(
            problems[0].message.contains("inside a list"),
            "{problems:?}"
        );
    }
}
