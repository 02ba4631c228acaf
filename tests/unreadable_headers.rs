//! A block whose header line cannot be read leaves its id unknown; with the data file
//! present, planning must still stop at the document's problems (exit 2, nothing
//! written) instead of reading the missing step.

mod common;

use common::Workspace;

/// Every kind that reads another step, around a net and a train header given by the test.
fn document(net_header: &str, train_header: &str) -> String {
    format!(
        "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n\
         ```yaml {net_header}\nhidden: [4]\n```\n\n\
         ```yaml {train_header}\ndata: iris\nnet: small\nepochs: 5\n```\n\n\
         ```yaml sweep rates\nfrom: base\nvary:\n  learning_rate: [0.1, 0.2]\n```\n\n\
         ```yaml compare all\nruns: [base, rates]\n```\n\n\
         ```yaml predict guess\nmodel: base\nfile: iris.csv\n```\n\n\
         ```yaml export out\nmodel: base\nwrite: model.json\n```\n"
    )
}

/// Builds `text` and checks it is refused at `line:column` with `message`, writing nothing.
fn refused_at(text: &str, location: &str, message: &str) {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", text);
    let (output, summary) = ws.build(&doc, &[]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(stderr.contains(&format!("doc.md:{location}")), "{stderr}");
    assert!(stderr.contains(message), "{stderr}");
    assert!(summary.is_none());
    for written in ["doc.html", "model.json", ".stet"] {
        assert!(!ws.path(written).exists(), "{written} was written");
    }
    assert_eq!(std::fs::read_to_string(&doc).unwrap(), text);
}

#[test]
fn a_misspelt_net_kind_stops_before_planning_reads_it() {
    refused_at(
        &document("nett small", "train base"),
        "6:4",
        "'nett' is not a step kind",
    );
}

#[test]
fn a_misspelt_data_kind_stops_before_planning_reads_it() {
    let text = document("net small", "train base").replacen("yaml data iris", "yaml dta iris", 1);
    refused_at(&text, "1:4", "'dta' is not a step kind");
}

#[test]
fn a_misspelt_train_kind_stops_before_the_sweep_reads_it() {
    refused_at(
        &document("net small", "trian base"),
        "10:4",
        "'trian' is not a step kind",
    );
}

#[test]
fn an_extra_word_in_a_header_stops_before_planning_reads_the_step() {
    refused_at(&document("net small extra", "train base"), "6:4", "extra");
}

#[test]
fn an_invalid_id_stops_before_planning_reads_the_step() {
    // The train step names the block by its unreadable id, so it is not reported again.
    let text = document("net sm/all", "train base").replacen("net: small", "net: sm/all", 1);
    refused_at(&text, "6:4", "sm/all");
}

#[test]
fn a_step_nested_in_a_list_stops_before_planning_reads_it() {
    let text = document("net small", "train base").replacen(
        "```yaml net small\nhidden: [4]\n```\n",
        "- a list item\n\n  ```yaml net small\n  hidden: [4]\n  ```\n",
        1,
    );
    refused_at(&text, "8:", "top-level");
}
