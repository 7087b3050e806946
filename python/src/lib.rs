//! `retake._native`: the Python face of the retake library. Every function here converts
//! arguments, releases the GIL, calls the library function the CLI calls, and converts the
//! result back; no augmentation logic lives here, so the package and `retake run` cannot
//! disagree.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use numpy::{AllowTypeChange, IntoPyArray, PyArray1, PyArrayLike1, PyArrayMethods};
use pyo3::exceptions::{PyException, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList};

use retake::audio::{self, Audio, SampleFormat};
use retake::files::file_stem;
use retake::frames::frame_targets;
use retake::recipe::{self, Plan};
use retake::take::{self, ClipError as TakeFailure, ClipErrorKind, Take};
use retake::transcript::{self, Clip, Entry};

pyo3::create_exception!(
    _native,
    RetakeError,
    PyException,
    "Base of every error the package raises."
);
pyo3::create_exception!(
    _native,
    RecipeError,
    RetakeError,
    "A recipe that cannot be used: `file`, `line` (1-based), `field` (the key), `step`."
);
pyo3::create_exception!(
    _native,
    ClipError,
    RetakeError,
    "A clip no take can be made of: `file`, `line` (manifest line), `field` at fault, `kind` (labels, audio, step, take)."
);
pyo3::create_exception!(
    _native,
    ManifestError,
    RetakeError,
    "A manifest that cannot be read or written: `file`, `line`, `field`."
);
pyo3::create_exception!(
    _native,
    RunError,
    RetakeError,
    "A batch run that could not go on (locked or unwritable output folder, ...)."
);

/// An exception of type `E` with the message and `file`/`line`/`field` attributes.
fn located<E: pyo3::PyTypeInfo>(
    py: Python<'_>,
    message: String,
    file: Option<&Path>,
    line: Option<usize>,
    field: &str,
) -> PyErr {
    let err = PyErr::new::<E, _>(message);
    let value = err.value(py);
    let file = file.map(|p| p.display().to_string());
    let field = (!field.is_empty()).then(|| field.to_string());
    // Setting attributes on a fresh exception object cannot fail short of memory.
    let _ = value.setattr("file", file);
    let _ = value.setattr("line", line);
    let _ = value.setattr("field", field);
    err
}

fn recipe_error(py: Python<'_>, e: &retake::recipe::RecipeError) -> PyErr {
    let err = located::<RecipeError>(py, e.to_string(), Some(&e.path), e.line, &e.field);
    let _ = err.value(py).setattr("step", e.step);
    err
}

/// A clip error: in a manifest (`file`, `line`) or from arrays (no file).
fn clip_error(py: Python<'_>, at: Option<(&Path, usize)>, id: &str, e: &TakeFailure) -> PyErr {
    let place = match at {
        Some((file, line)) => format!("{} line {line}: ", file.display()),
        None => String::new(),
    };
    let message = format!("{place}clip {id}: {e}");
    let err = located::<ClipError>(py, message, at.map(|a| a.0), at.map(|a| a.1), &e.field);
    let kind = match e.kind {
        ClipErrorKind::Labels => "labels",
        ClipErrorKind::Audio => "audio",
        ClipErrorKind::Step => "step",
        ClipErrorKind::Take => "take",
    };
    let _ = err.value(py).setattr("kind", kind);
    err
}

fn json_loads<'py>(py: Python<'py>, text: &str) -> PyResult<Bound<'py, PyAny>> {
    py.import("json")?.call_method1("loads", (text,))
}

fn json_dumps(py: Python<'_>, value: &Bound<'_, PyAny>) -> PyResult<String> {
    py.import("json")?
        .call_method1("dumps", (value,))?
        .extract::<String>()
}

fn to_py<'py, T: serde::Serialize>(py: Python<'py>, value: &T) -> PyResult<Bound<'py, PyAny>> {
    let text = serde_json::to_string(value).map_err(|e| PyValueError::new_err(e.to_string()))?;
    json_loads(py, &text)
}

/// A manifest record (a dict in the manifest's schema) as the library's clip, checked as a
/// manifest line is.
fn clip_from(py: Python<'_>, record: &Bound<'_, PyAny>) -> PyResult<Clip> {
    let text = json_dumps(py, record)?;
    transcript::parse_clip(&text).map_err(|(field, reason)| {
        located::<ClipError>(py, format!("{field}: {reason}"), None, None, &field)
    })
}

/// Work that may use rayon runs in a pool of its own, so it also works in a process forked
/// from one whose global pool had started (a forked child has none of its threads).
fn in_own_pool<T: Send>(threads: Option<usize>, f: impl FnOnce() -> T + Send) -> PyResult<T> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()
        .map_err(|e| PyErr::new::<RetakeError, _>(format!("cannot start threads: {e}")))?;
    Ok(pool.install(f))
}

/// A checked recipe: the plan `retake run` would follow.
#[pyclass(frozen, module = "retake._native")]
struct Recipe {
    plan: Arc<Plan>,
    /// The file it was read from, when one (relative paths resolve against its folder).
    path: PathBuf,
    text: String,
}

impl Recipe {
    fn parse(py: Python<'_>, path: PathBuf, text: String) -> PyResult<Self> {
        let parsed = py.detach(|| in_own_pool(None, || recipe::parse(&path, &text)))?;
        let plan = parsed.map_err(|e| recipe_error(py, &e))?;
        Ok(Recipe {
            plan: Arc::new(plan),
            path,
            text,
        })
    }
}

#[pymethods]
impl Recipe {
    /// Read and check a recipe file, exactly as `retake run` does.
    #[staticmethod]
    fn load(py: Python<'_>, path: PathBuf) -> PyResult<Self> {
        let text = retake::input_file::read_to_string(&path).map_err(|e| {
            let e = retake::recipe::RecipeError {
                path: path.clone(),
                line: None,
                field: String::new(),
                step: None,
                message: format!("cannot read: {e}"),
            };
            recipe_error(py, &e)
        })?;
        Recipe::parse(py, path, text)
    }

    /// Check a recipe given as TOML text. Relative paths in it (noise banks, responses)
    /// resolve against `folder` (the current folder when not given); messages name `name`.
    #[staticmethod]
    #[pyo3(signature = (text, folder = None, name = "<string>"))]
    fn from_toml(
        py: Python<'_>,
        text: String,
        folder: Option<PathBuf>,
        name: &str,
    ) -> PyResult<Self> {
        let path = folder.unwrap_or_else(|| PathBuf::from(".")).join(name);
        Recipe::parse(py, path, text)
    }

    /// Pickling carries the text and path; the plan is checked again where it lands.
    fn __reduce__(slf: &Bound<'_, Self>) -> PyResult<(Py<PyAny>, (String, PathBuf))> {
        let restore = slf.getattr("_restore")?.unbind();
        let r = slf.get();
        Ok((restore, (r.text.clone(), r.path.clone())))
    }

    #[staticmethod]
    fn _restore(py: Python<'_>, text: String, path: PathBuf) -> PyResult<Self> {
        Recipe::parse(py, path, text)
    }

    /// The run's seed.
    #[getter]
    fn seed(&self) -> u64 {
        self.plan.seed
    }
    /// Takes per clip in one run (take 0 included).
    #[getter]
    fn takes(&self) -> u32 {
        self.plan.takes
    }
    /// Output sample rate in Hz.
    #[getter]
    fn rate(&self) -> u32 {
        self.plan.rate
    }
    /// Whether take 0 is the source, only resampled.
    #[getter]
    fn keep_source(&self) -> bool {
        self.plan.keep_source
    }
    /// A name of the output-format table ("pcm16", "pcm24", "float32", "flac16",
    /// "flac24"): what `Take.write` writes by default.
    #[getter]
    fn format(&self) -> &'static str {
        format_name(self.plan.format)
    }
    /// The steps' names, in order.
    #[getter]
    fn steps(&self) -> Vec<&'static str> {
        self.plan.steps.iter().map(|s| s.step.name()).collect()
    }
    /// Things worth knowing that do not stop a run.
    #[getter]
    fn warnings(&self) -> Vec<String> {
        self.plan.warnings.clone()
    }
    /// The recipe file (or `folder/<name>` for a recipe given as text).
    #[getter]
    fn path(&self) -> PathBuf {
        self.path.clone()
    }

    /// Take `k` of a clip given as samples (mono, any float dtype) at `rate` Hz, with its
    /// labels as `lines` (the manifest's schema) or an untimed `text`.
    #[pyo3(signature = (samples, rate, clip_id, lines = None, text = None, k = 0))]
    #[allow(clippy::too_many_arguments)] // Python's keyword arguments, one per field.
    fn make_take(
        &self,
        py: Python<'_>,
        samples: PyArrayLike1<'_, f32, AllowTypeChange>,
        rate: u32,
        clip_id: String,
        lines: Option<Bound<'_, PyAny>>,
        text: Option<String>,
        k: u32,
    ) -> PyResult<PyTake> {
        let record = PyDict::new(py);
        record.set_item("id", &clip_id)?;
        record.set_item("audio", "<samples>")?;
        if let Some(lines) = lines {
            record.set_item("lines", lines)?;
        }
        if let Some(text) = text {
            record.set_item("text", text)?;
        }
        let clip = clip_from(py, record.as_any())?;
        let samples = samples.as_slice()?.to_vec();
        let plan = self.plan.clone();
        let made = py.detach(move || {
            let source =
                take::source_of(&plan, &clip, Audio { rate, samples }, "<samples>".as_ref())?;
            take::make_take(&plan, &clip, &source.base, k, rate, &file_stem(&clip.id))
        });
        let made = made.map_err(|e| clip_error(py, None, &clip_id, &e))?;
        PyTake::new(py, made, k, self.plan.format)
    }

    /// Take `k` of a manifest record (a dict, as `read_manifest` gives): its audio is
    /// decoded by the same decoder `retake run` uses. A relative `audio` path resolves
    /// against `base` (the current folder when not given).
    #[pyo3(signature = (record, k = 0, base = None))]
    fn take_of(
        &self,
        py: Python<'_>,
        record: &Bound<'_, PyAny>,
        k: u32,
        base: Option<PathBuf>,
    ) -> PyResult<PyTake> {
        let clip = clip_from(py, record)?;
        let path = base.unwrap_or_default().join(&clip.audio);
        let plan = self.plan.clone();
        let id = clip.id.clone();
        let made = py.detach(move || take_from_file(&plan, &clip, &path, k));
        let made = made.map_err(|e| clip_error(py, None, &id, &e))?;
        PyTake::new(py, made, k, self.plan.format)
    }
}

/// Decode, check and make take `k`: the engine's own path for one take.
fn take_from_file(plan: &Plan, clip: &Clip, path: &Path, k: u32) -> Result<Take, TakeFailure> {
    let source = take::load_source(plan, clip, path)?;
    take::make_take(
        plan,
        clip,
        &source.base,
        k,
        source.rate,
        &file_stem(&clip.id),
    )
}

fn format_name(f: SampleFormat) -> &'static str {
    f.spec().name
}

/// A format of the library's output-format table, by its recipe name.
fn parse_format(name: &str) -> PyResult<SampleFormat> {
    SampleFormat::from_name(name).ok_or_else(|| {
        PyValueError::new_err(format!(
            "format: expected one of {}, not {name:?}",
            SampleFormat::names().join(", ")
        ))
    })
}

/// One take: samples at the recipe's rate, the manifest record `retake run` would write for
/// it (rewritten lines and words, `obscured`, `origin`), and the stems a step asked for.
#[pyclass(frozen, name = "Take", module = "retake._native")]
struct PyTake {
    samples: Py<PyArray1<f32>>,
    rate: u32,
    k: u32,
    record: Clip,
    format: SampleFormat,
    stems: Vec<(String, Audio)>,
}

impl PyTake {
    fn new(py: Python<'_>, made: Take, k: u32, format: SampleFormat) -> PyResult<Self> {
        let record = made.record(k, &file_stem(&made.clip.id), format);
        let rate = made.audio.rate;
        Ok(PyTake {
            samples: made.audio.samples.into_pyarray(py).unbind(),
            rate,
            k,
            record,
            format,
            stems: made.stems,
        })
    }
}

#[pymethods]
impl PyTake {
    /// The take's samples (float32, mono) at `rate`.
    #[getter]
    fn samples(&self, py: Python<'_>) -> Py<PyArray1<f32>> {
        self.samples.clone_ref(py)
    }
    /// Sample rate in Hz (the recipe's).
    #[getter]
    fn rate(&self) -> u32 {
        self.rate
    }
    /// The take index.
    #[getter]
    fn k(&self) -> u32 {
        self.k
    }
    /// Seconds of audio.
    #[getter]
    fn duration(&self) -> f64 {
        self.record.duration.unwrap_or(0.0)
    }
    /// The manifest record `retake run` writes for this take, as a dict.
    #[getter]
    fn record<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_py(py, &self.record)
    }
    /// The rewritten lines (with words and `obscured`), or None for an untimed clip.
    #[getter]
    fn lines<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_py(py, &self.record.lines)
    }
    /// The transcript as one string.
    #[getter]
    fn text(&self) -> Option<String> {
        self.record.text.clone()
    }
    /// How the take was made: source id, take index, seed, every step's drawn and measured
    /// values, and the composed time map.
    #[getter]
    fn origin<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_py(py, &self.record.origin)
    }
    /// Extra signals steps asked for, by their path inside an output folder.
    #[getter]
    fn stems<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let out = PyDict::new(py);
        for (rel, a) in &self.stems {
            out.set_item(rel, a.samples.clone().into_pyarray(py))?;
        }
        Ok(out)
    }

    /// Frame-level targets at `hop` seconds: arrays `line` and `word` (int32 indices, -1
    /// outside any) and `obscured` (float32), one entry per frame `[f*hop, (f+1)*hop)`,
    /// assigned by the frame's centre.
    fn frame_targets<'py>(&self, py: Python<'py>, hop: f64) -> PyResult<Bound<'py, PyDict>> {
        if !(hop.is_finite() && hop > 0.0) {
            return Err(PyValueError::new_err(format!(
                "hop must be a positive number of seconds, not {hop}"
            )));
        }
        let t = frame_targets(&self.record, self.duration(), hop);
        let out = PyDict::new(py);
        out.set_item("hop", t.hop_s)?;
        out.set_item("line", t.line.into_pyarray(py))?;
        out.set_item("word", t.word.into_pyarray(py))?;
        out.set_item("obscured", t.obscured.into_pyarray(py))?;
        Ok(out)
    }

    /// Write the take's audio with the library's writer (the recipe's format unless
    /// `format` is given: a name of the output-format table, "pcm16", "pcm24", "float32",
    /// "flac16", "flac24").
    #[pyo3(signature = (path, format = None))]
    fn write(&self, py: Python<'_>, path: PathBuf, format: Option<&str>) -> PyResult<()> {
        let format = format.map(parse_format).transpose()?.unwrap_or(self.format);
        let samples = self.samples.bind(py).to_vec()?;
        let audio = Audio {
            rate: self.rate,
            samples,
        };
        py.detach(|| audio::write_audio(&path, &audio, format))
            .map_err(|e| PyErr::new::<RetakeError, _>(e.to_string()))
    }

    fn __repr__(&self) -> String {
        format!(
            "Take(id={:?}, k={}, rate={}, duration={:.3})",
            self.record.id,
            self.k,
            self.rate,
            self.duration()
        )
    }
}

/// The clips of a manifest, held in memory with their line numbers, so takes of them can be
/// made by index (what a dataset needs) with errors naming the manifest line.
#[pyclass(frozen, module = "retake._native")]
struct Corpus {
    path: PathBuf,
    base: PathBuf,
    entries: Vec<Entry>,
}

#[pymethods]
impl Corpus {
    /// Read a manifest; a line that cannot be used raises `ManifestError` naming it.
    #[new]
    fn new(py: Python<'_>, path: PathBuf) -> PyResult<Self> {
        let manifest = read(py, &path)?;
        Ok(Corpus {
            base: manifest.base().to_path_buf(),
            path,
            entries: manifest.entries,
        })
    }

    fn __reduce__(slf: &Bound<'_, Self>) -> PyResult<(Py<PyAny>, (PathBuf,))> {
        let cls = slf.get_type().into_any().unbind();
        Ok((cls, (slf.get().path.clone(),)))
    }

    fn __len__(&self) -> usize {
        self.entries.len()
    }

    /// The manifest file.
    #[getter]
    fn path(&self) -> PathBuf {
        self.path.clone()
    }

    /// The clip ids in manifest order.
    #[getter]
    fn ids(&self) -> Vec<String> {
        self.entries.iter().map(|e| e.clip.id.clone()).collect()
    }

    /// Take `k` of clip `i` (manifest order) under `recipe`.
    fn take(&self, py: Python<'_>, recipe: &Recipe, i: usize, k: u32) -> PyResult<PyTake> {
        let Some(entry) = self.entries.get(i) else {
            return Err(pyo3::exceptions::PyIndexError::new_err(format!(
                "clip {i} of {}",
                self.entries.len()
            )));
        };
        let plan = recipe.plan.clone();
        let path = self.base.join(&entry.clip.audio);
        let made = py.detach(|| take_from_file(&plan, &entry.clip, &path, k));
        let made =
            made.map_err(|e| clip_error(py, Some((&self.path, entry.line)), &entry.clip.id, &e))?;
        PyTake::new(py, made, k, plan.format)
    }
}

fn read(py: Python<'_>, path: &Path) -> PyResult<transcript::Manifest> {
    let manifest = py.detach(|| transcript::read_manifest(path)).map_err(|e| {
        located::<ManifestError>(py, format!("{}: {e}", path.display()), Some(path), None, "")
    })?;
    if let Some(p) = manifest.problems.first() {
        return Err(located::<ManifestError>(
            py,
            p.to_string(),
            Some(&p.file),
            Some(p.line),
            &p.field,
        ));
    }
    Ok(manifest)
}

/// Read a manifest into a list of dicts in its schema, each `audio` resolved to an absolute
/// path. A line that cannot be used raises `ManifestError` with its `file`, `line`, `field`.
#[pyfunction]
fn read_manifest<'py>(py: Python<'py>, path: PathBuf) -> PyResult<Bound<'py, PyList>> {
    let manifest = read(py, &path)?;
    let base = std::path::absolute(manifest.base()).unwrap_or_else(|_| manifest.base().into());
    let out = PyList::empty(py);
    for e in manifest.entries {
        let audio = base.join(&e.clip.audio).display().to_string();
        out.append(to_py(py, &Clip { audio, ..e.clip })?)?;
    }
    Ok(out)
}

/// Write records (dicts in the manifest's schema) as a JSON Lines manifest, atomically.
/// Each record is checked as a manifest line is; a bad one raises `ManifestError` naming its
/// index (as `line`, counted from 1) and field, and nothing is written.
#[pyfunction]
fn write_manifest(py: Python<'_>, path: PathBuf, records: &Bound<'_, PyAny>) -> PyResult<()> {
    let mut clips = Vec::new();
    for (i, r) in records.try_iter()?.enumerate() {
        let text = json_dumps(py, &r?)?;
        let clip = transcript::parse_clip(&text).map_err(|(field, reason)| {
            let message = format!("record {}: {field}: {reason}", i + 1);
            located::<ManifestError>(py, message, Some(&path), Some(i + 1), &field)
        })?;
        clips.push(clip);
    }
    py.detach(|| {
        retake::files::write_atomically(&path, |w| transcript::write_manifest(w, clips.iter()))
    })
    .map_err(|e| {
        located::<ManifestError>(
            py,
            format!("{}: {e}", path.display()),
            Some(&path),
            None,
            "",
        )
    })
}

/// Run a whole batch, exactly as `retake run RECIPE MANIFEST OUT`: takes, manifest,
/// rejects, resume. `progress(done, total, ok)` is called after each clip (from worker
/// threads, holding the GIL only for the call). `max_clip_memory` (MiB, as the CLI's
/// `--max-clip-memory`) is the memory one worker may need for one clip; a longer clip is a
/// reject pointing at `retake slice`. Returns the run's summary figures.
#[pyfunction]
#[pyo3(signature = (recipe, manifest, out, threads = None, progress = None, max_clip_memory = retake::memory::DEFAULT_LIMIT_BYTES >> 20))]
#[allow(clippy::too_many_arguments)]
fn run<'py>(
    py: Python<'py>,
    recipe: &Recipe,
    manifest: PathBuf,
    out: PathBuf,
    threads: Option<usize>,
    progress: Option<Py<PyAny>>,
    max_clip_memory: u64,
) -> PyResult<Bound<'py, PyDict>> {
    if max_clip_memory == 0 || max_clip_memory > 1 << 30 {
        return Err(PyValueError::new_err(format!(
            "max_clip_memory: {max_clip_memory} MiB: expected 1 to {}",
            1u64 << 30
        )));
    }
    use std::sync::Mutex;
    use std::sync::atomic::{AtomicUsize, Ordering};
    let total = AtomicUsize::new(0);
    let done = AtomicUsize::new(0);
    let failed: Mutex<Option<PyErr>> = Mutex::new(None);
    let on_event = |e: retake::run::Event| {
        let Some(cb) = &progress else { return };
        let (n, ok) = match e {
            retake::run::Event::Started { clips } => {
                total.store(clips, Ordering::Relaxed);
                return;
            }
            retake::run::Event::ClipDone { ok } => (done.fetch_add(1, Ordering::Relaxed) + 1, ok),
        };
        Python::attach(|py| {
            if let Err(err) = cb.call1(py, (n, total.load(Ordering::Relaxed), ok)) {
                failed
                    .lock()
                    .unwrap_or_else(|p| p.into_inner())
                    .get_or_insert(err);
            }
        });
    };
    let recipe_path =
        (recipe.path.file_name() != Some("<string>".as_ref())).then_some(&recipe.path);
    let spec = retake::run::RunSpec {
        plan: &recipe.plan,
        recipe: recipe_path.map(|p| p.as_path()),
        input: &manifest,
        out: &out,
        threads,
        shard: None,
        clip_memory_limit: max_clip_memory << 20,
    };
    let result = py.detach(|| retake::run::run(&spec, &on_event));
    if let Some(err) = failed.into_inner().unwrap_or_else(|p| p.into_inner()) {
        return Err(err);
    }
    let s = result.map_err(|e| PyErr::new::<RunError, _>(e.to_string()))?;
    let d = PyDict::new(py);
    d.set_item("clips_in", s.clips_in)?;
    d.set_item("clips_done", s.clips_done)?;
    d.set_item("clips_resumed", s.clips_resumed)?;
    d.set_item("rejected", s.rejected)?;
    d.set_item("takes", s.takes)?;
    d.set_item("takes_kept", s.takes_kept)?;
    d.set_item("seconds_in", s.seconds_in)?;
    d.set_item("seconds_out", s.seconds_out)?;
    d.set_item("removed", s.removed)?;
    d.set_item("wall_seconds", s.wall_seconds)?;
    Ok(d)
}

/// Decode an audio file with the library's decoder (mono by the channel policy `channels`:
/// "mix" or a channel number), as `(samples, rate)`.
#[pyfunction]
#[pyo3(signature = (path, channels = None))]
fn decode<'py>(
    py: Python<'py>,
    path: PathBuf,
    channels: Option<Bound<'py, PyAny>>,
) -> PyResult<(Bound<'py, PyArray1<f32>>, u32)> {
    let policy = match channels {
        None => audio::ChannelPolicy::Mix,
        Some(c) => match c.extract::<usize>() {
            Ok(n) => audio::ChannelPolicy::Pick(n),
            Err(_) if c.extract::<String>().is_ok_and(|s| s == "mix") => audio::ChannelPolicy::Mix,
            Err(_) => {
                return Err(PyValueError::new_err(
                    "channels: expected \"mix\" or a channel number counted from 0",
                ));
            }
        },
    };
    let a = py
        .detach(|| audio::decode(&path, policy))
        .map_err(|e| located::<ClipError>(py, e.to_string(), Some(&path), None, "audio"))?;
    Ok((a.samples.into_pyarray(py), a.rate))
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("RetakeError", py.get_type::<RetakeError>())?;
    m.add("RecipeError", py.get_type::<RecipeError>())?;
    m.add("ClipError", py.get_type::<ClipError>())?;
    m.add("ManifestError", py.get_type::<ManifestError>())?;
    m.add("RunError", py.get_type::<RunError>())?;
    m.add_class::<Recipe>()?;
    m.add_class::<PyTake>()?;
    m.add_class::<Corpus>()?;
    m.add_function(wrap_pyfunction!(read_manifest, m)?)?;
    m.add_function(wrap_pyfunction!(write_manifest, m)?)?;
    m.add_function(wrap_pyfunction!(run, m)?)?;
    m.add_function(wrap_pyfunction!(decode, m)?)?;
    Ok(())
}
