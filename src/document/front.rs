//! The optional YAML front matter between `---` lines at the very top of a document.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::problem::Problem;
use super::yaml::{self, Block};

/// Document-wide settings and facts shown in the report header.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "front_matter")]
pub(crate) struct FrontMatter {
    pub(crate) title: Option<String>,
    pub(crate) author: Option<String>,
    /// The seed every step uses unless it sets its own.
    pub(crate) seed: Option<u64>,
    pub(crate) notes: Option<String>,
}

/// Where the front matter's YAML sits and where the Markdown body begins.
pub struct Split<'a> {
    pub yaml: Option<Block<'a>>,
    pub(crate) body_start: usize,
}

/// Finds front matter: `---` on the first line, closed by a line of `---` or `...`.
pub fn split(source: &str) -> Split<'_> {
    let no_front = Split {
        yaml: None,
        body_start: 0,
    };
    let Some(first_line_end) = source.find('\n') else {
        return no_front;
    };
    if source[..first_line_end].trim_end() != "---" {
        return no_front;
    }
    let yaml_start = first_line_end + 1;
    let mut offset = yaml_start;
    for line in source[yaml_start..].split_inclusive('\n') {
        let bare = line.trim_end();
        if bare == "---" || bare == "..." {
            return Split {
                yaml: Some(Block {
                    text: &source[yaml_start..offset],
                    offset: yaml_start,
                }),
                body_start: offset + line.len(),
            };
        }
        offset += line.len();
    }
    no_front
}

/// Parses the front matter, reporting problems at their place in the document.
pub(crate) fn parse(block: Option<Block<'_>>, problems: &mut Vec<Problem>) -> FrontMatter {
    let Some(block) = block else {
        return FrontMatter::default();
    };
    if block.text.trim().is_empty() {
        return FrontMatter::default();
    }
    yaml::deserialize(block, problems).unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn front_matter_is_read_from_the_top_only() {
        let source = "---\ntitle: Hives\nseed: 7\n---\n# Body\n";
        let found = split(source);
        let mut problems = Vec::new();
        let front = parse(found.yaml, &mut problems);
        assert!(problems.is_empty());
        assert_eq!(front.title.as_deref(), Some("Hives"));
        assert_eq!(front.seed, Some(7));
        assert_eq!(&source[found.body_start..], "# Body\n");
    }

    #[test]
    fn a_rule_later_in_the_document_is_not_front_matter() {
        let source = "# Title\n---\ntitle: x\n---\n";
        assert!(split(source).yaml.is_none());
    }

    #[test]
    fn an_unknown_front_matter_key_points_at_its_line() {
        let source = "---\ntitle: Hives\nsede: 7\n---\n";
        let mut problems = Vec::new();
        parse(split(source).yaml, &mut problems);
        assert_eq!(problems.len(), 1);
        assert!(problems[0].message.contains("sede"), "{:?}", problems[0]);
        assert_eq!(problems[0].help.as_deref(), Some("did you mean 'seed'?"));
        let (line, _) = super::super::problem::line_and_column(source, problems[0].span.start);
        assert_eq!(line, 3);
    }
}
