//! The one place that writes output files: atomically, inside an output directory.
//!
//! Each file is written under a hidden temporary name in the same directory, flushed and
//! fsynced, then renamed over the final name (a rename within one directory is atomic on
//! POSIX file systems), and the directory is fsynced so the rename survives a crash. A
//! killed run therefore leaves either the previous complete file or none, plus at worst a
//! `.NAME.partial-PID-N` file that no reader mistakes for output.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use serde::Serialize;

use crate::error::OutputError;

/// One output file in one format: a name and a way to write its bytes.
pub trait Export {
    /// The file name inside the output directory (plain name, no separators).
    fn file_name(&self) -> &str;
    /// Write the whole file to `w`.
    fn write_to(&self, w: &mut dyn Write) -> io::Result<()>;
}

/// An output directory whose files are all written atomically.
///
/// ```
/// use series_io::{CurveRow, CurvesCsv, OutputDir, write_csv_rows};
///
/// let dir = std::env::temp_dir().join(format!("series-io-doc-{}", std::process::id()));
/// let out = OutputDir::create(&dir)?;
/// let rows = vec![CurveRow {
///     driver: "x".into(), response: "y".into(), library_size: 10, replicate: 0, skill: 0.5,
/// }];
/// out.export(&CurvesCsv(&rows))?;
/// out.write("embedding.csv", |w| {
///     write_csv_rows(w, &["variable", "E"], [vec!["x".to_string(), "3".to_string()]])
/// })?;
/// assert_eq!(
///     std::fs::read_to_string(dir.join("curves.csv")).unwrap(),
///     "driver,response,library_size,replicate,skill\nx,y,10,0,0.5\n"
/// );
/// # std::fs::remove_dir_all(&dir).unwrap();
/// # Ok::<(), series_io::OutputError>(())
/// ```
#[derive(Debug, Clone)]
pub struct OutputDir {
    dir: PathBuf,
    /// Files this run reads; no output may replace one of them.
    inputs: Vec<FileIdentity>,
}

/// What makes two paths the same file: the canonical path, and on Unix the device and
/// inode, so a hard link or a symbolic link to an input is recognised as well.
#[derive(Debug, Clone, PartialEq)]
struct FileIdentity {
    given: PathBuf,
    canonical: PathBuf,
    #[cfg(unix)]
    node: (u64, u64),
}

impl FileIdentity {
    fn of(path: &Path) -> Option<Self> {
        let canonical = fs::canonicalize(path).ok()?;
        #[cfg(unix)]
        let node = {
            use std::os::unix::fs::MetadataExt;
            let m = fs::metadata(&canonical).ok()?;
            (m.dev(), m.ino())
        };
        Some(Self {
            given: path.to_path_buf(),
            canonical,
            #[cfg(unix)]
            node,
        })
    }

    fn same_file(&self, other: &FileIdentity) -> bool {
        #[cfg(unix)]
        if self.node == other.node {
            return true;
        }
        self.canonical == other.canonical
    }
}

/// Distinguishes temporary names of concurrent writes within one process.
static SEQUENCE: AtomicU64 = AtomicU64::new(0);

/// Marker in temporary names; see [`OutputDir::remove_stale_partials`].
const PARTIAL_MARK: &str = ".partial-";

impl OutputDir {
    /// Create the directory (and parents) if needed; an existing directory is reused.
    pub fn create(dir: impl AsRef<Path>) -> Result<Self, OutputError> {
        let dir = dir.as_ref().to_path_buf();
        if dir.exists() && !dir.is_dir() {
            return Err(OutputError::NotADirectory { dir });
        }
        fs::create_dir_all(&dir).map_err(|source| OutputError::CreateDir {
            dir: dir.clone(),
            source,
        })?;
        Ok(Self {
            dir,
            inputs: Vec::new(),
        })
    }

    /// Mark `inputs` (files or directories this run reads) as protected, and check `names`,
    /// the files the run will write, against them now, before any work.
    ///
    /// The output directory must not be an input directory, and no output name may resolve
    /// to an input file (compared by canonical path and by file identity). Every later write
    /// repeats the file check, so a file linked in during the run is not replaced either.
    pub fn protect_inputs(mut self, inputs: &[&Path], names: &[&str]) -> Result<Self, OutputError> {
        let here = FileIdentity::of(&self.dir);
        for input in inputs {
            let Some(id) = FileIdentity::of(input) else {
                continue;
            };
            if here.as_ref().is_some_and(|h| h.same_file(&id)) {
                return Err(OutputError::OutputIsInputDir {
                    dir: self.dir.clone(),
                    input: input.to_path_buf(),
                });
            }
            self.inputs.push(id);
        }
        for name in names {
            self.check_not_input(&self.dir.join(name))?;
        }
        Ok(self)
    }

    fn check_not_input(&self, target: &Path) -> Result<(), OutputError> {
        if self.inputs.is_empty() {
            return Ok(());
        }
        if let Some(id) = FileIdentity::of(target)
            && let Some(input) = self.inputs.iter().find(|i| i.same_file(&id))
        {
            return Err(OutputError::WouldOverwriteInput {
                path: target.to_path_buf(),
                input: input.given.clone(),
            });
        }
        Ok(())
    }

    /// The directory's path.
    pub fn path(&self) -> &Path {
        &self.dir
    }

    /// A subdirectory (created if needed) with the same atomic writing.
    pub fn subdir(&self, name: &str) -> Result<OutputDir, OutputError> {
        check_name(name)?;
        let mut sub = OutputDir::create(self.dir.join(name))?;
        sub.inputs = self.inputs.clone();
        Ok(sub)
    }

    /// Write `name` atomically from a closure; returns the final path.
    ///
    /// The closure gets a buffered writer on a temporary file. If it fails (or panics),
    /// the temporary file is removed and no file named `name` is created or changed.
    pub fn write<F>(&self, name: &str, fill: F) -> Result<PathBuf, OutputError>
    where
        F: FnOnce(&mut dyn Write) -> io::Result<()>,
    {
        check_name(name)?;
        let target = self.dir.join(name);
        self.check_not_input(&target)?;
        let temp = self.dir.join(format!(
            ".{name}{PARTIAL_MARK}{}-{}",
            std::process::id(),
            SEQUENCE.fetch_add(1, Ordering::Relaxed)
        ));
        let fail = |source| OutputError::Write {
            path: target.clone(),
            source,
        };
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&temp)
            .map_err(fail)?;
        let cleanup = RemoveOnDrop(Some(temp.clone()));
        let mut writer = BufWriter::new(file);
        fill(&mut writer).map_err(fail)?;
        let file = writer.into_inner().map_err(|e| fail(e.into_error()))?;
        file.sync_all().map_err(fail)?;
        drop(file);
        self.check_not_input(&target)?;
        fs::rename(&temp, &target).map_err(fail)?;
        cleanup.disarm();
        sync_dir(&self.dir).map_err(fail)?;
        Ok(target)
    }

    /// Write `name` atomically from bytes.
    pub fn write_bytes(&self, name: &str, bytes: &[u8]) -> Result<PathBuf, OutputError> {
        self.write(name, |w| w.write_all(bytes))
    }

    /// Write one [`Export`] under its own file name.
    pub fn export(&self, item: &dyn Export) -> Result<PathBuf, OutputError> {
        self.write(item.file_name(), |w| item.write_to(w))
    }

    /// Delete temporary files left by killed runs; returns how many were removed.
    ///
    /// Call it only while no other process writes into this directory, since their
    /// in-flight temporary files look the same.
    pub fn remove_stale_partials(&self) -> Result<usize, OutputError> {
        let fail = |source| OutputError::Write {
            path: self.dir.clone(),
            source,
        };
        let mut removed = 0;
        for entry in fs::read_dir(&self.dir).map_err(fail)? {
            let entry = entry.map_err(fail)?;
            let name = entry.file_name();
            let name = name.to_string_lossy();
            if name.starts_with('.') && name.contains(PARTIAL_MARK) && entry.path().is_file() {
                fs::remove_file(entry.path()).map_err(fail)?;
                removed += 1;
            }
        }
        Ok(removed)
    }
}

struct RemoveOnDrop(Option<PathBuf>);

impl RemoveOnDrop {
    fn disarm(mut self) {
        self.0 = None;
    }
}

impl Drop for RemoveOnDrop {
    fn drop(&mut self) {
        if let Some(path) = self.0.take() {
            // Best effort: the write already failed and that error is what gets reported.
            let _ = fs::remove_file(path);
        }
    }
}

fn check_name(name: &str) -> Result<(), OutputError> {
    let bad = name.is_empty()
        || name.starts_with('.')
        || name.contains(['/', '\\', '\0'])
        || Path::new(name).components().count() != 1;
    if bad {
        return Err(OutputError::BadName {
            name: name.to_string(),
        });
    }
    Ok(())
}

#[cfg(unix)]
fn sync_dir(dir: &Path) -> io::Result<()> {
    File::open(dir)?.sync_all()
}

#[cfg(not(unix))]
fn sync_dir(_dir: &Path) -> io::Result<()> {
    // Directories cannot be opened for syncing on this platform; the rename is still atomic.
    Ok(())
}

/// Format a float so that parsing it back gives the same bits: plain decimals in
/// [1e-5, 1e16), exponent form outside, `NaN`/`inf` for the specials.
///
/// Rust's `Display` and `LowerExp` for `f64` print the shortest digits that round-trip
/// (std documentation); the switch only keeps tiny and huge values short.
pub fn format_f64(x: f64) -> String {
    let a = x.abs();
    if x == 0.0 || !x.is_finite() || (1e-5..1e16).contains(&a) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// Write a CSV table: a header, then rows of already-formatted fields.
///
/// Every row must have as many fields as the header (an error otherwise). Fields with
/// commas, quotes or line breaks are quoted (RFC 4180).
pub fn write_csv_rows<I>(w: &mut dyn Write, header: &[&str], rows: I) -> io::Result<()>
where
    I: IntoIterator<Item = Vec<String>>,
{
    let mut out = csv::Writer::from_writer(w);
    out.write_record(header)?;
    for row in rows {
        out.write_record(&row)?;
    }
    out.flush()
}

/// A CSV file held as formatted fields.
#[derive(Debug, Clone, PartialEq)]
pub struct CsvTable {
    /// File name.
    pub name: String,
    /// Column names.
    pub header: Vec<String>,
    /// Rows of formatted fields, one per header column.
    pub rows: Vec<Vec<String>>,
}

impl Export for CsvTable {
    fn file_name(&self) -> &str {
        &self.name
    }

    fn write_to(&self, w: &mut dyn Write) -> io::Result<()> {
        let header: Vec<&str> = self.header.iter().map(String::as_str).collect();
        write_csv_rows(w, &header, self.rows.iter().cloned())
    }
}

/// A JSON file (pretty-printed, ending in a newline) of any serialisable value.
#[derive(Debug, Clone)]
pub struct JsonDocument<'a, T: Serialize> {
    /// File name.
    pub name: String,
    /// The value to serialise.
    pub value: &'a T,
}

impl<T: Serialize> Export for JsonDocument<'_, T> {
    fn file_name(&self) -> &str {
        &self.name
    }

    fn write_to(&self, w: &mut dyn Write) -> io::Result<()> {
        serde_json::to_writer_pretty(&mut *w, self.value)?;
        w.write_all(b"\n")
    }
}

/// A text file (HTML, Markdown, plain text) written as is.
#[derive(Debug, Clone, PartialEq)]
pub struct TextDocument {
    /// File name.
    pub name: String,
    /// The whole content.
    pub text: String,
}

impl Export for TextDocument {
    fn file_name(&self) -> &str {
        &self.name
    }

    fn write_to(&self, w: &mut dyn Write) -> io::Result<()> {
        w.write_all(self.text.as_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp_dir(tag: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!(
            "series-io-{tag}-{}-{}",
            std::process::id(),
            SEQUENCE.fetch_add(1, Ordering::Relaxed)
        ));
        let _ = fs::remove_dir_all(&dir);
        dir
    }

    fn listing(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    #[test]
    fn writes_atomically_and_leaves_no_temporary() {
        let dir = temp_dir("ok");
        let out = OutputDir::create(&dir).unwrap();
        let path = out.write_bytes("a.txt", b"hello").unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"hello");
        out.write_bytes("a.txt", b"again").unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"again");
        assert_eq!(listing(&dir), ["a.txt"]);
        fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn failed_write_keeps_the_previous_file_and_no_partial() {
        let dir = temp_dir("fail");
        let out = OutputDir::create(&dir).unwrap();
        out.write_bytes("labels.csv", b"old").unwrap();
        let err = out
            .write("labels.csv", |w| {
                w.write_all(b"half a fi")?;
                Err(io::Error::other("interrupted"))
            })
            .unwrap_err();
        assert!(err.to_string().contains("labels.csv"), "{err}");
        assert_eq!(fs::read(dir.join("labels.csv")).unwrap(), b"old");
        assert_eq!(listing(&dir), ["labels.csv"]);
        fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn panicking_writer_leaves_nothing() {
        let dir = temp_dir("panic");
        let out = OutputDir::create(&dir).unwrap();
        let result = std::panic::catch_unwind(|| {
            let _ = out.write("x.csv", |_| panic!("writer bug"));
        });
        assert!(result.is_err());
        assert!(listing(&dir).is_empty());
        fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn stale_partials_are_removed_and_names_checked() {
        let dir = temp_dir("stale");
        let out = OutputDir::create(&dir).unwrap();
        fs::write(dir.join(".run.json.partial-1-0"), b"{").unwrap();
        out.write_bytes("run.json", b"{}").unwrap();
        assert_eq!(out.remove_stale_partials().unwrap(), 1);
        assert_eq!(listing(&dir), ["run.json"]);
        for bad in ["", ".hidden", "a/b", "..", "c\\d"] {
            assert!(
                matches!(out.write_bytes(bad, b""), Err(OutputError::BadName { .. })),
                "{bad:?}"
            );
        }
        let sub = out.subdir("shard-1").unwrap();
        sub.write_bytes("curves.csv", b"x").unwrap();
        assert!(dir.join("shard-1/curves.csv").is_file());
        fs::write(dir.join("file"), b"").unwrap();
        assert!(matches!(
            OutputDir::create(dir.join("file")),
            Err(OutputError::NotADirectory { .. })
        ));
        fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn exports_in_each_format() {
        let dir = temp_dir("export");
        let out = OutputDir::create(&dir).unwrap();
        let table = CsvTable {
            name: "t.csv".into(),
            header: vec!["name".into(), "value".into()],
            rows: vec![
                vec!["a,b".into(), "1".into()],
                vec!["say \"hi\"".into(), "2".into()],
            ],
        };
        out.export(&table).unwrap();
        // Quoting per RFC 4180 (Shafranovich 2005), section 2.6-2.7.
        assert_eq!(
            fs::read_to_string(dir.join("t.csv")).unwrap(),
            "name,value\n\"a,b\",1\n\"say \"\"hi\"\"\",2\n"
        );
        let value = serde_json::json!({"seed": 7});
        out.export(&JsonDocument {
            name: "run.json".into(),
            value: &value,
        })
        .unwrap();
        assert_eq!(
            fs::read_to_string(dir.join("run.json")).unwrap(),
            "{\n  \"seed\": 7\n}\n"
        );
        out.export(&TextDocument {
            name: "r.html".into(),
            text: "<p>x</p>".into(),
        })
        .unwrap();
        assert_eq!(fs::read_to_string(dir.join("r.html")).unwrap(), "<p>x</p>");
        let ragged = CsvTable {
            rows: vec![vec!["only one".into()]],
            ..table
        };
        assert!(out.export(&ragged).is_err());
        assert_eq!(listing(&dir), ["r.html", "run.json", "t.csv"]);
        fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn float_format_round_trips_and_stays_short() {
        for x in [
            0.1,
            -0.0,
            1.0,
            1e-300,
            5e-324,
            123456.789,
            1e16,
            f64::MAX,
            -0.000012345,
        ] {
            let s = format_f64(x);
            assert_eq!(s.parse::<f64>().unwrap().to_bits(), x.to_bits(), "{s}");
            assert!(s.len() <= 24, "{s}");
        }
        assert_eq!(format_f64(0.25), "0.25");
        assert_eq!(format_f64(1e-300), "1e-300");
        assert_eq!(format_f64(f64::NAN), "NaN");
    }

    #[test]
    fn outputs_never_replace_an_input_by_path_link_or_name() {
        let root = temp_dir("inputs");
        let d = root.as_path();
        fs::create_dir_all(d).unwrap();
        fs::write(d.join("curves.csv"), "mine").unwrap();
        // Same path through the output directory.
        let err = OutputDir::create(d)
            .unwrap()
            .protect_inputs(&[&d.join("curves.csv")], &["curves.csv"])
            .unwrap_err();
        assert!(
            matches!(err, OutputError::WouldOverwriteInput { .. }),
            "{err}"
        );
        assert!(err.to_string().contains("an input of this run"), "{err}");
        // A hard link under the output name, made after the check: the write refuses it.
        let out = OutputDir::create(d.join("o"))
            .unwrap()
            .protect_inputs(&[&d.join("curves.csv")], &["labels.csv"])
            .unwrap();
        fs::hard_link(d.join("curves.csv"), d.join("o/labels.csv")).unwrap();
        assert!(matches!(
            out.write_bytes("labels.csv", b"x"),
            Err(OutputError::WouldOverwriteInput { .. })
        ));
        // A relative spelling of the same file.
        let dotted = d.join("o/../curves.csv");
        let err = OutputDir::create(d)
            .unwrap()
            .protect_inputs(&[&dotted], &["curves.csv"])
            .unwrap_err();
        assert!(
            matches!(err, OutputError::WouldOverwriteInput { .. }),
            "{err}"
        );
        assert_eq!(fs::read_to_string(d.join("curves.csv")).unwrap(), "mine");
        // The output directory itself being an input directory.
        let err = OutputDir::create(d.join("o"))
            .unwrap()
            .protect_inputs(&[&d.join("o/")], &[])
            .unwrap_err();
        assert!(matches!(err, OutputError::OutputIsInputDir { .. }), "{err}");
        // Other names are written as before.
        let out = OutputDir::create(d)
            .unwrap()
            .protect_inputs(&[&d.join("curves.csv")], &["labels.csv"])
            .unwrap();
        out.write_bytes("labels.csv", b"ok").unwrap();
        fs::remove_dir_all(d).unwrap();
    }
}
