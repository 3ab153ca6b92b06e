"""A study: every treatment times ``runs`` seeds of one configuration, run side by side.

The runs of a study share one executor (a :class:`~neurodrome.executors.LocalPool` kept
warm for the whole study, or a Dask cluster). Each run steps in a thread of this process,
at most ``side_by_side`` runs at once (default: all of them), and each thread calls
:meth:`~neurodrome.evolve.run.Run.step` with the shared executor. The chunks of different
runs' generations therefore queue together on the workers: while one run's generation
waits for its slowest chunk, the idle workers take chunks of the other runs. Breeding,
bookkeeping and files stay in this process; every run has its own generator, population
and directory, and an evaluation's results do not depend on the chunking or the executor,
so each run is bit-identical to the same run done alone (``eval_seconds`` aside).
Without worker processes (``workers=1``, no scheduler) the runs go one after another in
the calling thread, since evaluating in threads of one process would gain nothing.

Progress: threads put each finished generation on a queue; the calling thread passes them
to ``progress`` as :class:`GenerationDone`, in order of completion, so the callback always
runs in the calling thread.

Stopping: any exception in the calling thread (Ctrl-C, SIGTERM turned into
``KeyboardInterrupt`` by the command, or raised by ``progress``) stops the study. No run
starts another generation, the workers' chunks are dropped, a generation whose evaluation
had already come back is still written, and then the exception propagates. Every finished
generation is on disk with its checkpoint, and ``resume=True`` continues every unfinished
run from there, bit-identically.
"""

from __future__ import annotations

import collections
import queue
import threading
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from ..errors import ConfigError, Problem
from ..executors import LocalPool
from ..world import load_world
from .config import EvolveConfig
from .rundir import LOG_NAME
from .run import Run, RunSummary, run_dirs


@dataclass(frozen=True)
class GenerationDone:
    """One finished generation of one run of a study (what ``progress`` receives)."""

    name: str  #: ``<treatment>-<seed>``, the run's directory name in a study
    run_dir: Path
    treatment: str
    seed: int
    generation: int  #: 0-based, as in ``log.jsonl``
    generations: int
    best: float
    median: float
    best_so_far: float
    eval_seconds: float
    runs_done: int  #: runs of the study finished so far, this one included if it just did
    runs: int


#: progress(event), called in the thread that runs the study
StudyProgress = Callable[[GenerationDone], None]


class _Stopped(Exception):
    """Raised in a run's thread when it asks the stopped study's pool for work."""


class _StudyPool(LocalPool):
    """The study's local pool. Once halted it takes no more chunks: a thread that lost
    chunks to the halt must not start a fresh pool to send them again."""

    def __init__(self, workers: int | None) -> None:
        super().__init__(workers)
        self.stopped = False

    def executor(self) -> Any:
        with self._lock:
            if self.stopped:
                raise _Stopped("the study has stopped")
            return super().executor()

    def halt(self) -> None:
        """Drop the queued chunks and end the running ones now (their generations are
        abandoned; the last whole generation of every run is on disk already)."""
        with self._lock:
            self.stopped = True
            pool, self._pool = self._pool, None
        if pool is None:
            return
        pool.shutdown(wait=False, cancel_futures=True)
        try:  # a running chunk would otherwise finish first, which may take a generation's time
            for proc in list((getattr(pool, "_processes", None) or {}).values()):
                proc.terminate()
        except Exception:  # pragma: no cover - the pool is already going away
            pass
        pool.shutdown(wait=True)


def _name(run: Any) -> str:
    return run.name


def _picklable(exc: BaseException) -> BaseException:
    import pickle

    try:
        pickle.loads(pickle.dumps(exc))
        return exc
    except Exception:
        return RuntimeError(f"{type(exc).__name__}: {exc}")


def _whole_runs(tasks: Any, events: Any) -> None:
    """A worker process of a study that spreads whole runs: take a run, evolve it to its
    end in this process (evaluation in-process too), report every generation."""
    while True:
        item = tasks.get()
        if item is None:
            return
        index, unit = item
        try:
            unit.start(True)  # the checkpoint if there is one, else generation 0, as prepared
            started = time.perf_counter()
            while not unit.done:
                rec = unit.step(None)
                events.put(("generation", index, (rec, unit.done), time.perf_counter() - started))
            events.put(("finished", index, (unit.generation, unit.best_so_far, unit.champion_generation),
                        time.perf_counter() - started))
        except BaseException as exc:
            events.put(("error", index, _picklable(exc), 0.0))
            return


class Study:
    """The runs of a study, their shared executor and how many step at once.

    :meth:`prepare` starts (or, with ``resume``, restores) every run, so a bad run
    directory or a changed configuration is reported before any evaluation; :meth:`run`
    steps them and returns a :class:`RunSummary` per run, in plan order.
    """

    def __init__(self, world_path: str | Path, config: EvolveConfig, out_dir: str | Path, *, workers: int = 1,
                 scheduler: str | None = None, resume: bool = False, side_by_side: int | None = None,
                 spread: str = "generations") -> None:
        world = load_world(world_path)
        runs = [Run(world_path, config, d, t, s, world=world) for t, s, d in run_dirs(out_dir, config)]
        self._setup(runs, config, workers=workers, scheduler=scheduler, resume=resume, side_by_side=side_by_side,
                    spread=spread)
        self.world_path = str(world_path)

    @classmethod
    def from_file(cls, study: Any, out_dir: str | Path, *, workers: int = 1, scheduler: str | None = None,
                  resume: bool = False, side_by_side: int | None = None, spread: str = "runs") -> Study:
        """The runs of a study file (:class:`~neurodrome.evolve.studyfile.LoadedStudy`):
        ``OUT_DIR/<arm>-<seed>/`` for run ``r`` of each arm, seed = the study's seed + r
        (a curriculum arm: its first stage's seed + r)."""
        from .curriculum import StagedRun

        out = Path(out_dir)
        spec = study.spec
        runs: list[Any] = []
        worlds: dict[str, Any] = {}
        for arm in spec.arms:
            extra = {"arm": arm.name, "study": study.name}
            for r in range(spec.runs):
                if arm.stages:
                    plan = study.stages[arm.name]
                    runs.append(StagedRun(plan, out / f"{arm.name}-{plan[0][1] + r}", arm.network, r,
                                          budget_generations=spec.budget.generations,
                                          budget_evaluations=spec.budget.evaluations,
                                          name=f"{arm.name}-{plan[0][1] + r}", header_extra=extra))
                    continue
                config = study.configs[arm.name]
                world = worlds.setdefault(study.world, load_world(study.world))
                seed = spec.seed + r
                runs.append(Run(study.world, config, out / f"{arm.name}-{seed}", arm.network, seed, world=world,
                                name=f"{arm.name}-{seed}", header_extra=extra))
        self = cls.__new__(cls)
        self._setup(runs, None, workers=workers, scheduler=scheduler, resume=resume, side_by_side=side_by_side,
                    spread=spread)
        self.world_path = study.world
        return self

    def _setup(self, runs: list[Any], config: EvolveConfig | None, *, workers: int, scheduler: str | None,
               resume: bool, side_by_side: int | None, spread: str) -> None:
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
            raise ConfigError(Problem("--workers", "0 (all cores) or a whole number of worker processes >= 1",
                                      repr(workers)))
        if side_by_side is not None and (isinstance(side_by_side, bool) or not isinstance(side_by_side, int)
                                         or side_by_side < 0):
            raise ConfigError(Problem("--side-by-side", "0 (all runs) or a whole number of runs >= 1",
                                      repr(side_by_side)))
        if spread not in ("generations", "runs"):
            raise ConfigError(Problem("--spread", "'generations' or 'runs'", repr(spread)))
        self.config = config
        self.workers = workers
        self.scheduler = scheduler
        self.resume = resume
        self.runs = runs
        #: what the local workers take: chunks of every run's generations, or whole runs
        #: (each evolved in one worker process; with Dask always chunks)
        self.spread = "runs" if spread == "runs" and scheduler is None and workers != 1 and len(runs) > 1 \
            else "generations"
        remote = scheduler is not None or workers != 1
        #: how many runs step at once: all by default, one when evaluating in this process
        self.at_once = max(1, min(len(self.runs), side_by_side or len(self.runs))) if remote else 1
        self._prepared = False

    # -- set up ---------------------------------------------------------------------------
    def prepare(self) -> None:
        """Start or restore every run (writes each run's header and empty log when new)."""
        if self._prepared:
            return
        if not self.resume:
            for r in self.runs:
                if (r.run_dir / LOG_NAME).is_file():
                    raise ConfigError(Problem(str(r.run_dir), "an empty or new run directory (or --resume)",
                                              f"a run is already there ({LOG_NAME})"))
        for r in self.runs:
            r.start(self.resume)
        self._prepared = True

    def finished(self, run: Any) -> bool:
        return run.done

    @property
    def runs_done(self) -> int:
        return sum(self.finished(r) for r in self.runs)

    def _executor(self) -> Any:
        if self.scheduler is not None:
            from ..executors import DaskExecutor

            try:
                return DaskExecutor(self.scheduler)
            except (OSError, TimeoutError, ValueError) as exc:
                raise ConfigError(Problem("--scheduler", "the address of a running Dask scheduler (tcp://host:8786)",
                                          f"{self.scheduler!r}: {exc}")) from None
        if self.workers != 1:
            return _StudyPool(self.workers or None)
        return None

    @staticmethod
    def _halt(executor: Any) -> None:
        if isinstance(executor, _StudyPool):
            executor.halt()
        elif executor is not None:
            executor.shutdown(wait=False, cancel_futures=True)

    @staticmethod
    def _close(executor: Any) -> None:
        if isinstance(executor, LocalPool):
            executor.close()
        elif executor is not None:
            executor.shutdown()

    # -- run --------------------------------------------------------------------------------
    def run(self, progress: StudyProgress | None = None) -> list[RunSummary]:
        """Step every unfinished run to ``config.generations``; see the module docstring."""
        self.prepare()
        seconds = {id(r): 0.0 for r in self.runs}
        done = [self.runs_done]

        def report(run: Run, rec: dict[str, Any]) -> None:
            if self.finished(run):
                done[0] += 1
            if progress:
                progress(GenerationDone(
                    name=_name(run), run_dir=run.run_dir, treatment=run.treatment, seed=run.seed,
                    generation=rec["generation"], generations=run.config.generations, best=rec["best"],
                    median=rec["median"], best_so_far=rec["best_so_far"], eval_seconds=rec["eval_seconds"],
                    runs_done=done[0], runs=len(self.runs)))

        todo = [r for r in self.runs if not self.finished(r)]
        if self.spread == "runs" and todo:
            return self._whole_runs(todo, report, seconds)
        executor = self._executor() if todo else None
        try:
            if self.at_once == 1:
                for r in todo:
                    started = time.perf_counter()
                    while not self.finished(r):
                        rec = r.step(executor)
                        seconds[id(r)] = time.perf_counter() - started
                        report(r, rec)
            else:
                self._side_by_side(todo, executor, report, seconds)
        except BaseException:
            self._halt(executor)
            raise
        finally:
            self._close(executor)
        return [RunSummary(r.run_dir, r.treatment, r.seed, r.generation, r.best_so_far,
                           r.champion_generation, seconds[id(r)]) for r in self.runs]

    def _whole_runs(self, todo: list[Any], report: Callable[[Any, dict[str, Any]], None],
                    seconds: dict[int, float]) -> list[RunSummary]:
        """Spread whole runs over worker processes (see :func:`_whole_runs`)."""
        import multiprocessing as mp

        from ..executors import default_workers

        ctx = mp.get_context("spawn")
        tasks, events = ctx.Queue(), ctx.Queue()
        count = min(len(todo), self.workers or default_workers())
        for index, unit in enumerate(todo):
            tasks.put((index, unit))
        for _ in range(count):
            tasks.put(None)
        procs = [ctx.Process(target=_whole_runs, args=(tasks, events), name=f"neurodrome-run-{k}", daemon=True)
                 for k in range(count)]
        final: dict[int, tuple[int, float, int]] = {}
        try:
            for p in procs:
                p.start()
            while len(final) < len(todo):
                try:
                    kind, index, payload, elapsed = events.get(timeout=1.0)
                except queue.Empty:
                    dead = [p for p in procs if p.exitcode not in (None, 0)]
                    if dead:
                        raise ConfigError(Problem("study worker", "worker processes that keep running",
                                                  f"{dead[0].name} stopped with exit code {dead[0].exitcode} "
                                                  "(out of memory?); --resume continues from the last "
                                                  "whole generation of every run"))
                    continue
                unit = todo[index]
                seconds[id(unit)] = elapsed
                if kind == "error":
                    raise payload
                if kind == "finished":
                    final[index] = payload
                    continue
                # the unit in this process is not the one stepping: mirror what a report reads
                rec, finished = payload
                report(_Mirror(unit, finished), rec)
        except BaseException:
            for p in procs:
                if p.is_alive():
                    p.terminate()
            for p in procs:
                p.join()
            raise
        for p in procs:
            p.join()
        out = []
        for r in self.runs:
            if r in todo:
                generation, best, champion = final[todo.index(r)]
                out.append(RunSummary(r.run_dir, r.treatment, r.seed, generation, best, champion, seconds[id(r)]))
            else:
                out.append(RunSummary(r.run_dir, r.treatment, r.seed, r.generation, r.best_so_far,
                                      r.champion_generation, seconds[id(r)]))
        return out

    def _side_by_side(self, todo: list[Run], executor: Any, report: Callable[[Run, dict[str, Any]], None],
                      seconds: dict[int, float]) -> None:
        waiting = collections.deque(todo)
        lock = threading.Lock()
        stop = threading.Event()
        events: queue.Queue = queue.Queue()

        def work() -> None:
            try:
                while not stop.is_set():
                    with lock:
                        if not waiting:
                            return
                        run = waiting.popleft()
                    started = time.perf_counter()
                    while not self.finished(run) and not stop.is_set():
                        rec = run.step(executor)
                        seconds[id(run)] = time.perf_counter() - started
                        events.put(("generation", run, rec))
            except BaseException as exc:  # handed to the calling thread, which stops the study
                events.put(("error", None, exc))
            finally:
                events.put(("exit", None, None))

        threads = [threading.Thread(target=work, name=f"neurodrome-run-{k}", daemon=True)
                   for k in range(min(self.at_once, len(todo)))]
        for t in threads:
            t.start()
        running = len(threads)
        try:
            while running:
                kind, run, payload = events.get()
                if kind == "exit":
                    running -= 1
                elif kind == "error":
                    raise payload
                else:
                    report(run, payload)
        except BaseException:
            # no run starts another generation; halting the executor ends the chunks in
            # flight, so every thread returns soon; a thread whose evaluation had come back
            # still writes that generation before it returns
            stop.set()
            self._halt(executor)
            for t in threads:
                t.join()
            raise


class _Mirror:
    """What :meth:`Study.run`'s report reads of a run that steps in another process."""

    def __init__(self, unit: Any, finished: bool) -> None:
        self.name, self.run_dir, self.treatment, self.seed = unit.name, unit.run_dir, unit.treatment, unit.seed
        self.config = unit.config
        self.done = finished

    def __getattr__(self, name: str) -> Any:  # pragma: no cover - only the fields above are read
        raise AttributeError(name)


def evolve(world_path: str | Path, config: EvolveConfig, out_dir: str | Path, *, workers: int = 1,
           scheduler: str | None = None, resume: bool = False, progress: StudyProgress | None = None,
           side_by_side: int | None = None) -> list[RunSummary]:
    """Run every treatment ``config.runs`` times side by side on one executor: a local pool
    of ``workers`` processes (kept warm for the whole study) or a Dask ``scheduler``; at
    most ``side_by_side`` runs step at once (default all; 1: one after another)."""
    return Study(world_path, config, out_dir, workers=workers, scheduler=scheduler, resume=resume,
                 side_by_side=side_by_side).run(progress)
