//! HDF5 storage of a computed grid: a self-describing file that h5py, xarray (netCDF-4 via
//! h5netcdf) and any HDF5 reader can open without knowing linegrid.
//!
//! # Layout (format version 1)
//!
//! ```text
//! /                          root attributes: title, tool = "linegrid", tool_version,
//!                            format_version, spec_text, spec_digest, atomic_data_digest,
//!                            physics_options (JSON), other provenance, created (ISO 8601 UTC),
//!                            conventions (this layout in words), axes and data_variables
//!                            (names in order, space separated), complete (0/1, set last)
//! /<axis>                    f64 [n_axis]; units, long_name; dimension scale named <axis>
//! /line                      i32 [n_lines] = 0..n_lines; dimension scale "line"
//! /<per-line variable>       f64 [axis sizes..., n_lines]; units, long_name, _FillValue = NaN
//! /<per-point variable>      f64 [axis sizes...]
//! /status                    u8  [axis sizes...]; flag_values, flag_meanings; 255 = not_computed
//! /lines/{label,species,family}                        UTF-8 strings [line]
//! /lines/{wavelength_vac_nm,wavelength_air_nm,lower_cm,upper_cm,log_gf}   f64 [line]
//! /progress/pencil           netCDF dimension without a variable, length n_pencils
//! /progress/done             u8 [pencil]; 1 once the pencil's data are stored
//! ```
//!
//! Every dimension of every dataset is attached to its dimension scale (`DIMENSION_LIST` /
//! `REFERENCE_LIST`), so `ds.dims[i][0]` in h5py is the axis and xarray shows named dimensions
//! without `phony_dims`. Axis and line datasets are coordinate variables (dataset name = scale
//! name); `/progress/pencil` follows netCDF-4's "dimension but not a variable" convention.
//!
//! # Work unit
//!
//! A *pencil* is all points along the last axis with the other axis indices fixed; pencils are
//! numbered row-major over all axes but the last. Data variables are chunked one pencil per chunk
//! (`1, ..., 1, n_last[, n_lines]`), shuffled and deflated. [`GridWriter::write_pencil`] and
//! [`GridWriter::write_pencils`] (a batch) store the data, flush, then set `done` and flush
//! again, so a process killed at any moment leaves a file whose `done` pencils are all fully
//! written; at most the pencils in flight are lost. Points never written read as NaN (status
//! 255).
//!
//! Flushing hands the data to the operating system (`H5Fflush`); it does not `fsync`, so the
//! guarantee covers a killed process, not a power cut.
//!
//! # Locking
//!
//! HDF5 locks an open file (`flock`): one writer, or any number of readers. A reader in another
//! process that wants to watch a grid being written needs `HDF5_USE_FILE_LOCKING=FALSE`; it sees
//! the last flush, which is consistent at pencil boundaries. The store marks HDF5's descriptor
//! close-on-exec right after opening, so child processes do not inherit the file and its lock.
//!
//! # Thread safety
//!
//! hdf5-metno serialises its calls to the HDF5 library with a global reentrant lock; the few raw
//! high-level (dimension scale) calls here take the same lock.

use std::ffi::CString;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use hdf5::plist::file_create::{AttrCreationOrder, LinkCreationOrder};
use hdf5::types::{FloatSize, H5Type, IntSize, TypeDescriptor, VarLenUnicode};
use hdf5::{Dataset, Dataspace, Datatype, File, Group, Hyperslab, Location, SliceOrIndex};
use ndarray::{ArrayD, IxDyn};

/// Version of the layout written by this module; readers refuse other versions.
pub const FORMAT_VERSION: i32 = 1;
/// Status code of a point never computed (the fill value of `status`).
pub const STATUS_NOT_COMPUTED: u8 = 255;
/// Status code of a converged point.
pub const STATUS_CONVERGED: u8 = 0;
/// Value of the root attribute `tool`.
pub const TOOL: &str = "linegrid";

const LINE_DIM: &str = "line";
const LINES_GROUP: &str = "lines";
const PROGRESS_GROUP: &str = "progress";
const PENCIL_DIM: &str = "pencil";
const DONE: &str = "done";
const DONE_PATH: &str = "progress/done";
/// netCDF-4's marker for a dimension scale that is not also a variable.
const NETCDF_DIM_ONLY: &str = "This is a netCDF dimension but not a netCDF variable.";
/// Provenance keys every layout must carry.
pub const REQUIRED_PROVENANCE: [&str; 4] = [
    "spec_text",
    "spec_digest",
    "atomic_data_digest",
    "physics_options",
];
/// Root attribute names the store writes itself; provenance may not use them.
const RESERVED_ROOT_ATTRS: [&str; 8] = [
    "title",
    "tool",
    "format_version",
    "created",
    "complete",
    "conventions",
    "axes",
    "data_variables",
];
/// Names that axes and data variables may not take (they are used by the layout).
const RESERVED_NAMES: [&str; 5] = [LINE_DIM, LINES_GROUP, PROGRESS_GROUP, PENCIL_DIM, DONE];

const CONVENTIONS: &str = "linegrid grid file, format 1. Root attribute `axes` lists the axes in \
order; each axis is a 1-D float64 dataset at the root that is an HDF5 dimension scale of the same \
name. Root attribute `data_variables` lists the data datasets in order: per-line quantities have \
shape (axes..., line), per-point quantities shape (axes...); every dimension is attached to its \
scale. `line` indexes the parallel datasets of group `lines` (label, species, family, \
wavelength_vac_nm, wavelength_air_nm (NaN when none), lower_cm, upper_cm, log_gf). A pencil is \
all points along the last axis with the other indices fixed, numbered row-major over the other \
axes; progress/done[pencil] is 1 once the pencil's data are stored. Values never computed are NaN \
(float64) and status 255 (not_computed); `status` meanings are in its flag_values and \
flag_meanings. `complete` is 1 only after every pencil was written and the writer finished. \
Variable attributes follow CF names (units, long_name, _FillValue, flag_values, flag_meanings); \
dimension scales follow netCDF-4, so the file opens as netCDF-4.";

// ---------------------------------------------------------------------------------------------
// Description of a grid
// ---------------------------------------------------------------------------------------------

/// One axis of the grid.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisMeta {
    /// Dataset and dimension name (an identifier, e.g. `temperature`).
    pub name: String,
    /// Units (e.g. `K`).
    pub units: String,
    /// Human-readable description.
    pub long_name: String,
    /// Node values, strictly increasing or strictly decreasing, finite.
    pub values: Vec<f64>,
}

/// What a data variable holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DataKind {
    /// A float64 quantity, NaN where not computed.
    F64,
    /// The per-point `u8` status code (exactly one per layout, per point).
    Status,
}

/// One data variable of the grid.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DatasetMeta {
    /// Dataset name (an identifier).
    pub name: String,
    /// Units (`1` for dimensionless).
    pub units: String,
    /// Human-readable description.
    pub long_name: String,
    /// True for one value per line and point, false for one value per point.
    pub per_line: bool,
    /// Float64 quantity or the status code.
    pub kind: DataKind,
}

/// One row of the line table.
#[derive(Debug, Clone, PartialEq)]
pub struct LineRecord {
    /// Short unique label of the line.
    pub label: String,
    /// Species, e.g. `Fe I`.
    pub species: String,
    /// Family or multiplet name.
    pub family: String,
    /// Vacuum wavelength, nm.
    pub wavelength_vac_nm: f64,
    /// Air wavelength, nm, where defined.
    pub wavelength_air_nm: Option<f64>,
    /// Lower level energy, cm^-1.
    pub lower_cm: f64,
    /// Upper level energy, cm^-1.
    pub upper_cm: f64,
    /// log10 of g·f.
    pub log_gf: f64,
}

/// Everything [`GridWriter::create`] needs to lay out a file.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// Root attribute `title`.
    pub title: String,
    /// Grid axes, outermost first; pencils run along the last one.
    pub axes: Vec<AxisMeta>,
    /// The line table (at least one line).
    pub lines: Vec<LineRecord>,
    /// Data variables, including exactly one of kind [`DataKind::Status`].
    pub datasets: Vec<DatasetMeta>,
    /// Deflate level 0..=9 (0 = no compression; data stay chunked).
    pub compression: u8,
    /// Root attributes of provenance, written as UTF-8 strings. Must include
    /// [`REQUIRED_PROVENANCE`]; `physics_options` must be JSON; `tool_version` defaults to this
    /// crate's version.
    pub provenance: Vec<(String, String)>,
    /// Status codes other than 0 (`converged`) and 255 (`not_computed`), which are always
    /// defined; meanings are single words (CF `flag_meanings`).
    pub status_flags: Vec<(u8, String)>,
}

impl Layout {
    /// Sizes of the axes, outermost first.
    pub fn shape(&self) -> Vec<usize> {
        self.axes.iter().map(|a| a.values.len()).collect()
    }

    /// Number of pencils: product of all axis sizes but the last.
    pub fn n_pencils(&self) -> usize {
        pencil_count(&self.shape())
    }

    /// Number of points in one pencil (size of the last axis).
    pub fn pencil_len(&self) -> usize {
        self.axes.last().map_or(0, |a| a.values.len())
    }

    /// Index of pencil `index` along each axis but the last.
    pub fn pencil_indices(&self, index: usize) -> Vec<usize> {
        unravel(index, &self.shape())
    }
}

/// The data of one pencil, as written by [`GridWriter::write_pencil`].
#[derive(Debug, Clone, PartialEq)]
pub struct Pencil {
    /// Pencil number, 0..n_pencils, row-major over all axes but the last.
    pub index: usize,
    /// One vector per [`DataKind::F64`] variable, in layout order: `pencil_len × n_lines` values
    /// (point-major: all lines of the first point, then the next point) for per-line
    /// variables, `pencil_len` values for per-point ones.
    pub data: Vec<Vec<f64>>,
    /// Status code of each point along the pencil.
    pub status: Vec<u8>,
}

// ---------------------------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------------------------

/// Errors of the grid store; each names the file and, where there is one, the dataset.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    /// [`GridWriter::create`] found something at the path.
    #[error("{}: already exists; refusing to overwrite it", path.display())]
    AlreadyExists {
        /// The file.
        path: PathBuf,
    },
    /// The file could not be read at all (missing, permissions).
    #[error("{}: cannot read: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// The file has no HDF5 signature.
    #[error("{}: not an HDF5 file (no HDF5 signature)", path.display())]
    NotHdf5 {
        /// The file.
        path: PathBuf,
    },
    /// The file has an HDF5 signature but HDF5 cannot open it: truncated or damaged.
    #[error("{}: HDF5 file is truncated or damaged: {source}", path.display())]
    Damaged {
        /// The file.
        path: PathBuf,
        /// HDF5's error.
        source: hdf5::Error,
    },
    /// HDF5 refused to open the file because it is in use: locked by another process, or
    /// already open in this one in a mode that conflicts (e.g. a reader open while resuming).
    #[error("{}: file is in use and cannot be opened now: {source}", path.display())]
    Busy {
        /// The file.
        path: PathBuf,
        /// HDF5's error.
        source: hdf5::Error,
    },
    /// An HDF5 file, but not (or not wholly) a linegrid grid file.
    #[error("{}: not a linegrid grid file: {reason}", path.display())]
    NotAGridFile {
        /// The file.
        path: PathBuf,
        /// What is missing or wrong (names the attribute or dataset).
        reason: String,
    },
    /// A linegrid grid file of another format version.
    #[error(
        "{}: grid file format version {found}; this build reads version {FORMAT_VERSION}",
        path.display()
    )]
    UnsupportedFormat {
        /// The file.
        path: PathBuf,
        /// The file's `format_version`.
        found: i64,
    },
    /// [`GridWriter::resume`] found a file computed from another spec.
    #[error(
        "{}: spec digest differs: the file holds a grid of spec {found}, expected {expected}",
        path.display()
    )]
    DigestMismatch {
        /// The file.
        path: PathBuf,
        /// The digest the caller expected.
        expected: String,
        /// The file's `spec_digest`.
        found: String,
    },
    /// The layout given to [`GridWriter::create`] is unusable.
    #[error("{}: invalid layout: {reason}", path.display())]
    InvalidLayout {
        /// The file that was to be created.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// A pencil does not fit the layout.
    #[error("{}: pencil {index}: {reason}", path.display())]
    InvalidPencil {
        /// The file.
        path: PathBuf,
        /// The pencil's index.
        index: usize,
        /// What is wrong.
        reason: String,
    },
    /// No data variable of that name.
    #[error("{}: no data variable '{name}' (the file has: {known})", path.display())]
    UnknownDataset {
        /// The file.
        path: PathBuf,
        /// The name asked for.
        name: String,
        /// The names present.
        known: String,
    },
    /// The data variable holds another kind of value than asked for.
    #[error("{}: dataset '{name}' is {found}; {hint}", path.display())]
    WrongKind {
        /// The file.
        path: PathBuf,
        /// The dataset.
        name: String,
        /// What it holds.
        found: &'static str,
        /// What to call instead.
        hint: &'static str,
    },
    /// [`GridWriter::finish`] was called before every pencil was written.
    #[error(
        "{}: {missing} of {total} pencils not written; the file stays incomplete (complete = 0) \
         and can be resumed",
        path.display()
    )]
    Incomplete {
        /// The file.
        path: PathBuf,
        /// Pencils not yet written.
        missing: usize,
        /// All pencils.
        total: usize,
    },
    /// The HDF5 library failed.
    #[error("{}: HDF5 error at '{object}': {source}", path.display())]
    Hdf5 {
        /// The file.
        path: PathBuf,
        /// The dataset, group or attribute concerned.
        object: String,
        /// HDF5's error.
        source: hdf5::Error,
    },
}

impl StoreError {
    /// The file the error concerns.
    pub fn path(&self) -> &Path {
        match self {
            StoreError::AlreadyExists { path }
            | StoreError::Io { path, .. }
            | StoreError::NotHdf5 { path }
            | StoreError::Damaged { path, .. }
            | StoreError::Busy { path, .. }
            | StoreError::NotAGridFile { path, .. }
            | StoreError::UnsupportedFormat { path, .. }
            | StoreError::DigestMismatch { path, .. }
            | StoreError::InvalidLayout { path, .. }
            | StoreError::InvalidPencil { path, .. }
            | StoreError::UnknownDataset { path, .. }
            | StoreError::WrongKind { path, .. }
            | StoreError::Incomplete { path, .. }
            | StoreError::Hdf5 { path, .. } => path,
        }
    }
}

type Result<T> = std::result::Result<T, StoreError>;

/// Maps an HDF5 error to [`StoreError::Hdf5`] naming `path` and `object`.
fn h5<'a>(path: &'a Path, object: &'a str) -> impl FnOnce(hdf5::Error) -> StoreError + 'a {
    move |source| StoreError::Hdf5 {
        path: path.to_path_buf(),
        object: object.to_string(),
        source,
    }
}

fn not_grid(path: &Path, reason: impl Into<String>) -> StoreError {
    StoreError::NotAGridFile {
        path: path.to_path_buf(),
        reason: reason.into(),
    }
}

// ---------------------------------------------------------------------------------------------
// Dimension scales (HDF5 high-level library)
// ---------------------------------------------------------------------------------------------

mod h5ds {
    //! The three `H5DS` functions the store needs. hdf5-metno-sys links `libhdf5_hl` with its
    //! `hl` feature but declares none of its functions.

    use std::ffi::CStr;
    use std::os::raw::{c_char, c_uint};

    use hdf5_sys::h5::{herr_t, htri_t};
    use hdf5_sys::h5i::hid_t;

    unsafe extern "C" {
        fn H5DSset_scale(dsid: hid_t, dimname: *const c_char) -> herr_t;
        fn H5DSattach_scale(did: hid_t, dsid: hid_t, idx: c_uint) -> herr_t;
        fn H5DSis_scale(did: hid_t) -> htri_t;
    }

    fn failed(call: &str) -> hdf5::Error {
        match hdf5::Error::query() {
            Ok(e) => e,
            Err(_) => hdf5::Error::from(format!("{call} failed").as_str()),
        }
    }

    /// Makes dataset `dataset` a dimension scale called `name`.
    pub fn set_scale(dataset: &hdf5::Dataset, name: &CStr) -> hdf5::Result<()> {
        let _lock = hdf5_sys::LOCK.lock();
        // SAFETY: a valid dataset id and a NUL-terminated string that outlives the call.
        let rc = unsafe { H5DSset_scale(dataset.id(), name.as_ptr()) };
        if rc < 0 {
            Err(failed("H5DSset_scale"))
        } else {
            Ok(())
        }
    }

    /// Attaches scale `scale` to dimension `dim` of `dataset`.
    pub fn attach_scale(
        dataset: &hdf5::Dataset,
        scale: &hdf5::Dataset,
        dim: usize,
    ) -> hdf5::Result<()> {
        let idx = c_uint::try_from(dim).map_err(|_| hdf5::Error::from("dimension index"))?;
        let _lock = hdf5_sys::LOCK.lock();
        // SAFETY: two valid dataset ids of the same file.
        let rc = unsafe { H5DSattach_scale(dataset.id(), scale.id(), idx) };
        if rc < 0 {
            Err(failed("H5DSattach_scale"))
        } else {
            Ok(())
        }
    }

    /// Whether `dataset` is a dimension scale.
    pub fn is_scale(dataset: &hdf5::Dataset) -> hdf5::Result<bool> {
        let _lock = hdf5_sys::LOCK.lock();
        // SAFETY: a valid dataset id.
        let rc = unsafe { H5DSis_scale(dataset.id()) };
        if rc < 0 {
            Err(failed("H5DSis_scale"))
        } else {
            Ok(rc > 0)
        }
    }
}

fn set_scale(path: &Path, dataset: &Dataset, object: &str, name: &str) -> Result<()> {
    let cname = CString::new(name).map_err(|_| StoreError::InvalidLayout {
        path: path.to_path_buf(),
        reason: format!("scale name {name:?} contains NUL"),
    })?;
    h5ds::set_scale(dataset, &cname).map_err(h5(path, object))
}

fn attach_scales(path: &Path, dataset: &Dataset, object: &str, scales: &[&Dataset]) -> Result<()> {
    for (dim, scale) in scales.iter().enumerate() {
        h5ds::attach_scale(dataset, scale, dim).map_err(h5(path, object))?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Small helpers
// ---------------------------------------------------------------------------------------------

fn pencil_count(shape: &[usize]) -> usize {
    match shape.split_last() {
        Some((_, outer)) => outer.iter().product(),
        None => 0,
    }
}

/// Indices along all axes but the last of pencil `index` (row-major).
fn unravel(mut index: usize, shape: &[usize]) -> Vec<usize> {
    let outer = &shape[..shape.len().saturating_sub(1)];
    let mut idx = vec![0; outer.len()];
    for d in (0..outer.len()).rev() {
        idx[d] = index % outer[d];
        index /= outer[d];
    }
    idx
}

fn vlu(path: &Path, object: &str, s: &str) -> Result<VarLenUnicode> {
    s.parse::<VarLenUnicode>()
        .map_err(|e| StoreError::InvalidLayout {
            path: path.to_path_buf(),
            reason: format!("{object}: {e}"),
        })
}

fn write_str_attr(
    path: &Path,
    loc: &Location,
    object: &str,
    name: &str,
    value: &str,
) -> Result<()> {
    let v = vlu(path, object, value)?;
    let what = format!("{object}@{name}");
    loc.new_attr::<VarLenUnicode>()
        .create(name)
        .and_then(|a| a.write_scalar(&v))
        .map_err(h5(path, &what))
}

fn write_i32_attr(path: &Path, loc: &Location, object: &str, name: &str, value: i32) -> Result<()> {
    let what = format!("{object}@{name}");
    loc.new_attr::<i32>()
        .create(name)
        .and_then(|a| a.write_scalar(&value))
        .map_err(h5(path, &what))
}

/// A string attribute, or None when absent or not a string.
fn read_str_attr(loc: &Location, name: &str) -> Option<String> {
    let attr = loc.attr(name).ok()?;
    match attr.dtype().ok()?.to_descriptor().ok()? {
        TypeDescriptor::VarLenUnicode => attr
            .read_scalar::<VarLenUnicode>()
            .ok()
            .map(|s| s.as_str().to_string()),
        TypeDescriptor::VarLenAscii => attr
            .read_scalar::<hdf5::types::VarLenAscii>()
            .ok()
            .map(|s| s.as_str().to_string()),
        _ => None,
    }
}

fn require_str_attr(path: &Path, loc: &Location, object: &str, name: &str) -> Result<String> {
    read_str_attr(loc, name)
        .ok_or_else(|| not_grid(path, format!("attribute '{name}' of '{object}' is missing")))
}

fn read_int_attr(loc: &Location, name: &str) -> Option<i64> {
    let attr = loc.attr(name).ok()?;
    match attr.dtype().ok()?.to_descriptor().ok()? {
        TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) => attr.read_scalar::<i64>().ok(),
        _ => None,
    }
}

/// Any attribute as text: strings as they are, numbers formatted, arrays space separated.
fn attr_as_text(loc: &Location, name: &str) -> Option<String> {
    if let Some(s) = read_str_attr(loc, name) {
        return Some(s);
    }
    let attr = loc.attr(name).ok()?;
    let join = |v: Vec<String>| v.join(" ");
    match attr.dtype().ok()?.to_descriptor().ok()? {
        TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) | TypeDescriptor::Boolean => attr
            .read_raw::<i64>()
            .ok()
            .map(|v| join(v.iter().map(i64::to_string).collect())),
        TypeDescriptor::Float(_) => attr
            .read_raw::<f64>()
            .ok()
            .map(|v| join(v.iter().map(f64::to_string).collect())),
        _ => None,
    }
}

fn is_identifier(name: &str) -> bool {
    let mut chars = name.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// Current time as ISO 8601 UTC, e.g. `2025-03-01T12:00:00Z`.
fn utc_now_iso8601() -> String {
    let secs = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    let (days, rem) = (secs / 86_400, secs % 86_400);
    // Civil date from days since 1970-01-01 (proleptic Gregorian calendar).
    let z = days as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// Whether the file starts with the HDF5 signature at offset 0, 512, 1024, 2048, ...
fn has_hdf5_signature(path: &Path) -> std::io::Result<bool> {
    const SIG: [u8; 8] = [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'];
    let mut f = std::fs::File::open(path)?;
    let len = f.metadata()?.len();
    let mut offset = 0u64;
    let mut buf = [0u8; 8];
    loop {
        if offset + 8 > len {
            return Ok(false);
        }
        std::io::Seek::seek(&mut f, std::io::SeekFrom::Start(offset))?;
        f.read_exact(&mut buf)?;
        if buf == SIG {
            return Ok(true);
        }
        offset = if offset == 0 { 512 } else { offset * 2 };
    }
}

/// Marks the file's descriptor close-on-exec (Unix, default `sec2` driver; best effort).
///
/// HDF5 opens files without `O_CLOEXEC`, so a child process started while a grid file is open
/// would inherit the descriptor and with it HDF5's `flock` on the file, which would then outlive
/// this process and make [`GridWriter::resume`] fail with [`StoreError::Busy`]. A child
/// started between the open and this call can still inherit it.
fn close_on_exec(file: &File) {
    #[cfg(unix)]
    {
        use std::os::raw::{c_int, c_void};
        unsafe extern "C" {
            fn fcntl(fd: c_int, cmd: c_int, ...) -> c_int;
        }
        // The same values on Linux, the BSDs and macOS.
        const F_GETFD: c_int = 1;
        const F_SETFD: c_int = 2;
        const FD_CLOEXEC: c_int = 1;
        let is_sec2 = file
            .access_plist()
            .and_then(|p| p.get_driver())
            .is_ok_and(|d| matches!(d, hdf5::plist::file_access::FileDriver::Sec2));
        if !is_sec2 {
            return;
        }
        let _lock = hdf5_sys::LOCK.lock();
        let mut handle: *mut c_void = std::ptr::null_mut();
        // SAFETY: a valid file id; for the sec2 driver the handle points to the `int` descriptor.
        unsafe {
            let rc = hdf5_sys::h5f::H5Fget_vfd_handle(
                file.id(),
                hdf5_sys::h5p::H5P_DEFAULT,
                &mut handle,
            );
            if rc < 0 || handle.is_null() {
                return;
            }
            let fd = *handle.cast::<c_int>();
            let flags = fcntl(fd, F_GETFD);
            if flags >= 0 {
                fcntl(fd, F_SETFD, flags | FD_CLOEXEC);
            }
        }
    }
    #[cfg(not(unix))]
    let _ = file;
}

/// Opens an HDF5 file, telling "missing", "not HDF5", "in use" and "damaged" apart.
fn open_hdf5(path: &Path, write: bool) -> Result<File> {
    let io = |source| StoreError::Io {
        path: path.to_path_buf(),
        source,
    };
    std::fs::File::open(path).map_err(io)?;
    let opened = if write {
        File::open_rw(path)
    } else {
        File::open(path)
    };
    match opened {
        Ok(f) => {
            close_on_exec(&f);
            Ok(f)
        }
        Err(source) => {
            if has_hdf5_signature(path).map_err(io)? {
                let text = source.to_string().to_lowercase();
                if text.contains("already open") || text.contains("unable to lock") {
                    Err(StoreError::Busy {
                        path: path.to_path_buf(),
                        source,
                    })
                } else {
                    Err(StoreError::Damaged {
                        path: path.to_path_buf(),
                        source,
                    })
                }
            } else {
                Err(StoreError::NotHdf5 {
                    path: path.to_path_buf(),
                })
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Layout validation
// ---------------------------------------------------------------------------------------------

fn validate(path: &Path, layout: &Layout) -> Result<()> {
    let bad = |reason: String| StoreError::InvalidLayout {
        path: path.to_path_buf(),
        reason,
    };
    if layout.axes.is_empty() {
        return Err(bad("no axes".into()));
    }
    let mut names: Vec<String> = Vec::new();
    let mut check_name = |name: &str, what: &str| -> Result<()> {
        if !is_identifier(name) {
            return Err(bad(format!(
                "{what} name {name:?} is not an identifier ([A-Za-z_][A-Za-z0-9_]*)"
            )));
        }
        if RESERVED_NAMES.contains(&name) {
            return Err(bad(format!(
                "{what} name {name:?} is reserved by the layout"
            )));
        }
        if names.iter().any(|n| n == name) {
            return Err(bad(format!("name {name:?} is used twice")));
        }
        names.push(name.to_string());
        Ok(())
    };
    for axis in &layout.axes {
        check_name(&axis.name, "axis")?;
        if axis.values.is_empty() {
            return Err(bad(format!("axis '{}' has no values", axis.name)));
        }
        if let Some(v) = axis.values.iter().find(|v| !v.is_finite()) {
            return Err(bad(format!(
                "axis '{}' has a non-finite value {v}",
                axis.name
            )));
        }
        let up = axis.values.windows(2).all(|w| w[0] < w[1]);
        let down = axis.values.windows(2).all(|w| w[0] > w[1]);
        if !(up || down) {
            return Err(bad(format!(
                "axis '{}' is not strictly increasing or strictly decreasing",
                axis.name
            )));
        }
    }
    for d in &layout.datasets {
        check_name(&d.name, "dataset")?;
    }
    let n_status = layout
        .datasets
        .iter()
        .filter(|d| d.kind == DataKind::Status)
        .count();
    if n_status != 1 {
        return Err(bad(format!(
            "{n_status} datasets of kind Status; exactly one is needed"
        )));
    }
    if let Some(d) = layout
        .datasets
        .iter()
        .find(|d| d.kind == DataKind::Status && d.per_line)
    {
        return Err(bad(format!(
            "status dataset '{}' must be per point, not per line",
            d.name
        )));
    }
    if layout.lines.is_empty() {
        return Err(bad("the line table is empty".into()));
    }
    if i32::try_from(layout.lines.len()).is_err() {
        return Err(bad(format!(
            "{} lines exceed the i32 line index",
            layout.lines.len()
        )));
    }
    let strings = |l: &LineRecord| [l.label.clone(), l.species.clone(), l.family.clone()];
    for (i, l) in layout.lines.iter().enumerate() {
        if strings(l).iter().any(|s| s.contains('\0')) {
            return Err(bad(format!("line {i} has a NUL character in a text field")));
        }
    }
    if layout.compression > 9 {
        return Err(bad(format!(
            "compression level {} is not in 0..=9",
            layout.compression
        )));
    }
    // One chunk per pencil; HDF5 limits a chunk to 4 GiB.
    let chunk_bytes = layout.pencil_len() as u128 * layout.lines.len() as u128 * 8;
    if chunk_bytes >= 1 << 32 {
        return Err(bad(format!(
            "a pencil chunk of {chunk_bytes} bytes exceeds HDF5's 4 GiB"
        )));
    }
    let mut keys: Vec<&str> = Vec::new();
    for (k, v) in &layout.provenance {
        if k.is_empty() || k.contains('\0') || v.contains('\0') {
            return Err(bad(format!(
                "provenance entry {k:?} is empty or contains NUL"
            )));
        }
        if RESERVED_ROOT_ATTRS.contains(&k.as_str()) {
            return Err(bad(format!(
                "provenance key {k:?} is written by the store itself"
            )));
        }
        if keys.contains(&k.as_str()) {
            return Err(bad(format!("provenance key {k:?} given twice")));
        }
        keys.push(k);
    }
    for req in REQUIRED_PROVENANCE {
        if !keys.contains(&req) {
            return Err(bad(format!("provenance lacks '{req}'")));
        }
    }
    if let Some((_, v)) = layout
        .provenance
        .iter()
        .find(|(k, _)| k == "physics_options")
    {
        if let Err(e) = serde_json::from_str::<serde_json::Value>(v) {
            return Err(bad(format!("physics_options is not JSON: {e}")));
        }
    }
    let mut codes: Vec<u8> = Vec::new();
    for (code, meaning) in &layout.status_flags {
        if meaning.is_empty() || meaning.chars().any(|c| c.is_whitespace() || c == '\0') {
            return Err(bad(format!("status meaning {meaning:?} must be one word")));
        }
        let fixed = match *code {
            STATUS_CONVERGED => Some("converged"),
            STATUS_NOT_COMPUTED => Some("not_computed"),
            _ => None,
        };
        if let Some(f) = fixed {
            if meaning != f {
                return Err(bad(format!("status code {code} is reserved for '{f}'")));
            }
        }
        if codes.contains(code) {
            return Err(bad(format!("status code {code} defined twice")));
        }
        codes.push(*code);
    }
    Ok(())
}

/// The status flags of a layout with 0 = converged and 255 = not_computed added, sorted.
fn full_status_flags(flags: &[(u8, String)]) -> Vec<(u8, String)> {
    let mut all: Vec<(u8, String)> = flags.to_vec();
    for (code, meaning) in [
        (STATUS_CONVERGED, "converged"),
        (STATUS_NOT_COMPUTED, "not_computed"),
    ] {
        if !all.iter().any(|(c, _)| *c == code) {
            all.push((code, meaning.to_string()));
        }
    }
    all.sort_by_key(|(c, _)| *c);
    all
}

// ---------------------------------------------------------------------------------------------
// The structure of an open file
// ---------------------------------------------------------------------------------------------

/// What a reader or a resumed writer knows about a file.
#[derive(Debug, Clone)]
struct Structure {
    title: String,
    axes: Vec<AxisMeta>,
    lines: Vec<LineRecord>,
    datasets: Vec<DatasetMeta>,
    status_flags: Vec<(u8, String)>,
}

impl Structure {
    fn shape(&self) -> Vec<usize> {
        self.axes.iter().map(|a| a.values.len()).collect()
    }

    fn n_pencils(&self) -> usize {
        pencil_count(&self.shape())
    }

    fn pencil_len(&self) -> usize {
        self.axes.last().map_or(0, |a| a.values.len())
    }

    fn status_name(&self) -> &str {
        self.datasets
            .iter()
            .find(|d| d.kind == DataKind::Status)
            .map_or("status", |d| d.name.as_str())
    }

    fn f64_datasets(&self) -> impl Iterator<Item = &DatasetMeta> {
        self.datasets.iter().filter(|d| d.kind == DataKind::F64)
    }

    fn known(&self) -> String {
        self.datasets
            .iter()
            .map(|d| d.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    }
}

fn read_f64_1d(path: &Path, ds: &Dataset, object: &str) -> Result<Vec<f64>> {
    ds.read_raw::<f64>().map_err(h5(path, object))
}

fn read_str_1d(path: &Path, ds: &Dataset, object: &str) -> Result<Vec<String>> {
    let v = ds.read_raw::<VarLenUnicode>().map_err(h5(path, object))?;
    Ok(v.iter().map(|s| s.as_str().to_string()).collect())
}

fn open_dataset(path: &Path, group: &Group, name: &str) -> Result<Dataset> {
    group
        .dataset(name)
        .map_err(|_| not_grid(path, format!("dataset '{name}' is missing")))
}

/// Reads and checks the structure of a file that claims to be a linegrid grid file.
fn load_structure(path: &Path, file: &File) -> Result<Structure> {
    match read_str_attr(file, "tool") {
        Some(t) if t == TOOL => {}
        Some(t) => return Err(not_grid(path, format!("root attribute 'tool' is {t:?}"))),
        None => return Err(not_grid(path, "root attribute 'tool' is missing")),
    }
    match read_int_attr(file, "format_version") {
        Some(v) if v == i64::from(FORMAT_VERSION) => {}
        Some(v) => {
            return Err(StoreError::UnsupportedFormat {
                path: path.to_path_buf(),
                found: v,
            });
        }
        None => return Err(not_grid(path, "root attribute 'format_version' is missing")),
    }
    if read_int_attr(file, "complete").is_none() {
        return Err(not_grid(path, "root attribute 'complete' is missing"));
    }
    let title = require_str_attr(path, file, "/", "title")?;
    let axis_names = require_str_attr(path, file, "/", "axes")?;
    let var_names = require_str_attr(path, file, "/", "data_variables")?;

    let mut axes = Vec::new();
    for name in axis_names.split_whitespace() {
        let ds = open_dataset(path, file, name)?;
        if ds.ndim() != 1 {
            return Err(not_grid(path, format!("axis '{name}' is not 1-D")));
        }
        axes.push(AxisMeta {
            name: name.to_string(),
            units: require_str_attr(path, &ds, name, "units")?,
            long_name: require_str_attr(path, &ds, name, "long_name")?,
            values: read_f64_1d(path, &ds, name)?,
        });
    }
    if axes.is_empty() {
        return Err(not_grid(path, "root attribute 'axes' names no axis"));
    }
    let shape: Vec<usize> = axes.iter().map(|a| a.values.len()).collect();

    let lines_group = file
        .group(LINES_GROUP)
        .map_err(|_| not_grid(path, format!("group '{LINES_GROUP}' is missing")))?;
    let text = |name: &str| -> Result<Vec<String>> {
        let object = format!("{LINES_GROUP}/{name}");
        read_str_1d(path, &open_dataset(path, &lines_group, name)?, &object)
    };
    let num = |name: &str| -> Result<Vec<f64>> {
        let object = format!("{LINES_GROUP}/{name}");
        read_f64_1d(path, &open_dataset(path, &lines_group, name)?, &object)
    };
    let (label, species, family) = (text("label")?, text("species")?, text("family")?);
    let (vac, air) = (num("wavelength_vac_nm")?, num("wavelength_air_nm")?);
    let (lower, upper, log_gf) = (num("lower_cm")?, num("upper_cm")?, num("log_gf")?);
    let n_lines = label.len();
    let lens = [
        species.len(),
        family.len(),
        vac.len(),
        air.len(),
        lower.len(),
        upper.len(),
    ];
    if lens.iter().chain([&log_gf.len()]).any(|&n| n != n_lines) {
        return Err(not_grid(
            path,
            "the datasets of group 'lines' differ in length",
        ));
    }
    let lines = (0..n_lines)
        .map(|i| LineRecord {
            label: label[i].clone(),
            species: species[i].clone(),
            family: family[i].clone(),
            wavelength_vac_nm: vac[i],
            wavelength_air_nm: if air[i].is_nan() { None } else { Some(air[i]) },
            lower_cm: lower[i],
            upper_cm: upper[i],
            log_gf: log_gf[i],
        })
        .collect();

    let mut datasets = Vec::new();
    let mut status_flags = Vec::new();
    for name in var_names.split_whitespace() {
        let ds = open_dataset(path, file, name)?;
        let dims = ds.shape();
        let per_line = if dims == shape {
            false
        } else if dims.len() == shape.len() + 1 && dims[..shape.len()] == shape[..] {
            if dims[shape.len()] != n_lines {
                return Err(not_grid(
                    path,
                    format!("dataset '{name}' has {dims:?} lines"),
                ));
            }
            true
        } else {
            return Err(not_grid(
                path,
                format!("dataset '{name}' has shape {dims:?}, axes {shape:?}"),
            ));
        };
        let kind = match ds
            .dtype()
            .and_then(|t| t.to_descriptor())
            .map_err(h5(path, name))?
        {
            TypeDescriptor::Float(FloatSize::U8) => DataKind::F64,
            TypeDescriptor::Unsigned(IntSize::U1) if !per_line => DataKind::Status,
            t => return Err(not_grid(path, format!("dataset '{name}' has type {t}"))),
        };
        if kind == DataKind::Status {
            let values = ds
                .attr("flag_values")
                .and_then(|a| a.read_raw::<u8>())
                .map_err(|_| not_grid(path, format!("attribute 'flag_values' of '{name}'")))?;
            let meanings = require_str_attr(path, &ds, name, "flag_meanings")?;
            let meanings: Vec<&str> = meanings.split_whitespace().collect();
            if meanings.len() != values.len() {
                return Err(not_grid(
                    path,
                    format!("'{name}': flag_values and flag_meanings differ"),
                ));
            }
            status_flags = values
                .iter()
                .zip(meanings)
                .map(|(v, m)| (*v, m.to_string()))
                .collect();
        }
        datasets.push(DatasetMeta {
            name: name.to_string(),
            units: require_str_attr(path, &ds, name, "units")?,
            long_name: require_str_attr(path, &ds, name, "long_name")?,
            per_line,
            kind,
        });
    }
    if datasets
        .iter()
        .filter(|d| d.kind == DataKind::Status)
        .count()
        != 1
    {
        return Err(not_grid(path, "no single status dataset"));
    }
    let done = file
        .dataset(DONE_PATH)
        .map_err(|_| not_grid(path, format!("dataset '{DONE_PATH}' is missing")))?;
    if done.shape() != [pencil_count(&shape)] {
        return Err(not_grid(
            path,
            format!("'{DONE_PATH}' does not have one entry per pencil"),
        ));
    }
    Ok(Structure {
        title,
        axes,
        lines,
        datasets,
        status_flags,
    })
}

fn read_done(path: &Path, file: &File) -> Result<Vec<bool>> {
    let done = file.dataset(DONE_PATH).map_err(h5(path, DONE_PATH))?;
    let v = done.read_raw::<u8>().map_err(h5(path, DONE_PATH))?;
    Ok(v.iter().map(|&b| b != 0).collect())
}

/// A box-shaped selection in a dataset: the hyperslab and the box's extent in every
/// dimension (1 where the hyperslab takes a single index), which is also the shape given to
/// the memory space of a read or write, so that HDF5 sees the same shape on both sides and
/// moves the data block by block instead of element by element.
struct Block {
    slab: Hyperslab,
    shape: Vec<usize>,
}

/// Hyperslab of pencil `outer` (indices of all axes but the last) in a dataset whose trailing
/// dimensions have sizes `tail` and are taken whole.
fn pencil_selection(outer: &[usize], tail: &[usize]) -> Block {
    run_selection(outer, 1, tail)
}

/// The selection of `run` pencils from `outer` on along the last outer axis (one pencil:
/// the outer indices as indices), times the whole `tail`.
fn run_selection(outer: &[usize], run: usize, tail: &[usize]) -> Block {
    let mut sel: Vec<SliceOrIndex> = outer.iter().map(|&i| SliceOrIndex::Index(i)).collect();
    let mut shape = vec![1; outer.len()];
    if let (true, Some(last)) = (run > 1, sel.last_mut()) {
        let first = outer[outer.len() - 1];
        *last = SliceOrIndex::SliceTo {
            start: first,
            step: 1,
            end: first + run,
            block: 1,
        };
        shape[outer.len() - 1] = run;
    }
    sel.extend(tail.iter().map(|&n| SliceOrIndex::SliceTo {
        start: 0,
        step: 1,
        end: n,
        block: 1,
    }));
    shape.extend_from_slice(tail);
    Block {
        slab: Hyperslab::from(sel),
        shape,
    }
}

// hdf5-metno's slice reader and writer take arrays of the ndarray version it was resolved
// with, which need not be this crate's; these two move plain slices through a hyperslab
// with `H5Dwrite` / `H5Dread` instead (the slice in C order, its memory space shaped as
// the selected block).

/// Writes `data` into the selection `sel` of `ds` (as many elements as selected, in C order).
fn write_block<T: H5Type>(ds: &Dataset, sel: Block, data: &[T]) -> hdf5::Result<()> {
    let fspace = ds.space()?.select(sel.slab)?;
    if fspace.selection_size() != data.len() {
        return Err(hdf5::Error::from(
            "selection size differs from the data length",
        ));
    }
    let mspace = Dataspace::try_new(sel.shape.as_slice())?;
    let mtype = Datatype::from_type::<T>()?;
    let _lock = hdf5_sys::LOCK.lock();
    // SAFETY: valid ids; `data` holds exactly the selected number of `T` in memory type `mtype`.
    let rc = unsafe {
        hdf5_sys::h5d::H5Dwrite(
            ds.id(),
            mtype.id(),
            mspace.id(),
            fspace.id(),
            hdf5_sys::h5p::H5P_DEFAULT,
            data.as_ptr().cast(),
        )
    };
    if rc < 0 {
        Err(hdf5::Error::query().unwrap_or_else(|e| e))
    } else {
        Ok(())
    }
}

/// Reads the selection `sel` of `ds` in C order.
fn read_block<T: H5Type + Copy + Default>(ds: &Dataset, sel: Block) -> hdf5::Result<Vec<T>> {
    let fspace = ds.space()?.select(sel.slab)?;
    let n = fspace.selection_size();
    let mut out = vec![T::default(); n];
    let mspace = Dataspace::try_new(sel.shape.as_slice())?;
    let mtype = Datatype::from_type::<T>()?;
    let _lock = hdf5_sys::LOCK.lock();
    // SAFETY: valid ids; `out` has room for exactly the selected number of `T`.
    let rc = unsafe {
        hdf5_sys::h5d::H5Dread(
            ds.id(),
            mtype.id(),
            mspace.id(),
            fspace.id(),
            hdf5_sys::h5p::H5P_DEFAULT,
            out.as_mut_ptr().cast(),
        )
    };
    if rc < 0 {
        Err(hdf5::Error::query().unwrap_or_else(|e| e))
    } else {
        Ok(out)
    }
}

/// A whole dataset as this crate's `ArrayD`.
fn read_whole<T: H5Type>(path: &Path, ds: &Dataset, object: &str) -> Result<ArrayD<T>> {
    let v = ds.read_raw::<T>().map_err(h5(path, object))?;
    ArrayD::from_shape_vec(IxDyn(&ds.shape()), v).map_err(|e| StoreError::Hdf5 {
        path: path.to_path_buf(),
        object: object.to_string(),
        source: hdf5::Error::from(e.to_string().as_str()),
    })
}

// ---------------------------------------------------------------------------------------------
// Writer
// ---------------------------------------------------------------------------------------------

/// A text column of the line table: name, long_name, field.
type TextColumn = (&'static str, &'static str, fn(&LineRecord) -> &str);
/// A numeric column of the line table: name, units, long_name, field.
type NumColumn = (
    &'static str,
    &'static str,
    &'static str,
    fn(&LineRecord) -> f64,
);

/// Writes a grid file pencil by pencil. Dropping a writer without [`GridWriter::finish`] closes
/// the file with `complete = 0`; [`GridWriter::resume`] carries on from there.
#[derive(Debug)]
pub struct GridWriter {
    path: PathBuf,
    file: File,
    structure: Structure,
    /// F64 datasets in layout order.
    values: Vec<(DatasetMeta, Dataset)>,
    status: Dataset,
    done: Dataset,
    done_mask: Vec<bool>,
}

impl GridWriter {
    /// Creates a new grid file laid out by `layout`; refuses to overwrite anything at `path`.
    /// A file left half-made by a failure here is removed.
    pub fn create(path: &Path, layout: &Layout) -> Result<GridWriter> {
        validate(path, layout)?;
        let exists = || StoreError::AlreadyExists {
            path: path.to_path_buf(),
        };
        if path.symlink_metadata().is_ok() {
            return Err(exists());
        }
        let file = File::with_options()
            .with_fcpl(|p| {
                p.link_creation_order(LinkCreationOrder::Indexed)
                    .attr_creation_order(AttrCreationOrder::Indexed)
                    .obj_track_times(false)
            })
            .create_excl(path)
            .map_err(|source| {
                if path.symlink_metadata().is_ok() {
                    exists()
                } else {
                    StoreError::Hdf5 {
                        path: path.to_path_buf(),
                        object: "/".into(),
                        source,
                    }
                }
            })?;
        close_on_exec(&file);
        match Self::build(path, file, layout) {
            Ok(w) => Ok(w),
            Err(e) => {
                // `build` consumed and closed the file; do not leave a half-made one behind.
                let _ = std::fs::remove_file(path);
                Err(e)
            }
        }
    }

    fn build(path: &Path, file: File, layout: &Layout) -> Result<GridWriter> {
        let root: &Location = &file;
        // Root attributes; `complete` is 0 until `finish`.
        write_str_attr(path, root, "/", "title", &layout.title)?;
        write_str_attr(path, root, "/", "tool", TOOL)?;
        if !layout.provenance.iter().any(|(k, _)| k == "tool_version") {
            write_str_attr(path, root, "/", "tool_version", env!("CARGO_PKG_VERSION"))?;
        }
        write_i32_attr(path, root, "/", "format_version", FORMAT_VERSION)?;
        for (k, v) in &layout.provenance {
            write_str_attr(path, root, "/", k, v)?;
        }
        write_str_attr(path, root, "/", "created", &utc_now_iso8601())?;
        write_str_attr(path, root, "/", "conventions", CONVENTIONS)?;
        let axis_names: Vec<&str> = layout.axes.iter().map(|a| a.name.as_str()).collect();
        write_str_attr(path, root, "/", "axes", &axis_names.join(" "))?;
        let var_names: Vec<&str> = layout.datasets.iter().map(|d| d.name.as_str()).collect();
        write_str_attr(path, root, "/", "data_variables", &var_names.join(" "))?;
        write_i32_attr(path, root, "/", "complete", 0)?;

        // Axes: coordinate variables that are dimension scales.
        let mut scales = Vec::new();
        for axis in &layout.axes {
            let ds = file
                .new_dataset_builder()
                .obj_track_times(false)
                .attr_creation_order(AttrCreationOrder::Indexed)
                .with_data(axis.values.as_slice())
                .create(axis.name.as_str())
                .map_err(h5(path, &axis.name))?;
            write_str_attr(path, &ds, &axis.name, "units", &axis.units)?;
            write_str_attr(path, &ds, &axis.name, "long_name", &axis.long_name)?;
            set_scale(path, &ds, &axis.name, &axis.name)?;
            scales.push(ds);
        }
        let n_lines = layout.lines.len();
        let line_index: Vec<i32> = (0..n_lines as i32).collect();
        let line = file
            .new_dataset_builder()
            .obj_track_times(false)
            .attr_creation_order(AttrCreationOrder::Indexed)
            .with_data(line_index.as_slice())
            .create(LINE_DIM)
            .map_err(h5(path, LINE_DIM))?;
        write_str_attr(path, &line, LINE_DIM, "units", "1")?;
        write_str_attr(
            path,
            &line,
            LINE_DIM,
            "long_name",
            "line index into the lines group",
        )?;
        set_scale(path, &line, LINE_DIM, LINE_DIM)?;

        // Data variables: one chunk per pencil, NaN / 255 where never written.
        let shape = layout.shape();
        let pencil_len = layout.pencil_len();
        let flags = full_status_flags(&layout.status_flags);
        let mut values = Vec::new();
        let mut status = None;
        for meta in &layout.datasets {
            let name = meta.name.as_str();
            let mut dims = shape.clone();
            let mut chunk = vec![1; shape.len() - 1];
            chunk.push(pencil_len);
            if meta.per_line {
                dims.push(n_lines);
                chunk.push(n_lines);
            }
            let mut builder = file
                .new_dataset_builder()
                .obj_track_times(false)
                .attr_creation_order(AttrCreationOrder::Indexed)
                .chunk(chunk);
            if layout.compression > 0 {
                builder = builder.shuffle().deflate(layout.compression);
            }
            let ds = match meta.kind {
                DataKind::F64 => builder
                    .fill_value(f64::NAN)
                    .empty::<f64>()
                    .shape(dims)
                    .create(name),
                DataKind::Status => builder
                    .fill_value(STATUS_NOT_COMPUTED)
                    .empty::<u8>()
                    .shape(dims)
                    .create(name),
            }
            .map_err(h5(path, name))?;
            write_str_attr(path, &ds, name, "units", &meta.units)?;
            write_str_attr(path, &ds, name, "long_name", &meta.long_name)?;
            match meta.kind {
                DataKind::F64 => {
                    let what = format!("{name}@_FillValue");
                    ds.new_attr::<f64>()
                        .create("_FillValue")
                        .and_then(|a| a.write_scalar(&f64::NAN))
                        .map_err(h5(path, &what))?;
                }
                DataKind::Status => {
                    let codes: Vec<u8> = flags.iter().map(|(c, _)| *c).collect();
                    let what = format!("{name}@flag_values");
                    ds.new_attr_builder()
                        .with_data(codes.as_slice())
                        .create("flag_values")
                        .map_err(h5(path, &what))?;
                    let meanings: Vec<&str> = flags.iter().map(|(_, m)| m.as_str()).collect();
                    write_str_attr(path, &ds, name, "flag_meanings", &meanings.join(" "))?;
                }
            }
            let mut attached: Vec<&Dataset> = scales.iter().collect();
            if meta.per_line {
                attached.push(&line);
            }
            attach_scales(path, &ds, name, &attached)?;
            match meta.kind {
                DataKind::F64 => values.push((meta.clone(), ds)),
                DataKind::Status => status = Some(ds),
            }
        }
        let status = status.expect("validated: one status dataset");

        // The line table, on the root's `line` dimension.
        let group = file
            .create_group_builder()
            .with_gcpl(|p| {
                p.link_creation_order(LinkCreationOrder::Indexed)
                    .attr_creation_order(AttrCreationOrder::Indexed)
                    .obj_track_times(false)
            })
            .create(LINES_GROUP)
            .map_err(h5(path, LINES_GROUP))?;
        let text_cols: [TextColumn; 3] = [
            ("label", "line label", |l| &l.label),
            ("species", "emitting species", |l| &l.species),
            ("family", "line family or multiplet", |l| &l.family),
        ];
        for (name, long_name, get) in text_cols {
            let object = format!("{LINES_GROUP}/{name}");
            let data = layout
                .lines
                .iter()
                .map(|l| vlu(path, &object, get(l)))
                .collect::<Result<Vec<_>>>()?;
            let ds = group
                .new_dataset_builder()
                .obj_track_times(false)
                .attr_creation_order(AttrCreationOrder::Indexed)
                .with_data(data.as_slice())
                .create(name)
                .map_err(h5(path, &object))?;
            write_str_attr(path, &ds, &object, "units", "1")?;
            write_str_attr(path, &ds, &object, "long_name", long_name)?;
            attach_scales(path, &ds, &object, &[&line])?;
        }
        let num_cols: [NumColumn; 5] = [
            ("wavelength_vac_nm", "nm", "vacuum wavelength", |l| {
                l.wavelength_vac_nm
            }),
            (
                "wavelength_air_nm",
                "nm",
                "air wavelength (NaN when none)",
                |l| l.wavelength_air_nm.unwrap_or(f64::NAN),
            ),
            ("lower_cm", "cm-1", "lower level energy", |l| l.lower_cm),
            ("upper_cm", "cm-1", "upper level energy", |l| l.upper_cm),
            (
                "log_gf",
                "1",
                "log10 of statistical weight times oscillator strength",
                |l| l.log_gf,
            ),
        ];
        for (name, units, long_name, get) in num_cols {
            let object = format!("{LINES_GROUP}/{name}");
            let data: Vec<f64> = layout.lines.iter().map(get).collect();
            let ds = group
                .new_dataset_builder()
                .obj_track_times(false)
                .attr_creation_order(AttrCreationOrder::Indexed)
                .with_data(data.as_slice())
                .create(name)
                .map_err(h5(path, &object))?;
            write_str_attr(path, &ds, &object, "units", units)?;
            write_str_attr(path, &ds, &object, "long_name", long_name)?;
            attach_scales(path, &ds, &object, &[&line])?;
        }

        // Progress: `done` on a netCDF dimension that is not a variable.
        let n_pencils = layout.n_pencils();
        let progress = file
            .create_group_builder()
            .with_gcpl(|p| {
                p.link_creation_order(LinkCreationOrder::Indexed)
                    .attr_creation_order(AttrCreationOrder::Indexed)
                    .obj_track_times(false)
            })
            .create(PROGRESS_GROUP)
            .map_err(h5(path, PROGRESS_GROUP))?;
        let pencil_path = format!("{PROGRESS_GROUP}/{PENCIL_DIM}");
        let pencil = progress
            .new_dataset_builder()
            .obj_track_times(false)
            .empty::<f32>()
            .shape(n_pencils)
            .create(PENCIL_DIM)
            .map_err(h5(path, &pencil_path))?;
        set_scale(
            path,
            &pencil,
            &pencil_path,
            &format!("{NETCDF_DIM_ONLY}{n_pencils:10}"),
        )?;
        let done = progress
            .new_dataset_builder()
            .obj_track_times(false)
            .attr_creation_order(AttrCreationOrder::Indexed)
            .with_data(vec![0u8; n_pencils].as_slice())
            .create(DONE)
            .map_err(h5(path, DONE_PATH))?;
        write_str_attr(path, &done, DONE_PATH, "units", "1")?;
        write_str_attr(
            path,
            &done,
            DONE_PATH,
            "long_name",
            "pencil stored (pencil = all points along the last axis, row-major over the others)",
        )?;
        let what = format!("{DONE_PATH}@flag_values");
        done.new_attr_builder()
            .with_data([0u8, 1].as_slice())
            .create("flag_values")
            .map_err(h5(path, &what))?;
        write_str_attr(path, &done, DONE_PATH, "flag_meanings", "pending done")?;
        attach_scales(path, &done, DONE_PATH, &[&pencil])?;

        file.flush().map_err(h5(path, "/"))?;
        let structure = Structure {
            title: layout.title.clone(),
            axes: layout.axes.clone(),
            lines: layout.lines.clone(),
            datasets: layout.datasets.clone(),
            status_flags: flags,
        };
        Ok(GridWriter {
            path: path.to_path_buf(),
            file,
            structure,
            values,
            status,
            done,
            done_mask: vec![false; n_pencils],
        })
    }

    /// Reopens an unfinished (or finished) grid file for writing. Returns the writer and which
    /// pencils are already stored. Refuses a file computed from another spec
    /// ([`StoreError::DigestMismatch`]), a file that is not a grid file, or a damaged one.
    /// The file is marked incomplete until [`GridWriter::finish`].
    pub fn resume(path: &Path, expected_spec_digest: &str) -> Result<(GridWriter, Vec<bool>)> {
        let file = open_hdf5(path, true)?;
        let structure = load_structure(path, &file)?;
        let found = require_str_attr(path, &file, "/", "spec_digest")?;
        if found != expected_spec_digest {
            return Err(StoreError::DigestMismatch {
                path: path.to_path_buf(),
                expected: expected_spec_digest.to_string(),
                found,
            });
        }
        let mut values = Vec::new();
        let mut status = None;
        for meta in &structure.datasets {
            let ds = file.dataset(&meta.name).map_err(h5(path, &meta.name))?;
            match meta.kind {
                DataKind::F64 => values.push((meta.clone(), ds)),
                DataKind::Status => status = Some(ds),
            }
        }
        let status = status.ok_or_else(|| not_grid(path, "no status dataset"))?;
        let done = file.dataset(DONE_PATH).map_err(h5(path, DONE_PATH))?;
        let done_mask = read_done(path, &file)?;
        file.attr("complete")
            .and_then(|a| a.write_scalar(&0i32))
            .and_then(|()| file.flush())
            .map_err(h5(path, "/@complete"))?;
        let writer = GridWriter {
            path: path.to_path_buf(),
            file,
            structure,
            values,
            status,
            done,
            done_mask: done_mask.clone(),
        };
        Ok((writer, done_mask))
    }

    /// The file being written.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Number of pencils in the grid.
    pub fn n_pencils(&self) -> usize {
        self.done_mask.len()
    }

    /// Number of points per pencil (size of the last axis).
    pub fn pencil_len(&self) -> usize {
        self.structure.pencil_len()
    }

    /// Which pencils are stored.
    pub fn done(&self) -> &[bool] {
        &self.done_mask
    }

    /// The grid's axes.
    pub fn axes(&self) -> &[AxisMeta] {
        &self.structure.axes
    }

    /// Stores one pencil: its data, a flush, its `done` flag, a flush. Rewriting a stored pencil
    /// first clears its flag, so a kill during the rewrite cannot leave it flagged but torn.
    pub fn write_pencil(&mut self, p: &Pencil) -> Result<()> {
        self.write_pencils(std::slice::from_ref(p))
    }

    /// Stores several pencils at once: all their data (each run of pencils consecutive along
    /// the last outer axis as one block per dataset), a flush, then their `done` flags, a
    /// flush — the order of [`GridWriter::write_pencil`], with two flushes for the lot.
    /// Stored pencils among them first have their flags cleared (and flushed).
    pub fn write_pencils(&mut self, ps: &[Pencil]) -> Result<()> {
        if ps.is_empty() {
            return Ok(());
        }
        for p in ps {
            self.check_pencil(p)?;
        }
        let mut order: Vec<&Pencil> = ps.iter().collect();
        order.sort_by_key(|p| p.index);
        if let Some(w) = order.windows(2).find(|w| w[0].index == w[1].index) {
            return Err(StoreError::InvalidPencil {
                path: self.path.clone(),
                index: w[0].index,
                reason: "given twice in one write".into(),
            });
        }
        let path_buf = self.path.clone();
        let path = path_buf.as_path();
        let mut rewritten: Vec<usize> = order
            .iter()
            .map(|p| p.index)
            .filter(|&i| self.done_mask[i])
            .collect();
        if !rewritten.is_empty() {
            self.write_flags(&rewritten, false)?;
            self.file.flush().map_err(h5(path, "/"))?;
            for i in rewritten.drain(..) {
                self.done_mask[i] = false;
            }
        }
        let len = self.structure.pencil_len();
        let n_lines = self.structure.lines.len();
        let shape = self.structure.shape();
        let row = shape.len().checked_sub(2).map(|d| shape[d]);
        let status_name = self.structure.status_name().to_string();
        // Runs: consecutive indices whose outer coordinates differ only in the last one.
        let runs =
            order.chunk_by(|a, b| b.index == a.index + 1 && row.is_some_and(|n| b.index % n != 0));
        for run in runs {
            let outer = unravel(run[0].index, &shape);
            let selection = |tail: &[usize]| run_selection(&outer, run.len(), tail);
            for (k, (meta, ds)) in self.values.iter().enumerate() {
                let tail: &[usize] = if meta.per_line {
                    &[len, n_lines]
                } else {
                    &[len]
                };
                let joined: Vec<f64>;
                let data: &[f64] = if let [one] = run {
                    &one.data[k]
                } else {
                    joined = run.iter().flat_map(|p| p.data[k].iter().copied()).collect();
                    &joined
                };
                write_block(ds, selection(tail), data).map_err(h5(path, &meta.name))?;
            }
            let status: Vec<u8> = run.iter().flat_map(|p| p.status.iter().copied()).collect();
            write_block(&self.status, selection(&[len]), &status)
                .map_err(h5(path, &status_name))?;
        }
        self.file.flush().map_err(h5(path, "/"))?;
        let indices: Vec<usize> = order.iter().map(|p| p.index).collect();
        self.write_flags(&indices, true)?;
        self.file.flush().map_err(h5(path, "/"))?;
        for i in indices {
            self.done_mask[i] = true;
        }
        Ok(())
    }

    /// A pencil's index and data lengths against the layout.
    fn check_pencil(&self, p: &Pencil) -> Result<()> {
        let bad = |reason: String| StoreError::InvalidPencil {
            path: self.path.clone(),
            index: p.index,
            reason,
        };
        let n_pencils = self.done_mask.len();
        if p.index >= n_pencils {
            return Err(bad(format!("index out of range 0..{n_pencils}")));
        }
        let len = self.structure.pencil_len();
        let n_lines = self.structure.lines.len();
        if p.status.len() != len {
            return Err(bad(format!(
                "{} status codes for {len} points",
                p.status.len()
            )));
        }
        if p.data.len() != self.values.len() {
            return Err(bad(format!(
                "{} data vectors for {} float datasets",
                p.data.len(),
                self.values.len()
            )));
        }
        for ((meta, _), data) in self.values.iter().zip(&p.data) {
            let want = if meta.per_line { len * n_lines } else { len };
            if data.len() != want {
                return Err(bad(format!(
                    "'{}' has {} values, expected {want}",
                    meta.name,
                    data.len()
                )));
            }
        }
        Ok(())
    }

    /// Writes the `done` flags of the pencils `sorted` (ascending, distinct) to `value`, one
    /// block per run of consecutive numbers (no flush).
    fn write_flags(&mut self, sorted: &[usize], value: bool) -> Result<()> {
        for run in sorted.chunk_by(|a, b| *b == a + 1) {
            write_block(
                &self.done,
                run_selection(&[run[0]], run.len(), &[]),
                &vec![u8::from(value); run.len()],
            )
            .map_err(h5(self.path.as_path(), DONE_PATH))?;
        }
        Ok(())
    }

    /// Marks the file complete (`complete = 1`, the last write), flushes and closes it. Fails
    /// with [`StoreError::Incomplete`] (leaving `complete = 0`) if a pencil is missing.
    pub fn finish(self) -> Result<()> {
        let path = self.path.clone();
        let missing = self.done_mask.iter().filter(|d| !**d).count();
        if missing > 0 {
            return Err(StoreError::Incomplete {
                path,
                missing,
                total: self.done_mask.len(),
            });
        }
        let GridWriter {
            file,
            values,
            status,
            done,
            ..
        } = self;
        drop((values, status, done));
        file.attr("complete")
            .and_then(|a| a.write_scalar(&1i32))
            .and_then(|()| file.flush())
            .map_err(h5(&path, "/@complete"))?;
        file.close().map_err(h5(&path, "/"))
    }
}

// ---------------------------------------------------------------------------------------------
// Reader
// ---------------------------------------------------------------------------------------------

/// A grid file opened for reading.
#[derive(Debug)]
pub struct GridFile {
    path: PathBuf,
    file: File,
    structure: Structure,
}

impl GridFile {
    /// Opens a grid file read-only and reads its axes, line table and variable list.
    pub fn open(path: &Path) -> Result<GridFile> {
        let file = open_hdf5(path, false)?;
        let structure = load_structure(path, &file)?;
        Ok(GridFile {
            path: path.to_path_buf(),
            file,
            structure,
        })
    }

    /// The file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Root attribute `title`.
    pub fn title(&self) -> &str {
        &self.structure.title
    }

    /// The axes, outermost first.
    pub fn axes(&self) -> &[AxisMeta] {
        &self.structure.axes
    }

    /// Sizes of the axes.
    pub fn shape(&self) -> Vec<usize> {
        self.structure.shape()
    }

    /// The line table.
    pub fn lines(&self) -> &[LineRecord] {
        &self.structure.lines
    }

    /// The data variables, in layout order.
    pub fn datasets(&self) -> &[DatasetMeta] {
        &self.structure.datasets
    }

    /// Names of the data variables, in layout order.
    pub fn dataset_names(&self) -> Vec<String> {
        self.structure
            .datasets
            .iter()
            .map(|d| d.name.clone())
            .collect()
    }

    /// Status codes and their meanings (0 = converged, 255 = not_computed included).
    pub fn status_flags(&self) -> &[(u8, String)] {
        &self.structure.status_flags
    }

    /// Number of pencils.
    pub fn n_pencils(&self) -> usize {
        self.structure.n_pencils()
    }

    fn meta(&self, name: &str) -> Result<&DatasetMeta> {
        self.structure
            .datasets
            .iter()
            .find(|d| d.name == name)
            .ok_or_else(|| StoreError::UnknownDataset {
                path: self.path.clone(),
                name: name.to_string(),
                known: self.structure.known(),
            })
    }

    /// A float64 data variable whole: shape (axes...[, n_lines]), NaN where never written.
    pub fn read(&self, name: &str) -> Result<ArrayD<f64>> {
        let meta = self.meta(name)?;
        if meta.kind != DataKind::F64 {
            return Err(StoreError::WrongKind {
                path: self.path.clone(),
                name: name.to_string(),
                found: "the u8 status code",
                hint: "read it with status()",
            });
        }
        let ds = self.file.dataset(name).map_err(h5(&self.path, name))?;
        read_whole(&self.path, &ds, name)
    }

    /// The status codes, shape (axes...); 255 where never written.
    pub fn status(&self) -> Result<ArrayD<u8>> {
        let name = self.structure.status_name();
        let ds = self.file.dataset(name).map_err(h5(&self.path, name))?;
        read_whole(&self.path, &ds, name)
    }

    /// One pencil as [`GridWriter::write_pencil`] takes it (e.g. to merge files).
    pub fn read_pencil(&self, index: usize) -> Result<Pencil> {
        let n = self.n_pencils();
        if index >= n {
            return Err(StoreError::InvalidPencil {
                path: self.path.clone(),
                index,
                reason: format!("index out of range 0..{n}"),
            });
        }
        let outer = unravel(index, &self.shape());
        let len = self.structure.pencil_len();
        let n_lines = self.structure.lines.len();
        let mut data = Vec::new();
        for meta in self.structure.f64_datasets() {
            let name = meta.name.as_str();
            let tail: &[usize] = if meta.per_line {
                &[len, n_lines]
            } else {
                &[len]
            };
            let ds = self.file.dataset(name).map_err(h5(&self.path, name))?;
            data.push(
                read_block(&ds, pencil_selection(&outer, tail)).map_err(h5(&self.path, name))?,
            );
        }
        let name = self.structure.status_name();
        let ds = self.file.dataset(name).map_err(h5(&self.path, name))?;
        let status =
            read_block(&ds, pencil_selection(&outer, &[len])).map_err(h5(&self.path, name))?;
        Ok(Pencil {
            index,
            data,
            status,
        })
    }

    /// A root attribute as text (numbers formatted), or None if absent.
    pub fn attribute(&self, name: &str) -> Option<String> {
        attr_as_text(&self.file, name)
    }

    /// The layout this file was created with (for writing a file of the same shape, e.g.
    /// when merging shards): structure, the provenance attributes and `compression`.
    pub fn layout(&self, compression: u8) -> Result<Layout> {
        let mut provenance = Vec::new();
        for key in REQUIRED_PROVENANCE.iter().chain(["tool_version"].iter()) {
            let v = self
                .attribute(key)
                .ok_or_else(|| not_grid(&self.path, "a provenance attribute is missing"))?;
            provenance.push((key.to_string(), v));
        }
        Ok(Layout {
            title: self.structure.title.clone(),
            axes: self.structure.axes.clone(),
            lines: self.structure.lines.clone(),
            datasets: self.structure.datasets.clone(),
            compression,
            provenance,
            status_flags: self
                .structure
                .status_flags
                .iter()
                .filter(|(c, _)| *c != STATUS_CONVERGED && *c != STATUS_NOT_COMPUTED)
                .cloned()
                .collect(),
        })
    }

    /// Whether the writer finished (`complete = 1`).
    pub fn is_complete(&self) -> bool {
        read_int_attr(&self.file, "complete") == Some(1)
    }

    /// Which pencils are stored.
    pub fn done_pencils(&self) -> Result<Vec<bool>> {
        read_done(&self.path, &self.file)
    }

    /// Whether `name` (an axis, `line`, or `progress/pencil`) is an HDF5 dimension scale.
    pub fn is_dimension_scale(&self, name: &str) -> Result<bool> {
        let ds = self.file.dataset(name).map_err(h5(&self.path, name))?;
        h5ds::is_scale(&ds).map_err(h5(&self.path, name))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unravel_is_row_major_over_all_but_the_last_axis() {
        let shape = [4, 3, 2];
        assert_eq!(pencil_count(&shape), 12);
        assert_eq!(unravel(0, &shape), vec![0, 0]);
        assert_eq!(unravel(1, &shape), vec![0, 1]);
        assert_eq!(unravel(3, &shape), vec![1, 0]);
        assert_eq!(unravel(11, &shape), vec![3, 2]);
        assert_eq!(pencil_count(&[7]), 1);
        assert_eq!(unravel(0, &[7]), Vec::<usize>::new());
    }

    #[test]
    fn identifiers() {
        assert!(is_identifier("gas_pressure"));
        assert!(is_identifier("_x1"));
        assert!(!is_identifier("1x"));
        assert!(!is_identifier("a b"));
        assert!(!is_identifier(""));
    }

    #[test]
    fn timestamp_is_iso8601_utc() {
        let t = utc_now_iso8601();
        assert_eq!(t.len(), 20, "{t}");
        assert!(t.ends_with('Z') && t.as_bytes()[10] == b'T', "{t}");
        assert!(t.as_str() > "2024-01-01T00:00:00Z", "{t}");
    }

    #[test]
    fn status_flags_always_define_converged_and_not_computed() {
        let f = full_status_flags(&[(3, "diverged".into())]);
        let codes: Vec<u8> = f.iter().map(|(c, _)| *c).collect();
        assert_eq!(codes, vec![0, 3, 255]);
    }
}
