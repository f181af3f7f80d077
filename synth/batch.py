"""Batch rendering of a sample library: spec -> jobs -> local process pool or Dask.

:func:`build_library` renders every note x velocity x round robin of a library
spec (see :mod:`synth.library`) into one folder: the WAV files, a
``manifest.json`` and an SFZ map ``<name>.sfz``.

How a run goes
--------------
1. The spec and patch are checked (bad input raises PatchError before any
   file is written); every job is voiced here.
2. **One gain** scales the whole library so its loudest sample sits at
   ``render.peak_db`` and velocity layers keep their dynamics.  It is decided
   before any file is written, by a first pass measuring every job's
   unnormalised peak.  Each measuring render stops once the decay bound
   ``sum_m |a_m| exp(-ln(1000) t / T60_m)``, which no later sample can
   exceed, falls below the peak found so far (spans double from 0.25 s).  The
   pass is exact and cheap: for the example string patches it renders 0.25 s
   of audio per job (0.75 s at most) against 3-4 s per file; the 48-file demo
   library measures in 0.1 s and renders in 1.3 s on one core.  The gain, its
   basis and a hash of every job's parameters go into the manifest; a run with
   the same hash reuses the recorded gain.  ``render.peak_db: null`` means
   gain 1 (absolute scale); a sample that would clip then fails.
3. Workers render, scale, dither (a fixed seed per file), encode the WAV in
   memory and measure it, each with one BLAS thread; only this process writes,
   each file to a temporary name then renamed.  So a Dask cluster needs no
   shared disk, and local, resumed and cluster runs write the same bytes.
4. **Resume**: a file whose effective-parameter hash (job, voiced patch,
   dither seed, gain, versions) and size match its manifest entry is skipped
   and not touched; ``force`` renders all again.
5. **Ctrl-C and SIGTERM** (:mod:`synth.signals`): the first stops submitting
   work; running jobs finish and are written (workers ignore SIGINT: only this
   process decides); manifest and map are rewritten from what is on disk; the
   pool is shut down; exit status 130 (SIGINT) or 143 (SIGTERM).  A second
   signal stops at once: workers are terminated, temporaries removed, and
   atomic writes still leave no partial file.  The manifest is also rewritten
   during the run after every small group of files (at most ~10% of the
   run's time goes to it), so even a SIGKILL loses little.
6. A failed job (a pitch the object cannot reach, every mode above Nyquist,
   ...) is reported and the others go on; the exit status is then 1.
7. **One run per folder**: a run holds an advisory lock (``flock``) on its
   output folder, released by the kernel when the process ends; a second run
   on the folder is refused, naming the pid.
"""
from __future__ import annotations

import dataclasses
import itertools
import math
import os
import sys
import time
from dataclasses import dataclass
from pathlib import Path


from .audio import _same_file, atomic_output, sampler_fields
from .errors import ModalError, PatchError, RenderError
from .executors import Inline as _Inline
from .executors import WORKER_TIMEOUT_S, backend, default_workers
from .libwork import WORKER_PRELOAD, RenderRequest, audible, execute
from .signals import StopFlag
from .libindex import MANIFEST_NAME, index_texts, key_ranges, read_manifest, velocity_ranges
from .library import (
    dither_seed,
    file_hash,
    input_hash,
    is_sample_file_name,
    job_table,
    library_hash,
    library_jobs,
    load_library_spec,
    partials_dict,
    patch_fingerprint,
)
from .solvecache import SolveCache
from .tone import CUT_DB
from .units import counted

__all__ = ["LibraryResult", "build_library", "summary_lines", "default_workers"]

MANIFEST_INTERVAL_S = 1.0  # s, the least time between two rewrites of the manifest during a run
MANIFEST_SHARE = 0.1  # ... and at most this share of the run's time goes to rewriting it
MAX_BATCH_JOBS = 16  # jobs handed to a worker at a time (fewer round trips; a few MB of WAV back)
PREFETCH_JOBS = 1024  # jobs' tables made ready before the first render task is handed out

# ---------------------------------------------------------------------------
# The run


@dataclass(frozen=True)
class LibraryResult:
    """What :func:`build_library` did.

    `failed` holds (file, job label, message) per failed job; `stage` is
    "measuring" if the run was interrupted before any file was written, else
    "rendering".  `exit_status` is 130 or 143 if interrupted (SIGINT,
    SIGTERM), 1 if any job failed, else 0.
    """

    name: str
    output: Path
    manifest: Path
    sfz: Path
    n_jobs: int
    rendered: int
    skipped: int
    failed: tuple
    interrupted: int | None  # the exit status of the signal that stopped the run (130, 143), or None
    stage: str
    gain: float | None
    gain_reused: bool
    loudest: str | None
    backend: str
    elapsed_s: float
    measure_s: float
    n_on_disk: int
    warned: tuple = ()
    stale: tuple = ()
    pruned: tuple = ()

    @property
    def exit_status(self):
        """Exit status of ``synth batch``: 130 / 143 interrupted (SIGINT / SIGTERM), 1 some job failed, 0 all written."""
        return self.interrupted if self.interrupted else 1 if self.failed else 0


def _remove_temporaries(folder, name):
    """Delete temporary files a killed run may have left (only our own name patterns)."""
    for pattern in (f".{name}_*.part.wav", ".manifest.*.part.json", f".{name}.*.part.sfz"):
        for path in folder.glob(pattern):
            try:
                path.unlink()
            except OSError:
                pass


def _progress(total, desc, enabled):
    from tqdm import tqdm

    disable = None if enabled is None else not enabled
    return tqdm(total=total, desc=desc, unit="file", file=sys.stderr, disable=disable, leave=False)


def _finite(value):
    return value if value is not None and math.isfinite(value) else None


def _batches(items, size):
    """`items` (an iterable) in lists of at most `size`."""
    batch = []
    for item in items:
        batch.append(item)
        if len(batch) >= size:
            yield batch
            batch = []
    if batch:
        yield batch


def _rename_into_place(part, path):
    """Rename a worker's finished temporary file to `path`, with the usual file mode."""
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(part, 0o666 & ~umask)  # mkstemp makes 0600
        os.replace(part, path)
    except OSError:
        part.unlink(missing_ok=True)
        raise


class _Run:
    """The state of one library run: jobs, gain, manifest entries and failures.

    The physics is done here, in the parent, once per object: each job's
    partial table comes from :func:`synth.library.job_table` through one
    :class:`~synth.solvecache.SolveCache`, just before the job is handed to a
    worker, and is not kept after.
    """

    def __init__(self, spec, jobs, force, workers=1, local=True):
        self.spec, self.jobs, self.force = spec, jobs, force
        self.folder = spec.output
        self.cache = SolveCache()
        self.failed = {}
        fingerprint = patch_fingerprint(spec.patch)
        self.inputs = [input_hash(job, fingerprint) for job in jobs]
        self.hash = library_hash(self.inputs)
        self.previous = read_manifest(self.folder)
        self.gain, self.basis, self.loudest, self.reused = None, None, None, False
        self.entries, self.fresh, self.warned = {}, set(), []
        self.settings = RenderRequest.of(spec.patch)
        self.keys = key_ranges([midi for _, midi in spec.notes])
        self.layers = velocity_ranges(spec.velocities)
        self.batch_size = max(1, min(MAX_BATCH_JOBS, len(jobs) // (4 * max(1, workers)) or 1))
        self.local = local  # workers share this file system: they write the files' bytes themselves
        self.pending = {}  # job index -> (fundamental_hz, partials) of jobs handed to a worker
        self.stale, self.pruned = [], []  # files of earlier manifests this spec no longer makes
        self.task_jobs = []  # job indices of each task handed out, in order

    def table(self, job):
        """The job's partial table, or None (and the job marked failed) if it cannot be voiced."""
        try:
            return job_table(self.spec, job, cache=self.cache)
        except PatchError as error:
            self.failed[job.index] = str(error)
            return None

    def own_request(self, job):
        """() or (the job's own RenderRequest,): an instrument whose dampers vary by key."""
        release_at = getattr(self.spec.patch, "release_t60_at", None)
        if release_at is None:
            return ()
        release = release_at(job.midi)
        return () if release == self.settings.release_t60 else (dataclasses.replace(self.settings, release_t60=release),)

    # -- the one gain ------------------------------------------------------

    def recorded_gain(self):
        """Take the gain from the previous manifest if it was decided for these very jobs."""
        recorded = (self.previous or {}).get("library", {})
        gain = recorded.get("gain")
        if self.force or recorded.get("hash") != self.hash or not isinstance(gain, float) or not gain > 0:
            return False
        basis = recorded.get("gain_basis")
        self.gain, self.basis, self.reused = gain, basis, True
        self.loudest = basis.get("loudest_file") if isinstance(basis, dict) else None
        return True

    def _peak_tasks(self):
        def items():
            for job in self.jobs:
                table = self.table(job)
                if table is not None:
                    yield (job.index, audible(table)) + self.own_request(job)

        for batch in _batches(items(), self.batch_size):
            self.task_jobs.append([item[0] for item in batch])
            yield "peak", self.settings, batch

    def measure_gain(self, executor, stop, progress):
        """Decide the gain from every job's peak; False if interrupted."""
        peak_db = self.spec.patch.render.peak_db
        if peak_db is None:
            self.gain = 1.0
            self.basis = {"method": "absolute scale (render.peak_db is null): gain 1; a sample that would clip fails"}
            return True
        peaks = {}
        with _progress(len(self.jobs), "measuring peaks", progress) as bar:
            for index, status, value in self.results(executor, self._peak_tasks(), stop):
                if status == "ok":
                    peaks[index] = value
                else:
                    self.failed[index] = value
                bar.update(1)
        if stop.requested:
            return False
        if not peaks:
            self.basis = {"method": "none: no job could be rendered"}
            return True
        loudest = max(peaks, key=lambda i: (peaks[i], -i))
        self.gain = 10.0 ** (peak_db / 20.0) / peaks[loudest]
        self.loudest = self.jobs[loudest].file
        self.basis = {
            "method": "loudest unnormalised peak over every job (exact: each measuring render stops once the "
            "decay bound sum|a| exp(-ln(1000) t / T60) is below the peak found)",
            "peak_db": peak_db,
            "loudest_file": self.loudest,
            "loudest_peak": peaks[loudest],
            "jobs_measured": len(peaks),
        }
        return True

    # -- files ---------------------------------------------------------------

    def carry_entries(self):
        """Keep the previous entries of files still on disk; mark which are up to date (no physics)."""
        self.hashes = {}
        if self.gain is not None:
            self.hashes = {job.index: file_hash(self.inputs[job.index], self.gain) for job in self.jobs}
        old = {}
        for entry in (self.previous or {}).get("files", []):
            if isinstance(entry, dict) and isinstance(entry.get("file"), str):
                old[entry["file"]] = entry
        for job in self.jobs:
            entry = old.get(job.file)
            if entry is None:
                continue
            try:
                size = (self.folder / job.file).stat().st_size
            except OSError:
                continue
            if size != entry.get("bytes"):
                continue
            current = not self.force and entry.get("param_hash") == self.hashes.get(job.index)
            self.entries[job.index] = {**entry, "up_to_date": current}
            if current:
                self.fresh.add(job.index)

    def to_render(self):
        return [job for job in self.jobs if job.index in self.hashes and job.index not in self.fresh and job.index not in self.failed]

    def render_tasks(self, jobs):
        """Tasks rendering `jobs`, each job's table computed as its task is handed out."""
        def items():
            for job in jobs:
                table = self.table(job)
                if table is None:
                    continue
                self.pending[job.index] = (float(table.fundamental_hz), partials_dict(table))
                target = (str(self.folder), job.file) if self.local else None
                yield (job.index, audible(table), self.gain, dither_seed(job), target,
                       self.sampler_fields(job)) + self.own_request(job)

        for batch in _batches(items(), self.batch_size):
            self.task_jobs.append([item[0] for item in batch])
            yield "render", self.settings, batch

    def results(self, executor, tasks, stop):
        """(job index, status, value) of every job of `tasks` as they come back.

        A task whose worker failed as a whole (a crashed process, a lost
        cluster worker) fails each of its jobs with the worker's message.
        """
        self.task_jobs = []
        for task_index, outcome in executor.run(tasks, stop):
            if isinstance(outcome, list):
                yield from outcome
            else:
                for index in self.task_jobs[task_index]:
                    yield index, "error", outcome[1]

    def sampler_fields(self, job):
        """The ``smpl`` / ``inst`` fields of a job's file (:func:`synth.audio.sampler_fields`).

        The take sounds ``detune_cents`` from its note; its key and velocity
        ranges are the ones the SFZ gives it.  The SFZ plays the takes as
        rendered, their variation kept.
        """
        low_note, high_note = self.keys[job.midi]
        low_velocity, high_velocity = self.layers[job.velocity]
        return sampler_fields(job.midi + job.detune_cents / 100.0, low_note=low_note, high_note=high_note,
                              low_velocity=low_velocity, high_velocity=high_velocity)

    def store(self, job, value):
        """Put one rendered file in place (atomically) and record its entry."""
        fundamental, partials = self.pending.pop(job.index)
        if "part" in value:  # written by a local worker beside its final name: renamed in
            size = value["bytes"]
            _rename_into_place(Path(value["part"]), self.folder / job.file)
        else:
            size = len(value["wav"])
            with atomic_output(self.folder / job.file) as tmp:
                tmp.write_bytes(value["wav"])
        self.entries[job.index] = {
            "file": job.file,
            "note": job.note,
            "midi": job.midi,
            "velocity": job.velocity,
            "round_robin": job.round_robin,
            "fundamental_hz": fundamental,
            "detune_cents": job.detune_cents,
            "excitation_position": None if job.excitation_position is None else list(job.excitation_position),
            "peak_dbfs": _finite(value["peak_dbfs"]),
            "true_peak_dbtp": _finite(value["true_peak_dbtp"]),
            "duration_s": value["duration_s"],
            "ending": value["ending"],
            "loudness_lufs": value["loudness_lufs"],
            "loudness_note": value["loudness_note"],
            "param_hash": self.hashes[job.index],
            "dither_seed": dither_seed(job),
            "bytes": size,
            "up_to_date": True,
            "partials": partials,
        }
        if value["cut_db"] is not None and value["cut_db"] > CUT_DB:
            self.warned.append((job.file, value["ending"]))
        elif partials["warnings"]:
            self.warned.append((job.file, partials["warnings"][0]))

    def fail(self, job, message):
        self.pending.pop(job.index, None)
        self.failed[job.index] = message

    def find_stale(self):
        """Name the files the previous manifest listed (or kept as stale) that no job produces now.

        Only names of the library's own sample pattern, directly in the
        folder, are considered: a manifest cannot point a deletion anywhere
        else.
        """
        produced = {job.file for job in self.jobs}
        previous = self.previous or {}
        listed = [e.get("file") for e in previous.get("files", []) if isinstance(e, dict)]
        listed += [name for name in previous.get("library", {}).get("stale", []) or [] if isinstance(name, str)]
        self.stale = sorted({name for name in listed if isinstance(name, str) and name not in produced
                             and is_sample_file_name(name) and (self.folder / name).is_file()})

    def prune_stale(self, prune):
        """Delete the stale files (:meth:`find_stale`) if `prune`."""
        if prune:
            inputs = _inputs(self.spec)
            for name in self.stale:
                if any(_same_file(self.folder / name, source) for source in inputs):
                    continue  # never an input, whatever an old manifest says
                try:
                    (self.folder / name).unlink()
                    self.pruned.append(name)
                except OSError:
                    pass


    # -- manifest and map ----------------------------------------------------

    def write_index(self):
        """Write manifest.json and <name>.sfz from the entries (atomically; only if their text changed)."""
        texts = index_texts(self.spec, self.jobs, self.entries, self.failed, lib_hash=self.hash, gain=self.gain,
                            basis=self.basis, stale=[n for n in self.stale if n not in self.pruned])
        for path, text in zip((self.folder / MANIFEST_NAME, self.folder / f"{self.spec.name}.sfz"), texts):
            try:
                if path.read_text(encoding="utf-8") == text:
                    continue
            except (OSError, ValueError):
                pass
            with atomic_output(path) as tmp:
                tmp.write_text(text, encoding="utf-8")


def _inputs(spec):
    """The files a library run reads: its spec, its patch (or instrument) and an instrument's base patch and fits."""
    files = [spec.source, spec.patch_file, getattr(spec.patch, "source", None)]
    base = getattr(spec.patch, "base", None)
    if base is not None:
        files.append(base.source)
    store = getattr(spec.patch, "store", None)
    if store is not None:
        files.append(store.path)
    return [f for f in files if f]


def _check_inputs_kept(spec, jobs):
    """PatchError (key ``output``) if any file the run writes would be one of its inputs."""
    outputs = [MANIFEST_NAME, f"{spec.name}.sfz"] + [job.file for job in jobs]
    inputs = _inputs(spec)
    for name in outputs:
        for source in inputs:
            if _same_file(spec.output / name, source):
                raise PatchError(f"the library would write {name} over its own input {str(source)!r}: choose "
                                 "another output folder (or name)", file=spec.source, key="output")


def build_library(spec_path, *, output=None, workers=None, scheduler=None, force=False, progress=None, prune=False,
                  worker_timeout=WORKER_TIMEOUT_S, verbose=False):
    """Render the sample library described by the spec at `spec_path`.

    Parameters
    ----------
    spec_path : str or os.PathLike
    output : str or None
        Output folder; overrides the spec's ``output``.
    workers : int >= 1 or None
        Local processes (default: every core this process may use; 1 renders
        in this process).
    scheduler : str or None
        Address of a Dask distributed scheduler, e.g. ``tcp://host:8786``.
    force : bool
        Render every file again (and measure the gain again).
    progress : bool or None
        Show progress bars (None: when stderr is a terminal).
    prune : bool
        Delete the stale files: those the previous manifest listed that this
        spec no longer produces (never any other file, never an input).
    worker_timeout : float, s
        On a cluster: give up (:class:`~synth.errors.RunError`, exit status 1)
        once no worker has been alive this long.
    verbose : bool
        On a cluster: let Dask's own logging through.

    Returns
    -------
    LibraryResult

    Raises
    ------
    PatchError
        For a bad spec, patch or option; nothing is written.
    """
    started = time.perf_counter()
    spec = load_library_spec(spec_path, output=output)
    jobs = library_jobs(spec)
    _check_inputs_kept(spec, jobs)
    executor = backend(execute, workers, scheduler, len(jobs), preload=WORKER_PRELOAD,
                       worker_timeout=worker_timeout, verbose=verbose)
    run = _Run(spec, jobs, force, workers=getattr(executor, "workers", 1), local=scheduler is None)
    rendered = 0
    reused = run.recorded_gain()
    if reused:
        run.carry_entries()
        if not run.to_render() and not run.force:  # an idle re-run: no worker is started
            executor = backend(execute, 1, None, 1) if scheduler is None else executor
    with StopFlag() as stop, executor:
        executor.warm_up()
        measure_started = time.perf_counter()
        # On this machine the peaks are measured here, where the tables are
        # made, while the workers start; a cluster measures them itself.
        gain_executor = executor if scheduler is not None else _Inline(execute)
        if not reused and not run.measure_gain(gain_executor, stop, progress):
            return _result(run, executor, started, 0.0, 0, "measuring", stop.status)
        measure_s = time.perf_counter() - measure_started
        try:
            run.folder.mkdir(parents=True, exist_ok=True)
        except OSError as error:
            raise PatchError(f"cannot create the output folder {str(run.folder)!r}: {error.strerror or error}", key="output") from None
        with folder_lock(run.folder):
            try:
                _remove_temporaries(run.folder, spec.name)
                if not reused:
                    run.carry_entries()
                run.find_stale()
                run.write_index()
                todo = run.to_render()
                by_index = {job.index: job for job in todo}
                writes = _IndexWrites(run)
                tasks = run.render_tasks(todo)
                # While the workers start (their imports take a second), get the
                # first tasks ready here; at most PREFETCH_JOBS of them are held.
                ready = list(itertools.islice(tasks, max(1, PREFETCH_JOBS // run.batch_size)))
                with _progress(len(todo), "rendering", progress) as bar:
                    for index, status, value in run.results(executor, itertools.chain(ready, tasks), stop):
                        job = by_index[index]
                        if status == "ok":
                            run.store(job, value)
                            rendered += 1
                        else:
                            run.fail(job, value)
                        bar.update(1)
                        writes.after_file()
            except (KeyboardInterrupt, ModalError):  # a second signal or a broken pool: still leave a true manifest
                executor.terminate()
                _remove_temporaries(run.folder, spec.name)
                _try_index(run)
                raise
            except OSError as error:  # the disk filled up, the folder went away, ...
                _try_index(run)
                raise RenderError(f"cannot write to {str(run.folder)!r}: {error.strerror or error}") from None
            run.prune_stale(prune and not stop.requested)
            run.write_index()
        return _result(run, executor, started, measure_s, rendered, "rendering", stop.status)


class _IndexWrites:
    """Rewrites the manifest during a run: after every small group of files, at most
    :data:`MANIFEST_SHARE` of the run's time, and no more often than :data:`MANIFEST_INTERVAL_S`."""

    def __init__(self, run):
        self.run = run
        self.last = time.monotonic()
        self.cost = 0.0

    def after_file(self):
        now = time.monotonic()
        if now - self.last < max(MANIFEST_INTERVAL_S, self.cost / MANIFEST_SHARE):
            return
        self.run.write_index()
        self.last = time.monotonic()
        self.cost = self.last - now


class folder_lock:
    """Context manager: an exclusive advisory lock (``flock``) on the output folder itself for one run.

    Nothing is written for it (an idle re-run touches no file); the kernel
    releases the lock when the process ends, however it ends, so a killed run
    never leaves the folder locked.  A second run on the folder is refused
    with one line naming the holder's pid (read from ``/proc/locks`` where
    the system has it).
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self.fd = None

    def __enter__(self):
        try:
            import fcntl
        except ImportError:  # not on every platform: no lock there
            return self
        try:
            self.fd = os.open(self.folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        except OSError as error:
            raise RenderError(f"cannot lock the output folder {str(self.folder)!r}: {error.strerror or error}") from None
        try:
            fcntl.flock(self.fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            holder = _lock_holder(self.folder)
            os.close(self.fd)
            self.fd = None
            raise RenderError(f"the output folder {str(self.folder)!r} is in use by another synth batch run "
                              f"({holder}); wait for it or choose another output folder") from None
        return self

    def __exit__(self, *exc):
        if self.fd is not None:
            os.close(self.fd)  # releases the lock
        return False


def _lock_holder(folder):
    """"pid N" of the process holding a flock on `folder` (from /proc/locks), or "another process"."""
    try:
        st = os.stat(folder)
        wanted = (os.major(st.st_dev), os.minor(st.st_dev), st.st_ino)
        with open("/proc/locks", encoding="ascii") as handle:
            for line in handle:
                fields = line.split()
                if len(fields) > 5 and fields[1] == "FLOCK" and fields[0].endswith(":"):
                    major, minor, inode = fields[5].split(":")
                    if (int(major, 16), int(minor, 16), int(inode)) == wanted:
                        return f"pid {int(fields[4])}"
    except (OSError, ValueError):
        pass
    return "another process"


def _try_index(run):
    """Rewrite the manifest and map if the disk lets us (after an error)."""
    try:
        run.write_index()
    except OSError:
        pass


def _result(run, executor, started, measure_s, rendered, stage, interrupted):
    spec, jobs = run.spec, run.jobs
    return LibraryResult(
        name=spec.name,
        output=spec.output,
        manifest=spec.output / MANIFEST_NAME,
        sfz=spec.output / f"{spec.name}.sfz",
        n_jobs=len(jobs),
        rendered=rendered,
        skipped=len(run.fresh),
        failed=tuple((jobs[i].file, jobs[i].label, message) for i, message in sorted(run.failed.items())),
        interrupted=interrupted,
        stage=stage,
        gain=run.gain,
        gain_reused=run.reused,
        loudest=run.loudest,
        backend=executor.description,
        elapsed_s=time.perf_counter() - started,
        measure_s=measure_s,
        n_on_disk=len(run.entries),
        warned=tuple(run.warned),
        stale=tuple(run.stale),
        pruned=tuple(run.pruned),
    )


def _some(names, limit=4):
    """The first few `names`, and how many more."""
    shown = ", ".join(names[:limit])
    return shown + (f" ... and {len(names) - limit} more" if len(names) > limit else "")


def summary_lines(result):
    """(stdout lines, stderr lines) summarising `result` for the command line."""
    out, err = [], []
    if result.interrupted and result.stage == "measuring":
        err.append("synth: interrupted while measuring peaks; no file was written or changed")
        return out, err
    for file, label, message in result.failed:
        err.append(f"synth: error: {file} ({label}): {message}")
    out.append(
        f"library {result.name}: {result.n_jobs} files in {result.output}: {result.rendered} rendered, "
        f"{result.skipped} up to date, {len(result.failed)} failed ({result.backend}, {result.elapsed_s:.1f} s)"
    )
    if result.gain:
        how = "recorded gain reused" if result.gain_reused else f"decided from every job's peak in {result.measure_s:.1f} s"
        where = f"; loudest sample {result.loudest}" if result.loudest else ""
        out.append(f"one gain for the whole library: {20 * math.log10(result.gain):+.2f} dB ({how}{where})")
    out.append(f"manifest {result.manifest}, sample map {result.sfz}")
    if result.warned:
        file, first = result.warned[0]
        err.append(
            f"synth: warning: {file}: {first} (and the same or other partial-table warnings in "
            f"{counted(len(result.warned) - 1, 'other file')}: partials.warnings in the manifest)"
            if len(result.warned) > 1 else f"synth: warning: {file}: {first}"
        )
    if result.pruned:
        out.append(f"pruned {len(result.pruned)} stale file{'s' * (len(result.pruned) != 1)} the previous spec made: "
                   + _some(result.pruned))
    left = [name for name in result.stale if name not in result.pruned]
    if left:
        err.append(f"synth: warning: {len(left)} file{'s' * (len(left) != 1)} in {result.output} from the previous spec "
                   f"are no longer produced (--prune deletes them): {_some(left)}")
    if result.interrupted:
        err.append(
            f"synth: interrupted: {result.n_on_disk} of {result.n_jobs} files on disk, each whole and in the "
            "manifest; run the same command again to render the rest"
        )
    elif result.failed:
        err.append(f"synth: {len(result.failed)} of {result.n_jobs} files failed (listed above); the others were written")
    return out, err
