//! The real binary on grid specs: the bad-spec corpus (exit 2, file/line/field named, nothing
//! left on disk), bit-for-bit determinism across thread counts and shardings, resume after
//! kill -9, merge and describe errors.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use linegrid::grid::store::GridFile;

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_linegrid")
}

fn run(args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .output()
        .expect("run linegrid")
}

/// Wait until `path` exists (the build has created its partial file), at most 20 s.
fn wait_for(path: &Path) {
    for _ in 0..2000 {
        if path.exists() {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    panic!("{} never appeared", path.display());
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn specs() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/specs")
}

#[test]
fn every_bad_spec_is_refused_with_a_specific_message_and_no_output() {
    let dir = specs().join("bad");
    let expected: std::collections::BTreeMap<String, String> =
        serde_json::from_str(&std::fs::read_to_string(dir.join("expected.json")).unwrap()).unwrap();
    assert!(expected.len() >= 25, "corpus of {} specs", expected.len());
    let tmp = tempfile::tempdir().unwrap();
    for (name, needle) in &expected {
        // Copy the spec into a scratch folder so that its relative output would land there.
        let spec = tmp.path().join(format!("{name}.toml"));
        std::fs::copy(dir.join(format!("{name}.toml")), &spec).unwrap();
        for extra in [&[][..], &["--check"][..]] {
            let mut args = vec!["build", spec.to_str().unwrap()];
            args.extend_from_slice(extra);
            let o = run(&args);
            let err = stderr(&o);
            assert_eq!(o.status.code(), Some(2), "{name}: {err}");
            assert!(
                err.contains(needle.as_str()),
                "{name}: want '{needle}' in: {err}"
            );
            assert!(
                err.contains(&format!("{name}.toml:")),
                "{name}: file not named: {err}"
            );
            assert_eq!(err.trim().lines().count(), 1, "{name}: one line: {err}");
        }
        let left: Vec<_> = std::fs::read_dir(tmp.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|f| !f.ends_with(".toml"))
            .collect();
        assert!(left.is_empty(), "{name} left {left:?}");
    }
    // An output path that cannot be created (its parent is a regular file): exit 2, nothing
    // written.
    let good = good_spec(tmp.path());
    let blocker = tmp.path().join("blocker");
    std::fs::write(&blocker, b"a file, not a folder").unwrap();
    let o = run(&[
        "build",
        good.to_str().unwrap(),
        "--output",
        blocker.join("sub/g.h5").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("blocker"), "{}", stderr(&o));
    // --resume with a foreign file where the partial file should be.
    let out = tmp.path().join("r.h5");
    std::fs::write(tmp.path().join("r.h5.partial"), b"not a grid").unwrap();
    let o = run(&[
        "build",
        good.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--resume",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("r.h5.partial"), "{}", stderr(&o));
    assert!(!out.exists());
    // A spec that does not exist.
    let o = run(&["build", "no/such/spec.toml"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("no/such/spec.toml"));
}

/// Every dataset of a grid file, as bit patterns.
fn bits(path: &Path) -> Vec<(String, Vec<u64>)> {
    let f = GridFile::open(path).unwrap();
    let mut out: Vec<(String, Vec<u64>)> = f
        .dataset_names()
        .into_iter()
        .filter(|n| n != "status")
        .map(|n| {
            let a = f.read(&n).unwrap();
            (n, a.iter().map(|v| v.to_bits()).collect())
        })
        .collect();
    out.push((
        "status".into(),
        f.status().unwrap().iter().map(|&v| u64::from(v)).collect(),
    ));
    out
}

fn good_spec(dir: &Path) -> PathBuf {
    let spec = dir.join("good.toml");
    std::fs::copy(specs().join("good.toml"), &spec).unwrap();
    spec
}

#[test]
fn one_and_two_threads_and_any_sharding_give_identical_data() {
    let tmp = tempfile::tempdir().unwrap();
    let spec = good_spec(tmp.path());
    let s = spec.to_str().unwrap();
    let one = tmp.path().join("one.h5");
    let two = tmp.path().join("two.h5");
    for (out, threads) in [(&one, "1"), (&two, "2")] {
        let o = run(&[
            "build",
            s,
            "--output",
            out.to_str().unwrap(),
            "--threads",
            threads,
            "--quiet",
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
    }
    let reference = bits(&one);
    assert_eq!(reference, bits(&two), "1 vs 2 threads");
    // Shardings 2 and 3 (the spec has 6 pencils).
    for n in [2usize, 3] {
        let mut files = Vec::new();
        for i in 1..=n {
            let o = run(&[
                "build",
                s,
                "--output",
                tmp.path().join(format!("sharded{n}.h5")).to_str().unwrap(),
                "--shard",
                &format!("{i}/{n}"),
                "--quiet",
            ]);
            assert!(o.status.success(), "{}", stderr(&o));
            files.push(
                tmp.path()
                    .join(format!("sharded{n}.shard-{:04}-of-{:04}.h5", i - 1, n)),
            );
        }
        let merged = tmp.path().join(format!("merged{n}.h5"));
        let mut args = vec![
            "merge".to_string(),
            "--output".into(),
            merged.display().to_string(),
        ];
        args.extend(files.iter().map(|f| f.display().to_string()));
        let o = Command::new(bin()).args(&args).output().unwrap();
        assert!(o.status.success(), "{}", stderr(&o));
        assert!(GridFile::open(&merged).unwrap().is_complete());
        assert_eq!(reference, bits(&merged), "{n} shards");
        // Merge errors: a gap (one shard missing) and an overlap (one shard twice).
        let gap = Command::new(bin())
            .args([
                "merge",
                "--output",
                tmp.path().join("gap.h5").to_str().unwrap(),
            ])
            .args(&files[1..])
            .output()
            .unwrap();
        assert_eq!(gap.status.code(), Some(2));
        assert!(stderr(&gap).contains("gap"), "{}", stderr(&gap));
        let overlap = Command::new(bin())
            .args([
                "merge",
                "--output",
                tmp.path().join("overlap.h5").to_str().unwrap(),
            ])
            .args([&files[0], &files[0]])
            .args(&files[1..])
            .output()
            .unwrap();
        assert_eq!(overlap.status.code(), Some(2));
        assert!(
            stderr(&overlap).contains("overlaps"),
            "{}",
            stderr(&overlap)
        );
        assert!(!tmp.path().join("gap.h5").exists() && !tmp.path().join("overlap.h5").exists());
    }
    // A shard index out of range.
    let o = run(&["build", s, "--shard", "4/3"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--shard"), "{}", stderr(&o));
    // The output exists already.
    let o = run(&["build", s, "--output", one.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("exists"), "{}", stderr(&o));
}

#[test]
fn a_killed_run_resumes_to_the_same_bits() {
    let tmp = tempfile::tempdir().unwrap();
    // A longer run (48 points, ~1–2 s on one thread) so that the kills land mid-run.
    let spec = good_spec(tmp.path());
    let text = std::fs::read_to_string(&spec).unwrap().replace(
        "temperature = { values = [6000.0, 9000.0, 12000.0] }",
        "temperature = { log = [6000.0, 20000.0, 8] }",
    );
    std::fs::write(&spec, text).unwrap();
    let s = spec.to_str().unwrap();
    let reference = tmp.path().join("reference.h5");
    let o = run(&[
        "build",
        s,
        "--output",
        reference.to_str().unwrap(),
        "--quiet",
        "--threads",
        "1",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let want = bits(&reference);
    // Seeded kill times (ms after start), several runs.
    let mut seed: u64 = 20_261_202;
    for round in 0..3 {
        let out = tmp.path().join(format!("killed{round}.h5"));
        let partial = PathBuf::from(format!("{}.partial", out.display()));
        seed = seed.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
        // At least 150 ms after the partial file appears, so the kill does not land inside
        // HDF5's own file creation (a file with no pencil yet is not worth resuming).
        let delay = 150 + (seed >> 33) % 1200;
        let mut child = Command::new(bin())
            .args([
                "build",
                s,
                "--output",
                out.to_str().unwrap(),
                "--quiet",
                "--threads",
                "1",
            ])
            .spawn()
            .unwrap();
        wait_for(&partial);
        std::thread::sleep(std::time::Duration::from_millis(delay));
        let _ = child.kill(); // SIGKILL
        let _ = child.wait();
        if out.exists() {
            // The run finished before the kill: nothing to resume.
            assert_eq!(want, bits(&out));
            continue;
        }
        assert!(
            partial.exists(),
            "round {round}: no partial file after kill at {delay} ms"
        );
        let o = run(&[
            "build",
            s,
            "--output",
            out.to_str().unwrap(),
            "--resume",
            "--quiet",
        ]);
        assert!(o.status.success(), "resume: {}", stderr(&o));
        assert!(!partial.exists());
        assert_eq!(want, bits(&out), "round {round} (killed at {delay} ms)");
    }
    // A partial file from a different spec is refused on resume.
    let other = tmp.path().join("other.toml");
    std::fs::write(
        &other,
        std::fs::read_to_string(&spec)
            .unwrap()
            .replace("test grid", "another grid"),
    )
    .unwrap();
    // An unfinished file of the first spec (a shard file: same layout, pencils missing) put
    // where the other spec's partial file would be.
    let out = tmp.path().join("mix.h5");
    let o = run(&[
        "build",
        s,
        "--output",
        tmp.path().join("half.h5").to_str().unwrap(),
        "--shard",
        "1/2",
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    std::fs::rename(
        tmp.path().join("half.shard-0000-of-0002.h5"),
        format!("{}.partial", out.display()),
    )
    .unwrap();
    let o = run(&[
        "build",
        other.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--resume",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("digest"), "{}", stderr(&o));
    assert!(!out.exists());
    // The same unfinished file resumes under its own spec.
    let o = run(&[
        "build",
        s,
        "--output",
        out.to_str().unwrap(),
        "--resume",
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(want, bits(&out));
}

#[test]
fn describe_reports_and_refuses_foreign_files() {
    let tmp = tempfile::tempdir().unwrap();
    let spec = good_spec(tmp.path());
    let out = tmp.path().join("g.h5");
    let o = run(&[
        "build",
        spec.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let o = run(&["describe", out.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["complete"], true);
    assert_eq!(v["axes"].as_array().unwrap().len(), 3);
    assert_eq!(v["lines"].as_array().unwrap().len(), 3);
    assert_eq!(v["status_counts"]["converged"], 12);
    // Not an HDF5 file; a truncated one.
    let junk = tmp.path().join("junk.h5");
    std::fs::write(&junk, b"not hdf5 at all").unwrap();
    let o = run(&["describe", junk.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("junk.h5"));
    let cut = tmp.path().join("cut.h5");
    let bytes = std::fs::read(&out).unwrap();
    std::fs::write(&cut, &bytes[..bytes.len() / 3]).unwrap();
    let o = run(&["describe", cut.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let o = run(&[
        "merge",
        "--output",
        tmp.path().join("m.h5").to_str().unwrap(),
        junk.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}
