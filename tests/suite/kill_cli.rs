//! `tailspan run` killed with SIGKILL at several moments: every file left in the output
//! folder is complete, no record (summary.json, report.html) describes data files of another
//! run, temporaries are hidden `.NAME.XXXXXX.partial` files, and a rerun cleans them up and
//! gives exactly the bytes of an uninterrupted run.

#![cfg(unix)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

/// Fixed report time, so that the report is byte-identical between runs.
const EPOCH: &str = "1796083200";

/// The shipped swap-pricing example cut down to a run of a second or two in a debug build,
/// with paths on, written to `dir/run.toml` with output folder `dir/out`.
fn write_config(dir: &Path, seed: u64) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let text = std::fs::read_to_string(root.join("swap-pricing.toml"))
        .unwrap()
        .replace("scenarios = 4000", "scenarios = 60")
        .replace("seed = 20261202", &format!("seed = {seed}"))
        .replace("demo/", &format!("{}/demo/", root.display()))
        .replace("folder = \"out/swap-pricing\"", "folder = \"out\"")
        .replace("paths = false", "paths = true");
    assert!(text.contains(&format!("seed = {seed}")));
    std::fs::write(dir.join("run.toml"), text).unwrap();
}

/// Starts `tailspan run run.toml` in `dir` (a relative config path, so that two folders
/// with the same config record the same paths).
fn start(dir: &Path) -> Child {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["run", "run.toml", "--quiet"])
        .current_dir(dir)
        .env("SOURCE_DATE_EPOCH", EPOCH)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap()
}

fn run_to_end(dir: &Path) {
    let status = start(dir).wait().unwrap();
    assert!(status.success(), "run failed in {}", dir.display());
}

/// The run id a complete output file records; panics if the file is not complete.
fn run_id(path: &Path) -> String {
    let name = path.file_name().unwrap().to_string_lossy().into_owned();
    if name.ends_with(".parquet") {
        let file = std::fs::File::open(path).unwrap();
        let builder = ParquetRecordBatchReaderBuilder::try_new(file)
            .unwrap_or_else(|e| panic!("{name} is not a complete Parquet file: {e}"));
        let id = builder
            .metadata()
            .file_metadata()
            .key_value_metadata()
            .and_then(|kv| kv.iter().find(|k| k.key == "tailspan.run_id").cloned())
            .and_then(|k| k.value)
            .unwrap_or_else(|| panic!("{name} records no run id"));
        let expected = builder.metadata().file_metadata().num_rows() as usize;
        let mut rows = 0;
        for batch in builder.build().unwrap() {
            rows += batch
                .unwrap_or_else(|e| panic!("{name} does not read to the end: {e}"))
                .num_rows();
        }
        assert_eq!(rows, expected, "{name}: rows read");
        id
    } else if name.ends_with(".json") {
        let value: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(path).unwrap())
                .unwrap_or_else(|e| panic!("{name} is not complete JSON: {e}"));
        value["run"]["run_id"].as_str().unwrap().to_string()
    } else if name.ends_with(".html") {
        let text = std::fs::read_to_string(path).unwrap();
        assert!(text.ends_with("</html>\n"), "{name} is cut short");
        let marker = "<meta name=\"tailspan-run-id\" content=\"";
        let at = text.find(marker).expect("report names its run") + marker.len();
        text[at..].split('"').next().unwrap().to_string()
    } else {
        panic!("unexpected file {name}");
    }
}

/// Checks the folder after a kill: every visible file complete, only hidden temporaries
/// besides, and every record present naming the run of every data file it describes.
/// Returns the number of temporaries found.
fn check_consistent(out: &Path, moment: &str) -> usize {
    let mut ids = BTreeMap::new();
    let mut temporaries = 0;
    let Ok(entries) = std::fs::read_dir(out) else {
        return 0;
    };
    for entry in entries {
        let entry = entry.unwrap();
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') {
            assert!(
                name.ends_with(".partial"),
                "{moment}: hidden file {name} is not a temporary"
            );
            temporaries += 1;
            continue;
        }
        ids.insert(name, run_id(&entry.path()));
    }
    let described: [(&str, &[&str]); 2] = [
        (
            "summary.json",
            &[
                "book.parquet",
                "cashflows.parquet",
                "lifetimes.parquet",
                "hedge.parquet",
            ],
        ),
        ("report.html", &[]),
    ];
    for (record, files) in described {
        let Some(id) = ids.get(record) else { continue };
        // The report describes every file of the run.
        let files: Vec<&String> = if files.is_empty() {
            ids.keys().collect()
        } else {
            ids.keys().filter(|k| files.contains(&k.as_str())).collect()
        };
        for f in files {
            assert_eq!(
                &ids[f], id,
                "{moment}: {record} and {f} come from different runs"
            );
        }
    }
    temporaries
}

/// Every visible file's bytes.
fn snapshot(out: &Path) -> BTreeMap<String, Vec<u8>> {
    std::fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap())
        .filter(|e| !e.file_name().to_string_lossy().starts_with('.'))
        .map(|e| {
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect()
}

/// When to kill a run.
#[derive(Debug, Clone, Copy)]
enum Moment {
    /// As soon as a temporary file appears (an output half-written).
    Temporary,
    /// As soon as the named file has been committed by this run.
    Committed(&'static str),
    /// After a fixed delay.
    After(u64),
}

/// The file's inode: a commit renames a new file over the old one, so the inode changes
/// (the two exist at once, so the number cannot be reused), whatever the clock's grain.
fn inode(path: &Path) -> Option<u64> {
    use std::os::unix::fs::MetadataExt;
    std::fs::metadata(path).ok().map(|m| m.ino())
}

/// Runs once and kills the process at `moment` (or lets it end if it finishes first);
/// whether it was killed.
fn kill_at(dir: &Path, moment: Moment) -> bool {
    let out = dir.join("out");
    let before = match moment {
        Moment::Committed(name) => inode(&out.join(name)),
        _ => None,
    };
    let started = Instant::now();
    let mut child = start(dir);
    loop {
        if child.try_wait().unwrap().is_some() {
            return false;
        }
        let now = match moment {
            Moment::Temporary => std::fs::read_dir(&out).is_ok_and(|entries| {
                entries.flatten().any(|e| {
                    let name = e.file_name().to_string_lossy().into_owned();
                    name.starts_with('.') && name.ends_with(".partial")
                })
            }),
            Moment::Committed(name) => inode(&out.join(name)).is_some_and(|i| Some(i) != before),
            Moment::After(ms) => started.elapsed() >= Duration::from_millis(ms),
        };
        if now {
            // SIGKILL on Unix: the process gets no chance to clean up.
            child.kill().unwrap();
            child.wait().unwrap();
            return true;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
}

#[test]
fn killed_runs_leave_complete_files_and_a_rerun_restores_the_whole_set() {
    // The uninterrupted run, and beside it (at the same time) a whole set from another
    // run (another seed) in the folder the kills will use, so that a kill can leave files
    // of two runs side by side.
    let reference_dir = tempfile::tempdir().unwrap();
    write_config(reference_dir.path(), 20_261_202);
    let dir = tempfile::tempdir().unwrap();
    write_config(dir.path(), 99);
    let mut both = [start(reference_dir.path()), start(dir.path())];
    for child in &mut both {
        assert!(child.wait().unwrap().success());
    }
    let reference = snapshot(&reference_dir.path().join("out"));
    assert_eq!(reference.len(), 11, "{:?}", reference.keys());
    let out = dir.path().join("out");
    check_consistent(&out, "the older run");
    write_config(dir.path(), 20_261_202);

    let moments = [
        Moment::Temporary,
        Moment::Committed("fit.json"),
        Moment::Committed("paths.parquet"),
        Moment::Committed("book.parquet"),
        Moment::Committed("summary.json"),
        Moment::After(150),
        Moment::After(700),
    ];
    let (mut temporaries, mut killed) = (0, 0);
    for moment in moments {
        let was_killed = kill_at(dir.path(), moment);
        let left = check_consistent(&out, &format!("killed at {moment:?}"));
        eprintln!("{moment:?}: killed {was_killed}, {left} temporaries left");
        killed += usize::from(was_killed);
        temporaries += left;
    }
    // Most moments fall inside the run (a run that ends first is left to end).
    assert!(
        killed >= 4,
        "only {killed} runs were killed before they ended"
    );
    // SIGKILL leaves the temporary being written; at least one kill caught one.
    assert!(temporaries > 0, "no kill caught a file being written");

    run_to_end(dir.path());
    assert_eq!(
        check_consistent(&out, "after the rerun"),
        0,
        "temporaries left"
    );
    let rerun = snapshot(&out);
    assert_eq!(
        rerun.keys().collect::<Vec<_>>(),
        reference.keys().collect::<Vec<_>>()
    );
    for (name, bytes) in &reference {
        assert!(
            rerun[name] == *bytes,
            "{name} differs from the uninterrupted run"
        );
    }
}

#[test]
fn a_record_of_another_run_is_removed_before_new_data_lands() {
    // Run A leaves a whole set; `project` of run B then rewrites the paths: A's summary
    // and report, which describe A's paths, must go (A's book files may stay: they are
    // complete, and no record claims them for B).
    let dir = tempfile::tempdir().unwrap();
    write_config(dir.path(), 5);
    run_to_end(dir.path());
    let out = dir.path().join("out");
    assert!(out.join("summary.json").exists());
    write_config(dir.path(), 6);
    let status = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["project", "run.toml", "--quiet"])
        .current_dir(dir.path())
        .stdout(Stdio::null())
        .status()
        .unwrap();
    assert!(status.success());
    assert!(!out.join("summary.json").exists(), "stale summary kept");
    assert!(!out.join("report.html").exists(), "stale report kept");
    check_consistent(&out, "after project");
    let book: PathBuf = out.join("book.parquet");
    assert_ne!(run_id(&book), run_id(&out.join("paths.parquet")));
}
