//! The JSON Schema for editors (`stet schema`, `schema/stet-steps.json`): the committed
//! file is what the command prints, and the demo documents' blocks fit it.

mod common;

use std::path::Path;

use jsonschema::Validator;
use serde_json::{Value, json};
use stet::document::{front, parse};

/// The committed schema, as a JSON value.
fn committed_schema() -> Value {
    let text = std::fs::read_to_string(common::project().join("schema/stet-steps.json"))
        .expect("schema/stet-steps.json is committed");
    serde_json::from_str(&text).expect("the committed schema is JSON")
}

/// A validator for one definition of the schema (a step kind's word, or
/// `front_matter`), the way an editor told "this block is a train step" would check it.
fn validator_for(schema: &Value, definition: &str) -> Validator {
    let mut root = schema.clone();
    let root_map = root.as_object_mut().unwrap();
    root_map.remove("anyOf");
    root_map.insert(
        "allOf".into(),
        json!([{ "$ref": format!("#/$defs/{definition}") }]),
    );
    jsonschema::validator_for(&root).expect("the schema compiles")
}

/// A YAML block's settings as JSON, which is what a schema validator reads.
fn as_json(yaml: &str) -> Value {
    serde_yaml::from_str(yaml).expect("demo blocks are YAML")
}

/// Every problem `definition`'s schema finds in `yaml`, as text.
fn schema_errors(schema: &Value, definition: &str, yaml: &str) -> Vec<String> {
    validator_for(schema, definition)
        .iter_errors(&as_json(yaml))
        .map(|error| format!("{} at {}", error, error.instance_path()))
        .collect()
}

fn demo_documents() -> Vec<std::path::PathBuf> {
    let mut documents: Vec<_> = std::fs::read_dir(common::project().join("experiments"))
        .unwrap()
        .map(|entry| entry.unwrap().path())
        .filter(|path| path.extension().is_some_and(|ext| ext == "md"))
        .collect();
    documents.sort();
    documents
}

#[test]
fn the_committed_schema_is_what_stet_schema_prints() {
    let workspace = common::Workspace::new();
    let output = common::stet(&["schema".to_string()], workspace.dir.path());
    assert!(output.status.success(), "{output:?}");
    let printed = String::from_utf8(output.stdout).unwrap();
    let committed = std::fs::read_to_string(common::project().join("schema/stet-steps.json"))
        .unwrap_or_default();
    assert!(
        printed == committed,
        "schema/stet-steps.json is not what `stet schema` prints; regenerate it with \
         `cargo run -- schema > schema/stet-steps.json` and commit it"
    );
}

#[test]
fn every_demo_block_fits_its_kinds_schema() {
    let schema = committed_schema();
    let documents = demo_documents();
    assert!(documents.len() >= 2, "the demo documents are found");
    let mut checked = 0;
    for path in &documents {
        let source = std::fs::read_to_string(path).unwrap();
        let (document, problems) = parse(&source);
        assert!(problems.is_empty(), "{}: {problems:?}", path.display());
        let front = front::split(&source).yaml.expect("demos have front matter");
        let errors = schema_errors(&schema, "front_matter", front.text);
        assert!(errors.is_empty(), "{} front matter: {errors:?}", name(path));
        for step in document.unwrap().steps() {
            let errors = schema_errors(&schema, step.kind.word(), &step.yaml);
            assert!(errors.is_empty(), "{} {}: {errors:?}", name(path), step.id);
            checked += 1;
        }
    }
    assert!(checked >= 10, "only {checked} blocks were checked");
}

fn name(path: &Path) -> String {
    path.file_name().unwrap().to_string_lossy().into_owned()
}

#[test]
fn a_misspelt_setting_or_word_fails_its_kinds_schema() {
    let schema = committed_schema();
    let misspelt = "data: hives\nnet: small\nlearnig_rate: 0.1\n";
    assert!(!schema_errors(&schema, "train", misspelt).is_empty());
    let wrong_word = "hidden: [8]\nactivation: tahn\n";
    assert!(!schema_errors(&schema, "net", wrong_word).is_empty());
    let batch_word = "data: hives\nnet: small\nbatch: all\n";
    assert!(!schema_errors(&schema, "train", batch_word).is_empty());
    let vary_fixed = "from: base\nvary:\n  data: [a, b]\n";
    assert!(!schema_errors(&schema, "sweep", vary_fixed).is_empty());
    // The same blocks, written right, fit.
    let right = "data: hives\nnet: small\nlearning_rate: 0.1\nbatch: full\n";
    assert_eq!(schema_errors(&schema, "train", right), Vec::<String>::new());
    let vary = "from: base\nvary:\n  learning_rate: [0.1, 0.01]\n  hidden: [[4], [8]]\n";
    assert_eq!(schema_errors(&schema, "sweep", vary), Vec::<String>::new());
}
