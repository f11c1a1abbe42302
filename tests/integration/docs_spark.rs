//! scripts/spark_score.py under Spark in local mode against the
//! single-machine `quern score --jsonl` (see spark.rs for how Spark is
//! found). The tests sit in a module named `spark` so that the harness
//! filter that leaves out the Spark tests (`--skip spark::`,
//! scripts/test) leaves them out too.

mod spark {
    use std::path::Path;

    use serde_json::{json, Value};

    use crate::common::run_ok;
    use crate::docs::{close, input, s, score_docs, tmp};
    use crate::query_fixtures::train3;

    /// scripts/spark_score.py under Spark in local mode (see spark.rs for how
    /// Spark is found): each scored file equals the
    /// single-machine `quern score --jsonl` of its input byte for byte; the
    /// merged summary's counts and totals equal one single-machine run over all
    /// inputs, its percentiles are within the documented histogram bound of
    /// that run's exact ones; a second run skips every finished file.
    #[test]
    fn driver_in_local_mode_equals_single_machine() {
        let submit = crate::spark::spark_submit();
        let dir = tmp().join("spark");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        let inputs = dir.join("crawl");
        std::fs::create_dir_all(&inputs).unwrap();
        // Three .jsonl.gz files (Python's gzip module) from the test input.
        let lines = &input().0;
        let mut files = Vec::new();
        for (k, part) in lines.chunks(lines.len().div_ceil(3)).enumerate() {
            let plain = inputs.join(format!("part-{k}.jsonl"));
            std::fs::write(&plain, part.join("\n") + "\n").unwrap();
            let gz = inputs.join(format!("part-{k}.jsonl.gz"));
            let st = std::process::Command::new("python3")
                .args([
                    "-c",
                    "import gzip, shutil, sys; shutil.copyfileobj(open(sys.argv[1], 'rb'), gzip.open(sys.argv[2], 'wb'))",
                    &s(&plain),
                    &s(&gz),
                ])
                .status()
                .unwrap();
            assert!(st.success());
            std::fs::remove_file(&plain).unwrap();
            files.push(gz);
        }
        let out = dir.join("scored");
        let go = || {
            let _one = crate::spark::ONE_AT_A_TIME
                .lock()
                .unwrap_or_else(|e| e.into_inner());
            let r = std::process::Command::new(&submit)
                .args(["--master", "local[2,4]", "--conf", "spark.ui.enabled=false"])
                .args(["--driver-memory", "1g"])
                .arg(crate::common::manifest_dir().join("scripts/spark_score.py"))
                .args(["--quern", crate::common::bin(), "--store", &s(train3())])
                .args(["--out", &s(&out), &s(&inputs)])
                .env("PYSPARK_PYTHON", "python3")
                .env("SPARK_LOCAL_IP", "127.0.0.1")
                .stdin(std::process::Stdio::null())
                .output()
                .unwrap();
            let text = String::from_utf8_lossy(&r.stdout).into_owned();
            assert!(
                r.status.success(),
                "spark_score.py failed:\n{text}\n{}",
                String::from_utf8_lossy(&r.stderr)
            );
            let last = text.lines().rfind(|l| l.starts_with('{')).unwrap();
            serde_json::from_str::<Value>(last).unwrap()
        };
        let merged = go();
        for f in &files {
            let name = f.file_name().unwrap().to_string_lossy().into_owned();
            let got = std::fs::read(out.join(&name).join("scores.jsonl")).unwrap();
            let (_, want) = score_docs(train3(), &["--jsonl", "--threads", "1"], &[f]);
            assert!(got == want.as_bytes(), "{name}: Spark's output differs");
        }
        let sum = dir.join("single.json");
        let mut all: Vec<&Path> = files.iter().map(|p| p.as_path()).collect();
        all.sort();
        score_docs(train3(), &["--jsonl", "--summary", &s(&sum)], &all);
        let single: Value = serde_json::from_str(&std::fs::read_to_string(&sum).unwrap()).unwrap();
        for k in ["lines", "documents", "bad_lines", "empty_documents"] {
            assert_eq!(merged[k], single[k], "{k}");
        }
        for k in [
            "sentences",
            "predictions",
            "outside_vocabulary",
            "probability_zero",
        ] {
            assert_eq!(merged["totals"][k], single["totals"][k], "{k}");
        }
        assert!(close(
            merged["totals"]["log10_sum_nonzero"].as_f64().unwrap(),
            single["totals"]["log10_sum_nonzero"].as_f64().unwrap()
        ));
        let (md, sd) = (&merged["distribution"], &single["distribution"]);
        assert_eq!(md["count"], sd["count"]);
        assert_eq!(md["bins"], sd["bins"]);
        // Documented bound: 10^(bin_width / 2) - 1 relative.
        let bound = 10f64.powf(sd["bin_width"].as_f64().unwrap() / 2.0) - 1.0;
        for p in [1, 5, 10, 25, 50, 75, 90, 95, 99] {
            let k = format!("p{p}");
            let (a, b) = (
                md["percentiles"][&k].as_f64().unwrap(),
                sd["percentiles"][&k].as_f64().unwrap(),
            );
            assert!((a / b - 1.0).abs() <= bound * 1.000001, "{k}: {a} vs {b}");
        }
        // A second run: every file is finished and skipped, outputs unchanged.
        let before: Vec<Vec<u8>> = files
            .iter()
            .map(|f| std::fs::read(out.join(f.file_name().unwrap()).join("scores.jsonl")).unwrap())
            .collect();
        let again = go();
        for t in again["tasks"].as_array().unwrap() {
            assert_eq!(t["outcome"], json!("skipped"), "{t}");
        }
        for (f, b) in files.iter().zip(&before) {
            let now = std::fs::read(out.join(f.file_name().unwrap()).join("scores.jsonl")).unwrap();
            assert!(&now == b);
        }
        // A damaged output is redone on the next run.
        let victim = out.join(files[1].file_name().unwrap()).join("scores.jsonl");
        std::fs::write(&victim, b"damaged\n").unwrap();
        let third = go();
        let redone: Vec<&Value> = third["tasks"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|t| t["outcome"] != json!("skipped"))
            .collect();
        assert_eq!(redone.len(), 1, "{third}");
        assert!(std::fs::read(&victim).unwrap() == before[1]);
    }
    /// scripts/spark_score.py with a frozen model shipped to the executors
    /// by `spark-submit --files` (given to the driver by its bare name, so
    /// that only the shipped copy can be found), one task's quern process
    /// SIGKILLed after its first batch of results and another task itself
    /// SIGKILLed between writing its done.json and its commit: Spark
    /// retries both, every scored file equals the single-machine
    /// `quern score --model` of its input byte for byte, the killed tasks
    /// report a second attempt, and the only temporary folder the driver
    /// had to remove is the one of the task killed before its commit (the
    /// quern process's own task removes its folder when quern fails), with
    /// none left after.
    #[test]
    fn shipped_model_and_killed_tasks_equal_single_machine() {
        let submit = crate::spark::spark_submit();
        let dir = tmp().join("spark-model");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        let inputs = dir.join("crawl");
        std::fs::create_dir_all(&inputs).unwrap();
        let model = dir.join("ref3.qm");
        run_ok(&[
            "freeze",
            "--store",
            &s(train3()),
            "--method",
            "mkn",
            "--out",
            &s(&model),
        ]);
        // Three plain .jsonl files; the batches are small enough (2,048
        // lines) that the first has more than one.
        let lines = &input().0;
        let mut files = Vec::new();
        for (k, part) in lines.chunks(lines.len().div_ceil(3)).enumerate() {
            let f = inputs.join(format!("part-{k}.jsonl"));
            std::fs::write(&f, part.join("\n") + "\n").unwrap();
            files.push(f);
        }
        let out = dir.join("scored");
        let r = {
            let _one = crate::spark::ONE_AT_A_TIME
                .lock()
                .unwrap_or_else(|e| e.into_inner());
            std::process::Command::new(&submit)
                .args(["--master", "local[2,4]", "--conf", "spark.ui.enabled=false"])
                .args(["--driver-memory", "1g", "--files", &s(&model)])
                .arg(crate::common::manifest_dir().join("scripts/spark_score.py"))
                .args(["--quern", crate::common::bin(), "--model", "ref3.qm"])
                .args(["--fault-kill", "part-0.jsonl:scoring"])
                .args(["--fault-kill", "part-2.jsonl:commit"])
                .args(["--out", &s(&out), &s(&inputs)])
                .current_dir(&dir)
                .env("PYSPARK_PYTHON", "python3")
                .env("SPARK_LOCAL_IP", "127.0.0.1")
                .stdin(std::process::Stdio::null())
                .output()
                .unwrap()
        };
        let text = String::from_utf8_lossy(&r.stdout).into_owned();
        let err = String::from_utf8_lossy(&r.stderr);
        assert!(r.status.success(), "spark_score.py failed:\n{text}\n{err}");
        assert!(
            err.contains("killed by signal 9"),
            "the quern process of part-0 was not killed:\n{err}"
        );
        let merged: Value =
            serde_json::from_str(text.lines().rfind(|l| l.starts_with('{')).unwrap()).unwrap();
        for t in merged["tasks"].as_array().unwrap() {
            assert_eq!(t["model"], json!("shipped"), "{t}");
            let killed = t["name"] == json!("part-0.jsonl") || t["name"] == json!("part-2.jsonl");
            assert_eq!(t["attempt"].as_u64().unwrap() > 0, killed, "{t}");
        }
        for f in &files {
            let name = f.file_name().unwrap().to_string_lossy().into_owned();
            let got = std::fs::read(out.join(&name).join("scores.jsonl")).unwrap();
            let want = run_ok(&[
                "score",
                "--model",
                &s(&model),
                "--jsonl",
                "--threads",
                "1",
                &s(f),
            ])
            .stdout;
            assert!(got == want.as_bytes(), "{name}: Spark's output differs");
        }
        let removed: Vec<&str> = merged["leftovers_removed"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        assert!(
            removed.len() == 1 && removed[0].starts_with(".tmp-part-2.jsonl-"),
            "the driver removed {removed:?}; expected only the folder of part-2's killed attempt"
        );
        let left: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with(".tmp-"))
            .collect();
        assert!(left.is_empty(), "temporary folders left: {left:?}");
    }
}
