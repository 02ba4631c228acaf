//! No setting sizes an allocation or asks for unbounded training unchecked: epochs,
//! network size, sweep size and the work they multiply to are limited, each limit is
//! a located document error naming the flag that raises it.

mod common;

use std::process::Output;

use common::Workspace;

/// Iris (tests/data/iris.csv, 150 rows) with a net and a train step, and `more` after.
fn document(hidden: &str, epochs: &str, more: &str) -> String {
    format!(
        "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n\
         ```yaml net small\nhidden: {hidden}\n```\n\n\
         ```yaml train base\ndata: iris\nnet: small\nepochs: {epochs}\n```\n{more}"
    )
}

/// `stet status` on `text` with extra flags: plans the document without training it.
fn status(text: &str, flags: &[&str]) -> Output {
    let ws = Workspace::new();
    ws.write("doc.md", text);
    let mut args = vec!["status".to_string(), "doc.md".to_string()];
    args.extend(flags.iter().map(|flag| flag.to_string()));
    common::stet(&args, ws.dir.path())
}

/// The document is refused (exit 2) at `line:column`, naming `flag`.
fn refused_at(output: &Output, location: &str, flag: &str) {
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains(&format!("doc.md:{location}")), "{stderr}");
    assert!(stderr.contains(flag), "{stderr}");
}

fn accepted(output: &Output) {
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(0), "{stderr}");
}

#[test]
fn epochs_past_the_work_limit_are_refused_at_the_epochs_line() {
    // The largest u64, and the two values that made the loss history abort.
    for epochs in ["18446744073709551615", "1000000000000", "4294967296"] {
        let output = status(&document("[4]", epochs, ""), &[]);
        refused_at(&output, "13:1", "--max-work");
    }
}

#[test]
fn epochs_past_the_work_limit_inside_vary_are_refused_at_the_vary_line() {
    let sweep = "\n```yaml sweep longer\nfrom: base\nvary:\n  epochs: [5, 4294967296]\n```\n";
    refused_at(
        &status(&document("[4]", "5", sweep), &[]),
        "18:1",
        "--max-work",
    );
}

#[test]
fn max_work_raises_the_work_limit() {
    // 150 rows × 4294967296 epochs is about 6.4e11 row passes.
    let text = document("[4]", "4294967296", "");
    accepted(&status(&text, &["--max-work", "1000000000000"]));
}

#[test]
fn folds_past_the_work_limit_are_refused_before_their_runs_are_listed() {
    let text = document("[4]", "5", "").replacen(
        "target: species\n",
        "target: species\nfolds: 1000000000000\n",
        1,
    );
    refused_at(&status(&text, &[]), "14:1", "--max-work");
}

#[test]
fn a_sweep_repeat_past_the_run_limit_is_refused_before_its_runs_are_listed() {
    let sweep = "\n```yaml sweep seeds\nfrom: base\nrepeat: 1000000000000\nvary:\n  learning_rate: [0.1, 0.2]\n```\n";
    refused_at(
        &status(&document("[4]", "5", sweep), &[]),
        "19:1",
        "--max-sweep-runs",
    );
}

#[test]
fn a_hundred_layers_each_within_the_width_limit_are_refused_at_hidden() {
    let hidden = format!("[{}]", vec!["4096"; 100].join(", "));
    refused_at(
        &status(&document(&hidden, "5", ""), &[]),
        "7:1",
        "--max-weights",
    );
}

#[test]
fn more_hidden_layers_than_the_depth_limit_are_refused_at_hidden() {
    let hidden = format!("[{}]", vec!["2"; 101].join(", "));
    let text = document(&hidden, "5", "");
    refused_at(&status(&text, &[]), "7:1", "--max-layers");
    accepted(&status(&text, &["--max-layers", "101"]));
}

#[test]
fn a_varied_network_over_the_weight_limit_is_refused_at_vary() {
    let sweep =
        "\n```yaml sweep shapes\nfrom: base\nvary:\n  hidden: [[4], [4096, 4096, 4096]]\n```\n";
    let text = document("[4]", "5", sweep);
    refused_at(&status(&text, &[]), "18:1", "--max-weights");
    accepted(&status(&text, &["--max-weights", "40000000"]));
}

#[test]
fn a_network_the_data_makes_too_wide_fails_its_step_naming_the_flag() {
    // 300 distinct texts become 300 one-hot inputs: 300·8 + 8 + 9·1 = 2417 weights,
    // all but 17 decided by the data rather than by the document.
    let ws = Workspace::new();
    let mut csv = String::from("code,ok\n");
    for i in 0..300 {
        csv.push_str(&format!("k{i},{}\n", i % 2));
    }
    ws.write("codes.csv", &csv);
    let doc = ws.write(
        "codes.md",
        "```yaml data d\nfile: codes.csv\ntarget: ok\ntask: classify\n```\n\n```yaml net n\nhidden: [8]\n```\n\n```yaml train t\ndata: d\nnet: n\nepochs: 1\n```\n",
    );
    let (output, summary) = ws.build(&doc, &["--max-weights", "2000"]);
    assert_eq!(output.status.code(), Some(1));
    let error = common::step(&summary.unwrap(), "t")["error"].to_string();
    assert!(
        error.contains("2417 weights") && error.contains("--max-weights"),
        "{error}"
    );
    ws.build_ok(&doc, &["--max-weights", "2417"]);
}
