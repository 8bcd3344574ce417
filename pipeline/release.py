"""Atomic publication of a release, with the standard library alone.

A run builds its whole release in a fresh folder beside the current one
(``OUT/.build-<run>-<pid>``, :func:`build_dir`). :func:`publish` renames that folder,
complete, to ``OUT/.releases/<run>-<pid>`` and then switches the symbolic link
``OUT/.current`` to it with one ``os.replace`` — an atomic rename (POSIX ``rename(2)``) — so
the release items ``OUT/thermo.duckdb``, ``OUT/parquet`` and ``OUT/report`` (themselves fixed
links into ``.current``) change all together, from the complete old release to the complete
new one. A run killed before the switch leaves the previous release untouched; its stale
build folder is removed by the next run (:func:`remove_stale_builds`). Where symbolic links
are unavailable, each item is renamed into place on its own (each item still either wholly
old or wholly new).

Kept apart from ``curate.py`` (which writes the tables, with pandas) so that an unchanged
re-run, which copies the current release, publishes without importing pandas.
"""
from __future__ import annotations

import os
import shutil
from pathlib import Path

RELEASE_ITEMS = ("thermo.duckdb", "parquet", "report")
BUILD_PREFIX = ".build-"


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_builds(out: Path) -> None:
    """Remove what runs that died before publishing left behind (their pid is gone): build
    folders and the temporary links of an interrupted switch."""
    for d in [*out.glob(BUILD_PREFIX + "*"), *out.glob(".current-*"), *out.glob(".*.link-*")]:
        try:
            pid = int(d.name.rsplit("-", 1)[1])
        except (IndexError, ValueError):
            continue
        if pid == os.getpid() or _pid_alive(pid):
            continue
        if d.is_symlink() or d.is_file():
            d.unlink()
        else:
            shutil.rmtree(d, ignore_errors=True)


def build_dir(run) -> Path:
    d = run.out / f"{BUILD_PREFIX}{run.run_id}-{os.getpid()}"
    if d.exists():
        shutil.rmtree(d)
    d.mkdir(parents=True)
    return d


def publish(run) -> None:
    """Swap the complete build folder in as the release, atomically (module docstring)."""
    bdir: Path = run.extra["build_dir"]
    out: Path = run.out
    name = bdir.name[len(BUILD_PREFIX):]
    releases = out / ".releases"
    releases.mkdir(exist_ok=True)
    final = releases / name
    os.replace(bdir, final)
    _fsync_dir(releases)
    try:
        tmp = out / f".current-{name}"
        if tmp.is_symlink() or tmp.exists():
            tmp.unlink()
        os.symlink(os.path.join(".releases", name), tmp)
    except (OSError, NotImplementedError):
        _publish_by_item(final, out, name)
        return
    os.replace(tmp, out / ".current")  # the atomic switch
    _fsync_dir(out)
    for item in RELEASE_ITEMS:
        link, target = out / item, os.path.join(".current", item)
        if link.is_symlink() and os.readlink(link) == target:
            continue
        tmp = out / f".{item}.link-{name}"
        os.symlink(target, tmp)
        if link.exists() and not link.is_symlink():  # a release in the older, plain layout
            aside = out / f".old-{name}-{item}"
            os.replace(link, aside)
            os.replace(tmp, link)
            if aside.is_dir():
                shutil.rmtree(aside, ignore_errors=True)
            else:
                aside.unlink()
        else:
            os.replace(tmp, link)
    _prune_releases(releases, keep={name})


def _prune_releases(releases: Path, keep: set[str]) -> None:
    """Remove old releases, keeping the current and the one before it (a reader that
    resolved the old link an instant before the switch can still open it)."""
    dirs = sorted((p for p in releases.iterdir() if p.is_dir()), key=lambda p: p.stat().st_mtime)
    survivors = {p.name for p in dirs[-2:]} | keep
    for p in dirs:
        if p.name not in survivors:
            shutil.rmtree(p, ignore_errors=True)


def _publish_by_item(final: Path, out: Path, name: str) -> None:
    """Fallback without symbolic links: rename each item in (each wholly old or new)."""
    old = out / f".old-{name}"
    old.mkdir()
    for item in RELEASE_ITEMS:
        new, cur = final / item, out / item
        if not new.exists():
            continue
        if cur.exists():
            os.replace(cur, old / item)
        os.replace(new, cur)
    shutil.rmtree(old, ignore_errors=True)
    shutil.rmtree(final, ignore_errors=True)


def _fsync_dir(path: Path) -> None:
    """Make a rename durable (POSIX: fsync the directory)."""
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
