//! The HDF5 grid store: bit-exact round trip, unfinished files, resume, refusals, typed errors,
//! the on-disk layout as h5dump sees it, and survival of a writer killed with SIGKILL.
//!
//! Set `LINEGRID_STORE_OUT=/some/path.h5` to keep a finished example file there (for
//! `tests/python/check_store.py`).

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::{Mutex, MutexGuard};

use linegrid::grid::store::{
    AxisMeta, DataKind, DatasetMeta, GridFile, GridWriter, Layout, LineRecord, Pencil, StoreError,
};

const DIGEST: &str = "sha256:0123abcd";

/// The tests run one at a time. HDF5 opens files without close-on-exec and the store can mark
/// a descriptor close-on-exec only just after HDF5 opened it, so a child process (h5dump, the
/// killed writer) spawned by one test while another test is opening a file could inherit that
/// file and its HDF5 lock, and the other test's next open would fail as `Busy`.
fn serial() -> MutexGuard<'static, ()> {
    static LOCK: Mutex<()> = Mutex::new(());
    LOCK.lock().unwrap_or_else(|e| e.into_inner())
}

fn axis(name: &str, units: &str, long_name: &str, values: Vec<f64>) -> AxisMeta {
    AxisMeta {
        name: name.into(),
        units: units.into(),
        long_name: long_name.into(),
        values,
    }
}

fn line(i: usize) -> LineRecord {
    LineRecord {
        label: format!("L{i} λ"),
        species: ["H I", "He I", "Fe I", "Fe II", "Ca II"][i % 5].into(),
        family: format!("family-{}", i % 2),
        wavelength_vac_nm: 400.0 + 37.25 * i as f64,
        wavelength_air_nm: if i % 2 == 0 {
            Some(399.9 + 37.2 * i as f64)
        } else {
            None
        },
        lower_cm: 1000.0 * i as f64,
        upper_cm: 20_000.0 + 1234.5 * i as f64,
        log_gf: -1.5 + 0.3 * i as f64,
    }
}

fn provenance(digest: &str, spec_text: &str) -> Vec<(String, String)> {
    vec![
        ("spec_text".into(), spec_text.into()),
        ("spec_digest".into(), digest.into()),
        ("atomic_data_digest".into(), "sha256:feedbeef".into()),
        (
            "physics_options".into(),
            r#"{"broadening":"voigt","microturbulence_km_s":1.0}"#.into(),
        ),
    ]
}

fn datasets() -> Vec<DatasetMeta> {
    vec![
        DatasetMeta {
            name: "equivalent_width".into(),
            units: "pm".into(),
            long_name: "equivalent width".into(),
            per_line: true,
            kind: DataKind::F64,
        },
        DatasetMeta {
            name: "electron_density".into(),
            units: "cm-3".into(),
            long_name: "electron number density".into(),
            per_line: false,
            kind: DataKind::F64,
        },
        DatasetMeta {
            name: "status".into(),
            units: "1".into(),
            long_name: "solver status".into(),
            per_line: false,
            kind: DataKind::Status,
        },
    ]
}

/// temperature 4 × gas_pressure 3 × metallicity 2, 5 lines.
fn small_layout() -> Layout {
    Layout {
        title: "store test grid".into(),
        axes: vec![
            axis(
                "temperature",
                "K",
                "temperature",
                vec![4000.0, 5000.0, 6500.0, 8000.0],
            ),
            axis(
                "gas_pressure",
                "dyn cm-2",
                "gas pressure",
                vec![1e2, 1e3, 1e4],
            ),
            axis("metallicity", "dex", "[M/H]", vec![-1.0, 0.0]),
        ],
        lines: (0..5).map(line).collect(),
        datasets: datasets(),
        compression: 4,
        provenance: provenance(DIGEST, "[grid]\nname = \"store test\"\n"),
        status_flags: vec![(1, "not_converged".into()), (2, "out_of_range".into())],
    }
}

/// A known value of every (axis indices, line) with all 52 mantissa bits in play.
fn ew(idx: &[usize], l: usize) -> f64 {
    let mut h = 0x9e37_79b9_7f4a_7c15_u64;
    for &i in idx.iter().chain([&l]) {
        h = (h ^ i as u64)
            .wrapping_mul(0x0100_0000_01b3)
            .rotate_left(29);
    }
    // Mantissa from the hash, exponent spread over a few decades, occasional negatives.
    let x = f64::from_bits((h >> 12) | 0x3ff0_0000_0000_0000) - 1.0;
    x * 10f64.powi((h % 7) as i32 - 3) * if h % 5 == 0 { -1.0 } else { 1.0 }
}

fn ne(idx: &[usize]) -> f64 {
    1e10 * (1.0 + ew(idx, 999).abs()) * 3f64.powi(idx.iter().sum::<usize>() as i32)
}

fn status_of(idx: &[usize]) -> u8 {
    (idx.iter().sum::<usize>() % 3) as u8
}

/// The pencil `index` of `layout` filled with the known values.
fn pencil(layout: &Layout, index: usize) -> Pencil {
    let outer = layout.pencil_indices(index);
    let len = layout.pencil_len();
    let n_lines = layout.lines.len();
    let point = |k: usize| {
        let mut idx = outer.clone();
        idx.push(k);
        idx
    };
    let ew_data = (0..len).flat_map(|k| (0..n_lines).map(move |l| (k, l)));
    Pencil {
        index,
        data: vec![
            ew_data.map(|(k, l)| ew(&point(k), l)).collect(),
            (0..len).map(|k| ne(&point(k))).collect(),
        ],
        status: (0..len).map(|k| status_of(&point(k))).collect(),
    }
}

/// All multi-indices of `shape`, row-major.
fn all_indices(shape: &[usize]) -> Vec<Vec<usize>> {
    let mut out = vec![vec![]];
    for &n in shape {
        out = out
            .into_iter()
            .flat_map(|p| (0..n).map(move |i| [p.clone(), vec![i]].concat()))
            .collect();
    }
    out
}

fn bits_eq(a: f64, b: f64) -> bool {
    a.to_bits() == b.to_bits()
}

/// Checks every stored value of `file` against the known functions; pencils not in `written`
/// must read NaN / 255 (unless `unwritten_may_hold_data`: a pencil in flight when its writer
/// was killed may be stored but not yet flagged).
fn check_contents_with(
    file: &GridFile,
    layout: &Layout,
    written: &[bool],
    unwritten_may_hold_data: bool,
) {
    let shape = layout.shape();
    let n_lines = layout.lines.len();
    let ew_all = file.read("equivalent_width").unwrap();
    let ne_all = file.read("electron_density").unwrap();
    let st_all = file.status().unwrap();
    assert_eq!(
        ew_all.shape(),
        [shape.clone(), vec![n_lines]].concat().as_slice()
    );
    assert_eq!(ne_all.shape(), shape.as_slice());
    assert_eq!(st_all.shape(), shape.as_slice());
    let n_outer: usize = shape[..shape.len() - 1].iter().product();
    assert_eq!(written.len(), n_outer);
    for idx in all_indices(&shape) {
        let outer = &idx[..idx.len() - 1];
        let pencil_index = outer
            .iter()
            .zip(&shape)
            .fold(0, |acc, (&i, &n)| acc * n + i);
        let is_written = written[pencil_index];
        for l in 0..n_lines {
            let mut at = idx.clone();
            at.push(l);
            let got = ew_all[at.as_slice()];
            if is_written {
                assert!(
                    bits_eq(got, ew(&idx, l)),
                    "ew at {at:?}: {got} vs {}",
                    ew(&idx, l)
                );
            } else if !unwritten_may_hold_data {
                assert!(got.is_nan(), "unwritten ew at {at:?} = {got}");
            }
        }
        let got = ne_all[idx.as_slice()];
        let st = st_all[idx.as_slice()];
        if is_written {
            assert!(bits_eq(got, ne(&idx)), "ne at {idx:?}");
            assert_eq!(st, status_of(&idx), "status at {idx:?}");
        } else if !unwritten_may_hold_data {
            assert!(got.is_nan(), "unwritten ne at {idx:?} = {got}");
            assert_eq!(st, 255, "unwritten status at {idx:?}");
        }
    }
}

fn check_contents(file: &GridFile, layout: &Layout, written: &[bool]) {
    check_contents_with(file, layout, written, false);
}

fn write_pencils(w: &mut GridWriter, layout: &Layout, which: impl IntoIterator<Item = usize>) {
    for i in which {
        w.write_pencil(&pencil(layout, i)).unwrap();
    }
}

#[test]
fn round_trip_is_bit_exact_and_self_describing() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("grid.h5");
    let layout = small_layout();
    let mut w = GridWriter::create(&path, &layout).unwrap();
    assert_eq!(w.n_pencils(), 12);
    assert_eq!(w.pencil_len(), 2);
    // Out of order, as a parallel runner would deliver them.
    write_pencils(&mut w, &layout, (0..12).rev());
    assert!(w.done().iter().all(|d| *d));
    w.finish().unwrap();

    let f = GridFile::open(&path).unwrap();
    assert!(f.is_complete());
    assert_eq!(f.title(), "store test grid");
    assert_eq!(f.axes(), layout.axes.as_slice());
    for (a, b) in f.axes().iter().zip(&layout.axes) {
        assert!(a.values.iter().zip(&b.values).all(|(x, y)| bits_eq(*x, *y)));
    }
    assert_eq!(f.lines(), layout.lines.as_slice());
    assert_eq!(f.lines()[1].wavelength_air_nm, None);
    assert_eq!(f.datasets(), layout.datasets.as_slice());
    assert_eq!(
        f.dataset_names(),
        ["equivalent_width", "electron_density", "status"]
    );
    let codes: Vec<(u8, &str)> = f
        .status_flags()
        .iter()
        .map(|(c, m)| (*c, m.as_str()))
        .collect();
    assert_eq!(
        codes,
        [
            (0, "converged"),
            (1, "not_converged"),
            (2, "out_of_range"),
            (255, "not_computed")
        ]
    );
    check_contents(&f, &layout, &[true; 12]);
    for i in 0..12 {
        let p = f.read_pencil(i).unwrap();
        let want = pencil(&layout, i);
        assert_eq!(p.status, want.status);
        for (a, b) in p.data.iter().zip(&want.data) {
            assert_eq!(a.len(), b.len());
            assert!(a.iter().zip(b).all(|(x, y)| bits_eq(*x, *y)), "pencil {i}");
        }
    }
    assert_eq!(f.done_pencils().unwrap(), vec![true; 12]);
    assert_eq!(f.attribute("tool").as_deref(), Some("linegrid"));
    assert_eq!(
        f.attribute("tool_version").as_deref(),
        Some(env!("CARGO_PKG_VERSION"))
    );
    assert_eq!(f.attribute("spec_digest").as_deref(), Some(DIGEST));
    assert_eq!(f.attribute("complete").as_deref(), Some("1"));
    assert_eq!(f.attribute("format_version").as_deref(), Some("1"));
    assert_eq!(
        f.attribute("axes").as_deref(),
        Some("temperature gas_pressure metallicity")
    );
    assert!(f.attribute("physics_options").unwrap().contains("voigt"));
    assert!(
        f.attribute("conventions")
            .unwrap()
            .contains("dimension scale")
    );
    let created = f.attribute("created").unwrap();
    assert!(created.len() == 20 && created.ends_with('Z'), "{created}");
    assert_eq!(f.attribute("no_such_attribute"), None);
    for name in [
        "temperature",
        "gas_pressure",
        "metallicity",
        "line",
        "progress/pencil",
    ] {
        assert!(f.is_dimension_scale(name).unwrap(), "{name}");
    }
    assert!(!f.is_dimension_scale("equivalent_width").unwrap());
    match f.read("status") {
        Err(StoreError::WrongKind { name, .. }) => assert_eq!(name, "status"),
        other => panic!("expected WrongKind, got {other:?}"),
    }
    match f.read("nope") {
        Err(e @ StoreError::UnknownDataset { .. }) => {
            assert!(
                e.to_string().contains("grid.h5") && e.to_string().contains("nope"),
                "{e}"
            )
        }
        other => panic!("expected UnknownDataset, got {other:?}"),
    }

    if let Some(out) = std::env::var_os("LINEGRID_STORE_OUT") {
        let out = PathBuf::from(out);
        let _ = std::fs::remove_file(&out);
        std::fs::copy(&path, &out).unwrap();
        // And an unfinished one beside it.
        let partial = out.with_extension("partial.h5");
        let _ = std::fs::remove_file(&partial);
        let mut w = GridWriter::create(&partial, &layout).unwrap();
        write_pencils(&mut w, &layout, [0, 5, 7]);
        drop(w);
    }
}

#[test]
fn unfinished_file_reads_nan_and_resumes() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.h5");
    let layout = small_layout();
    let first = [0, 3, 4, 9, 11];
    let mut w = GridWriter::create(&path, &layout).unwrap();
    write_pencils(&mut w, &layout, first);
    drop(w); // killed or stopped before finish

    let mut mask = vec![false; 12];
    for i in first {
        mask[i] = true;
    }
    {
        let f = GridFile::open(&path).unwrap();
        assert!(!f.is_complete());
        assert_eq!(f.attribute("complete").as_deref(), Some("0"));
        assert_eq!(f.done_pencils().unwrap(), mask);
        check_contents(&f, &layout, &mask);
    }

    // Another spec's digest is refused, and the file is untouched.
    match GridWriter::resume(&path, "sha256:other") {
        Err(StoreError::DigestMismatch {
            expected,
            found,
            path: p,
        }) => {
            assert_eq!(expected, "sha256:other");
            assert_eq!(found, DIGEST);
            assert_eq!(p, path);
        }
        other => panic!("expected DigestMismatch, got {other:?}"),
    }

    let (mut w, done) = GridWriter::resume(&path, DIGEST).unwrap();
    assert_eq!(done, mask);
    let missing: Vec<usize> = (0..12).filter(|i| !done[*i]).collect();
    // Finishing early is refused and leaves the file incomplete.
    write_pencils(&mut w, &layout, missing[..3].iter().copied());
    match w.finish() {
        Err(StoreError::Incomplete {
            missing: m, total, ..
        }) => assert_eq!((m, total), (4, 12)),
        other => panic!("expected Incomplete, got {other:?}"),
    }
    assert!(!GridFile::open(&path).unwrap().is_complete());

    let (mut w, done) = GridWriter::resume(&path, DIGEST).unwrap();
    assert_eq!(done.iter().filter(|d| **d).count(), 8);
    let missing: Vec<usize> = (0..12).filter(|i| !done[*i]).collect();
    write_pencils(&mut w, &layout, missing);
    // Rewriting a stored pencil is allowed (it is cleared, rewritten, flagged again).
    write_pencils(&mut w, &layout, [4]);
    w.finish().unwrap();
    let f = GridFile::open(&path).unwrap();
    assert!(f.is_complete());
    check_contents(&f, &layout, &[true; 12]);
    // HDF5 does not reopen for writing a file this process holds open read-only.
    match GridWriter::resume(&path, DIGEST) {
        Err(e @ StoreError::Busy { .. }) => assert!(e.to_string().contains("partial.h5"), "{e}"),
        other => panic!("expected Busy, got {other:?}"),
    }
    drop(f);

    // Resuming a finished file marks it incomplete until finished again.
    let (w, done) = GridWriter::resume(&path, DIGEST).unwrap();
    assert!(done.iter().all(|d| *d));
    drop(w);
    assert!(!GridFile::open(&path).unwrap().is_complete());
    let (w, _) = GridWriter::resume(&path, DIGEST).unwrap();
    w.finish().unwrap();
    assert!(GridFile::open(&path).unwrap().is_complete());
}

/// Batches (`write_pencils`): runs of neighbours written as one block, gaps, runs that cross
/// a row of the last outer axis, out-of-order delivery and a rewritten pencil store the same
/// bits as pencil-by-pencil writes (the known functions), flag exactly the pencils given,
/// and a pencil given twice is refused before anything is written.
#[test]
fn batches_store_the_same_bits_as_single_pencils() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("batch.h5");
    let layout = small_layout();
    let mut w = GridWriter::create(&path, &layout).unwrap();
    // 12 pencils over (temperature 4 × gas_pressure 3); rows of 3 along gas_pressure.
    let first: Vec<Pencil> = [5, 1, 2, 3, 4, 9]
        .iter()
        .map(|&i| pencil(&layout, i))
        .collect();
    w.write_pencils(&first).unwrap();
    let mut mask = vec![false; 12];
    for i in [1, 2, 3, 4, 5, 9] {
        mask[i] = true;
    }
    assert_eq!(w.done(), mask.as_slice());
    let twice: Vec<Pencil> = [0, 7, 0].iter().map(|&i| pencil(&layout, i)).collect();
    match w.write_pencils(&twice) {
        Err(StoreError::InvalidPencil { index, reason, .. }) => {
            assert_eq!(index, 0);
            assert!(reason.contains("twice"), "{reason}");
        }
        other => panic!("expected InvalidPencil, got {other:?}"),
    }
    assert_eq!(w.done(), mask.as_slice());
    drop(w);
    {
        let f = GridFile::open(&path).unwrap();
        assert_eq!(f.done_pencils().unwrap(), mask);
        check_contents(&f, &layout, &mask);
    }
    let (mut w, done) = GridWriter::resume(&path, DIGEST).unwrap();
    assert_eq!(done, mask);
    // the rest, with pencil 4 rewritten among them
    let rest: Vec<Pencil> = [11, 10, 0, 4, 6, 7, 8]
        .iter()
        .map(|&i| pencil(&layout, i))
        .collect();
    w.write_pencils(&rest).unwrap();
    w.finish().unwrap();
    let f = GridFile::open(&path).unwrap();
    assert!(f.is_complete());
    check_contents(&f, &layout, &[true; 12]);
}

#[test]
fn create_refuses_an_existing_path() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let layout = small_layout();
    let path = dir.path().join("taken.h5");
    std::fs::write(&path, b"precious").unwrap();
    match GridWriter::create(&path, &layout) {
        Err(StoreError::AlreadyExists { path: p }) => assert_eq!(p, path),
        other => panic!("expected AlreadyExists, got {other:?}"),
    }
    assert_eq!(std::fs::read(&path).unwrap(), b"precious");

    // An existing grid file is refused too.
    let grid = dir.path().join("grid.h5");
    GridWriter::create(&grid, &layout).unwrap();
    let e = GridWriter::create(&grid, &layout).unwrap_err();
    assert!(matches!(e, StoreError::AlreadyExists { .. }), "{e}");
    assert!(e.to_string().contains("grid.h5"), "{e}");
}

#[test]
fn unreadable_files_give_typed_errors() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let junk = dir.path().join("junk.h5");
    let mut bytes = Vec::new();
    let mut x = 0x1234_5678_u32;
    for _ in 0..5000 {
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        bytes.push(x as u8);
    }
    std::fs::write(&junk, &bytes).unwrap();
    for result in [
        GridFile::open(&junk).map(|_| ()),
        GridWriter::resume(&junk, DIGEST).map(|_| ()),
    ] {
        match result {
            Err(e @ StoreError::NotHdf5 { .. }) => assert!(e.to_string().contains("junk.h5")),
            other => panic!("expected NotHdf5, got {other:?}"),
        }
    }
    let empty = dir.path().join("empty.h5");
    std::fs::write(&empty, b"").unwrap();
    assert!(matches!(
        GridFile::open(&empty),
        Err(StoreError::NotHdf5 { .. })
    ));
    let missing = dir.path().join("missing.h5");
    assert!(matches!(
        GridFile::open(&missing),
        Err(StoreError::Io { .. })
    ));

    // A real grid file cut short.
    let grid = dir.path().join("grid.h5");
    let layout = small_layout();
    let mut w = GridWriter::create(&grid, &layout).unwrap();
    write_pencils(&mut w, &layout, 0..12);
    w.finish().unwrap();
    let full = std::fs::read(&grid).unwrap();
    let cut = dir.path().join("cut.h5");
    std::fs::write(&cut, &full[..full.len() / 2]).unwrap();
    match GridFile::open(&cut) {
        Err(e @ StoreError::Damaged { .. }) => assert!(e.to_string().contains("cut.h5"), "{e}"),
        other => panic!("expected Damaged, got {other:?}"),
    }

    // An HDF5 file that is not ours.
    let other = dir.path().join("other.h5");
    {
        let f = hdf5::File::create(&other).unwrap();
        f.new_dataset::<f64>().shape(3).create("x").unwrap();
    }
    for result in [
        GridFile::open(&other).map(|_| ()),
        GridWriter::resume(&other, DIGEST).map(|_| ()),
    ] {
        match result {
            Err(e @ StoreError::NotAGridFile { .. }) => {
                assert!(e.to_string().contains("'tool'"), "{e}");
                assert!(e.to_string().contains("other.h5"), "{e}");
            }
            other => panic!("expected NotAGridFile, got {other:?}"),
        }
    }
}

#[test]
fn bad_layouts_and_pencils_are_refused() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("g.h5");
    let invalid = |layout: &Layout, needle: &str| match GridWriter::create(&path, layout) {
        Err(StoreError::InvalidLayout { reason, .. }) => {
            assert!(reason.contains(needle), "{reason:?} lacks {needle:?}");
            assert!(!path.exists(), "no file is left behind");
        }
        other => panic!("expected InvalidLayout ({needle}), got {other:?}"),
    };
    let mut l = small_layout();
    l.provenance.retain(|(k, _)| k != "spec_digest");
    invalid(&l, "spec_digest");
    let mut l = small_layout();
    l.provenance.push(("complete".into(), "1".into()));
    invalid(&l, "complete");
    let mut l = small_layout();
    l.provenance.retain(|(k, _)| k != "physics_options");
    l.provenance
        .push(("physics_options".into(), "{not json".into()));
    invalid(&l, "JSON");
    let mut l = small_layout();
    l.axes[1].values = vec![1e2, 1e4, 1e3];
    invalid(&l, "strictly");
    let mut l = small_layout();
    l.axes[0].name = "line".into();
    invalid(&l, "reserved");
    let mut l = small_layout();
    l.datasets[1].name = "temperature".into();
    invalid(&l, "twice");
    let mut l = small_layout();
    l.datasets.pop();
    invalid(&l, "Status");
    let mut l = small_layout();
    l.status_flags.push((3, "two words".into()));
    invalid(&l, "one word");
    let mut l = small_layout();
    l.status_flags.push((255, "oops".into()));
    invalid(&l, "not_computed");
    let mut l = small_layout();
    l.lines.clear();
    invalid(&l, "line table");
    let mut l = small_layout();
    l.compression = 10;
    invalid(&l, "compression");

    let layout = small_layout();
    let mut w = GridWriter::create(&path, &layout).unwrap();
    let mut p = pencil(&layout, 2);
    p.data[0].pop();
    let e = w.write_pencil(&p).unwrap_err();
    assert!(
        matches!(e, StoreError::InvalidPencil { index: 2, .. }),
        "{e}"
    );
    assert!(e.to_string().contains("equivalent_width"), "{e}");
    let mut p = pencil(&layout, 2);
    p.index = 12;
    assert!(matches!(
        w.write_pencil(&p),
        Err(StoreError::InvalidPencil { index: 12, .. })
    ));
    let mut p = pencil(&layout, 2);
    p.status.push(0);
    assert!(matches!(
        w.write_pencil(&p),
        Err(StoreError::InvalidPencil { .. })
    ));
    assert!(w.done().iter().all(|d| !*d), "nothing was marked done");
}

#[test]
fn large_spec_text_and_single_axis_grids_work() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("one_axis.h5");
    let spec: String = (0..20_000).map(|i| format!("# line {i}\n")).collect();
    assert!(spec.len() > 200_000);
    let layout = Layout {
        title: String::new(),
        axes: vec![axis(
            "temperature",
            "K",
            "temperature",
            vec![9000.0, 7000.0, 5000.0],
        )],
        lines: (0..3).map(line).collect(),
        datasets: datasets(),
        compression: 0,
        provenance: provenance("d1", &spec),
        status_flags: vec![],
    };
    let mut w = GridWriter::create(&path, &layout).unwrap();
    assert_eq!(w.n_pencils(), 1);
    write_pencils(&mut w, &layout, [0]);
    w.finish().unwrap();
    let f = GridFile::open(&path).unwrap();
    assert_eq!(f.attribute("spec_text").as_deref(), Some(spec.as_str()));
    check_contents(&f, &layout, &[true]);
}

/// h5dump sees one chunk per pencil, shuffle + deflate, and the dimension-scale attributes.
#[test]
fn h5dump_shows_chunks_filters_and_dimension_scales() {
    let _serial = serial();
    if Command::new("h5dump").arg("--version").output().is_err() {
        eprintln!("h5dump not installed; skipping");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("grid.h5");
    let layout = small_layout();
    let mut w = GridWriter::create(&path, &layout).unwrap();
    write_pencils(&mut w, &layout, 0..12);
    w.finish().unwrap();
    let dump = |flag: &str| -> String {
        let out = Command::new("h5dump")
            .args([flag, "-p"])
            .arg(&path)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    };
    // The text of one DATASET block of an h5dump listing.
    fn block(text: &str, name: &str) -> String {
        let start = text
            .find(&format!("DATASET \"{name}\""))
            .unwrap_or_else(|| panic!("{name}"));
        let rest = &text[start..];
        let end = rest[1..].find("DATASET \"").map_or(rest.len(), |e| e + 1);
        rest[..end].to_string()
    }
    // Structure (-H: headers, no values).
    let header = dump("-H");
    let ew = block(&header, "equivalent_width");
    println!("---- h5dump -H -p: dataset equivalent_width ----\n{ew}");
    for needle in [
        "H5T_IEEE_F64LE",
        "( 4, 3, 2, 5 )",
        "CHUNKED ( 1, 1, 2, 5 )",
        "SHUFFLE",
        "DEFLATE",
        "LEVEL 4",
        "FILLVALUE",
        "DIMENSION_LIST",
        "\"units\"",
        "\"long_name\"",
        "\"_FillValue\"",
    ] {
        assert!(
            ew.contains(needle),
            "equivalent_width lacks {needle}:\n{ew}"
        );
    }
    let status = block(&header, "status");
    assert!(status.contains("CHUNKED ( 1, 1, 2 )"), "{status}");
    assert!(
        status.contains("H5T_STD_U8LE") && status.contains("\"flag_values\""),
        "{status}"
    );
    for name in ["temperature", "gas_pressure", "metallicity", "line"] {
        let b = block(&header, name);
        assert!(
            b.contains("REFERENCE_LIST") && b.contains("\"CLASS\""),
            "{name}:\n{b}"
        );
    }
    for name in ["label", "log_gf", "done"] {
        assert!(block(&header, name).contains("DIMENSION_LIST"), "{name}");
    }
    // Attribute values (-A).
    let attrs = dump("-A");
    let temperature = block(&attrs, "temperature");
    println!("---- h5dump -A -p: dataset temperature ----\n{temperature}");
    for needle in [
        "\"DIMENSION_SCALE\"",
        "(0): \"temperature\"",
        "\"/equivalent_width\"",
    ] {
        assert!(
            temperature.contains(needle),
            "temperature lacks {needle}:\n{temperature}"
        );
    }
    let pencil = block(&attrs, "pencil");
    assert!(
        pencil.contains("This is a netCDF dimension but not a netCDF variable.        12"),
        "{pencil}"
    );
    let label = block(&attrs, "label");
    assert!(
        label.contains("\"/line\"") && label.contains("H5T_CSET_UTF8"),
        "{label}"
    );
}

// ---- a writer killed with SIGKILL -----------------------------------------------------------

/// temperature 16 × gas_pressure 8 × depth 40, 300 lines: pencils of 96 kB so a kill lands
/// inside a write often.
fn big_layout() -> Layout {
    let lin = |n: usize, a: f64, step: f64| (0..n).map(|i| a + step * i as f64).collect();
    Layout {
        title: "kill test".into(),
        axes: vec![
            axis("temperature", "K", "temperature", lin(16, 3000.0, 250.0)),
            axis(
                "gas_pressure",
                "dyn cm-2",
                "log gas pressure",
                lin(8, 1.0, 0.5),
            ),
            axis("depth", "1", "depth index", lin(40, 0.0, 1.0)),
        ],
        lines: (0..300).map(line).collect(),
        datasets: datasets(),
        compression: 1,
        provenance: provenance(DIGEST, "kill"),
        status_flags: vec![(1, "not_converged".into()), (2, "out_of_range".into())],
    }
}

const CHILD_ENV: &str = "LINEGRID_STORE_KILL_CHILD";

/// Not a test on its own: the body of the child process of `survives_sigkill_mid_write`.
#[test]
#[ignore = "child process of survives_sigkill_mid_write"]
fn kill_child_writer() {
    let Some(path) = std::env::var_os(CHILD_ENV) else {
        return;
    };
    let path = PathBuf::from(path);
    let layout = big_layout();
    let (mut w, done) = if path.exists() {
        GridWriter::resume(&path, DIGEST).unwrap()
    } else {
        let w = GridWriter::create(&path, &layout).unwrap();
        let n = w.n_pencils();
        (w, vec![false; n])
    };
    let mut out = std::io::stdout().lock();
    for i in (0..done.len()).filter(|i| !done[*i]) {
        w.write_pencil(&pencil(&layout, i)).unwrap();
        writeln!(out, "wrote {i}").unwrap();
        out.flush().unwrap();
    }
    w.finish().unwrap();
    writeln!(out, "finished").unwrap();
}

/// Starts the child writer and kills it with SIGKILL once it reported `after` new pencils.
fn run_and_kill(path: &Path, after: usize) -> usize {
    let exe = std::env::current_exe().unwrap();
    let mut child = Command::new(exe)
        .args([
            "kill_child_writer",
            "--exact",
            "--ignored",
            "--nocapture",
            "--test-threads=1",
        ])
        .env(CHILD_ENV, path)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let reader = BufReader::new(child.stdout.take().unwrap());
    let mut seen = 0;
    for line in reader.lines() {
        let line = line.unwrap();
        if line.starts_with("wrote ") {
            seen += 1;
            if seen == after {
                child.kill().unwrap(); // SIGKILL
                break;
            }
        }
        assert_ne!(line, "finished", "the child finished before it was killed");
    }
    child.wait().unwrap();
    seen
}

#[test]
fn survives_sigkill_mid_write() {
    let _serial = serial();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("killed.h5");
    let layout = big_layout();
    let n = layout.n_pencils();
    let mut stored = 0;
    for after in [7, 23, 41] {
        let seen = run_and_kill(&path, after);
        assert_eq!(seen, after);
        let f = GridFile::open(&path).expect("a killed writer leaves a readable file");
        assert!(!f.is_complete());
        let done = f.done_pencils().unwrap();
        let count = done.iter().filter(|d| **d).count();
        // The child writes in order: done is a prefix holding at least what it reported (it may
        // have stored more before the signal arrived; the pencil in flight is not flagged).
        assert!(done[..count].iter().all(|d| *d), "done is not a prefix");
        assert!(
            count >= stored + after,
            "{count} stored, {stored} + {after} reported"
        );
        println!(
            "killed after {after} more reported pencils: {count} stored ({} beyond the reports)",
            count - stored - after
        );
        stored = count;
        check_contents_with(&f, &layout, &done, true);
    }
    let (mut w, done) = GridWriter::resume(&path, DIGEST).unwrap();
    let missing: Vec<usize> = (0..n).filter(|i| !done[*i]).collect();
    write_pencils(&mut w, &layout, missing);
    w.finish().unwrap();
    let f = GridFile::open(&path).unwrap();
    assert!(f.is_complete());
    check_contents(&f, &layout, &vec![true; n]);
}

#[test]
fn writer_and_reader_can_move_between_threads() {
    fn assert_send<T: Send>() {}
    assert_send::<GridWriter>();
    assert_send::<GridFile>();
    assert_send::<StoreError>();
}
