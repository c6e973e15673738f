"""Several data files as one dataset: expand the file list, read each file, stack them.

Every record keeps the file it came from in the by-variable ``_file`` (codes 1..K in file
order, labelled with the file's stem unless a codebook labels ``_file``). Before stacking,
one warning line is given for each thing that differs between files and could change a
result without anyone noticing: a variable missing from a file (its rows there get the
reason ``not_in_file``, counted as nonresponse, never mistaken for a skip), value labels or
declared missing codes that differ, a codebook that covers only some files.
"""

from __future__ import annotations

import glob
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.reasons import Reasons
from wstats.errors import ColumnError, ReadError, WstatsWarning

if TYPE_CHECKING:
    from wstats.decoding.codebook import Codebook

    CodebookArg = Codebook | str | Path | None

__all__ = ["FILE_COLUMN", "NOT_IN_FILE", "PeriodFiles", "expand_paths", "is_several",
           "period_stems", "stack_datasets"]

#: the by-variable every pooled record carries: the file (period) it came from
FILE_COLUMN = "_file"
#: the missing reason of a variable that one of the pooled files does not have
NOT_IN_FILE = "not_in_file"

_GLOB = "*?["
_SHOW = 4  # codes listed in a message


@dataclass(frozen=True)
class PeriodFiles:
    """The files of a pooled dataset (kept in ``Dataset.metadata["pool"]``).

    Attributes
    ----------
    paths : the files, in pooling order (file k has ``_file`` code k + 1).
    stems : each file's name without folder and suffix.
    labels : the label of each period (codebook labels of ``_file``, else the stem).
    rows : rows read from each file.
    """

    @property
    def names(self) -> tuple[str, ...]:
        """The files' names without their folder (with the folder when two names repeat)."""
        names = tuple(Path(p).name for p in self.paths)
        return names if len(set(names)) == len(names) else self.paths

    paths: tuple[str, ...]
    stems: tuple[str, ...]
    labels: tuple[str, ...]
    rows: tuple[int, ...]

    @property
    def n_files(self) -> int:
        """Number of files pooled."""
        return len(self.paths)


def is_several(path: Any) -> bool:
    """Tell whether *path* names several files: a list, a glob or a folder."""
    if isinstance(path, list | tuple):
        return True
    text = str(path)
    return any(c in text for c in _GLOB) or Path(text).is_dir()


def expand_paths(path: str | Path | Sequence[str | Path]) -> list[str]:
    """Return the data files named by a path, a glob, a folder or a list of them, in order.

    A glob or a folder gives its files sorted by name (a folder: the data files inside it,
    at any depth, e.g. a Parquet dataset); a list keeps its order.
    """
    from wstats.readers.dispatch import FORMATS

    items = list(path) if isinstance(path, list | tuple) else [path]
    out: list[str] = []
    for item in items:
        text = str(item)
        if Path(text).is_dir():
            found = sorted(str(p) for p in Path(text).rglob("*")
                           if p.is_file() and p.suffix.lower() in FORMATS)
            what = f"folder {text} holds no data file"
        elif any(c in text for c in _GLOB):
            found = sorted(glob.glob(text))
            what = f"'{text}' matches no file"
        else:
            found, what = [text], ""
        if not found:
            raise ReadError(f"{what}; check the path (quote a glob: 'cycle*.xpt')")
        out.extend(found)
    if len(set(out)) != len(out):
        raise ReadError("a file is named twice among the data files; give each file once")
    return out


def stack_datasets(parts: Sequence[Dataset], paths: Sequence[str],
                   wanted: Sequence[str] | None, file_labels: dict[float, str] | None,
                   codebooks: Sequence[CodebookArg]) -> Dataset:
    """Return the files' datasets as one, with ``_file`` and unified reasons.

    *wanted* are the variables asked for (None: every variable of any file); one that a
    file lacks gets the reason ``not_in_file`` on that file's rows.
    """
    stems = period_stems(paths)
    shown = _distinct([Path(p).name for p in paths], paths)  # messages name the files
    names = list(wanted) if wanted is not None else list(
        dict.fromkeys(n for d in parts for n in d.columns))
    names = [n for n in names if n != FILE_COLUMN]
    vocab = _vocabulary(parts, names)
    _warn_codebooks(codebooks, shown)
    cols = {n: _stack_column(n, parts, shown, vocab, codebooks) for n in names}
    labels = {float(k + 1): s for k, s in enumerate(stems)}
    labels.update(file_labels or {})
    rows = [d.n_rows for d in parts]
    codes = np.repeat(np.arange(1, len(parts) + 1, dtype=np.float64), rows)
    cols[FILE_COLUMN] = DecodedColumn(FILE_COLUMN, codes, np.zeros(len(codes), np.int8), vocab,
                                      "file the record came from", "categorical", labels)
    files = PeriodFiles(tuple(paths), tuple(stems),
                        tuple(labels[float(k + 1)] for k in range(len(parts))), tuple(rows))
    return Dataset(cols, vocab, int(sum(rows)), " + ".join(paths), _metadata(parts, files))


def period_stems(paths: Sequence[str]) -> list[str]:
    """Return each file's period name: its stem, or, when two stems repeat (a partitioned
    folder such as ``year=2021/part-0.parquet``), its path below the folders they share.

    Examples
    --------
    >>> period_stems(["d/year=2020/part-0.parquet", "d/year=2021/part-0.parquet"])
    ['year=2020/part-0', 'year=2021/part-0']
    """
    import os

    stems = [Path(p).stem for p in paths]
    if len(set(stems)) == len(stems):
        return stems
    common = os.path.commonpath([str(Path(p).parent) for p in paths]) if paths else ""
    inner = [Path(p).with_suffix("").relative_to(common).as_posix() if common else
             Path(p).with_suffix("").as_posix() for p in paths]
    return inner if len(set(inner)) == len(inner) else list(paths)


def _distinct(names: list[str], paths: Sequence[str]) -> list[str]:
    """Return *names*, or the full paths when two names repeat."""
    return names if len(set(names)) == len(names) else list(paths)


def _vocabulary(parts: Sequence[Dataset], names: Sequence[str]) -> Reasons:
    """Return the reasons of every file (core first), with not_in_file when a file lacks one."""
    vocab = Reasons()
    for d in parts:
        for extra in d.vocabulary.extra:
            vocab.add(extra)
    if any(n not in d.columns for d in parts for n in names):
        vocab.add(NOT_IN_FILE)
    return vocab


def _metadata(parts: Sequence[Dataset], files: PeriodFiles) -> dict[str, Any]:
    """Return the facts of the pooled dataset (the pool, every file's columns)."""
    return {"format": "pooled", "reader": "wstats", "file_label": None, "pool": files,
            "file_columns": list(dict.fromkeys(c for d in parts
                                               for c in d.metadata.get("file_columns", ()))),
            "codebook": next((d.metadata.get("codebook") for d in parts), None),
            "population": parts[0].metadata.get("population"),
            "described": sorted({n for d in parts for n in d.metadata.get("described", ())})}


def _stack_column(name: str, parts: Sequence[Dataset], stems: Sequence[str], vocab: Reasons,
                  codebooks: Sequence[CodebookArg]) -> DecodedColumn:
    """Return one variable's rows of every file end to end (codes in *vocab*)."""
    have = [d.columns[name] for d in parts if name in d.columns]
    first = have[0]
    text = not first.numeric
    if any(c.numeric == text for c in have):
        kinds = [f"{s}: {'numbers' if name in d.columns and d.columns[name].numeric else 'text'}"
                 for d, s in zip(parts, stems, strict=True) if name in d.columns]
        raise ColumnError(f"variable '{name}' is text in one file and numbers in another "
                          f"({'; '.join(kinds)}); recode it to one type before pooling")
    values: list[np.ndarray] = []
    codes: list[np.ndarray] = []
    absent = vocab.code(NOT_IN_FILE) if NOT_IN_FILE in vocab.names else 0
    lacking: list[str] = []
    for d, stem in zip(parts, stems, strict=True):
        col = d.columns.get(name)
        if col is None:
            lacking.append(stem)
            values.append(np.full(d.n_rows, "" if text else np.nan,
                                  dtype=object if text else np.float64))
            codes.append(np.full(d.n_rows, absent, dtype=np.int8))
            continue
        remap = np.array([vocab.code(r) for r in col.vocabulary.names], dtype=np.int8)
        values.append(col.values)
        codes.append(remap[col.missing_codes])
    if lacking:
        warnings.warn(f"variable '{name}' is not in {', '.join(lacking)}; its rows there get "
                      f"the reason {NOT_IN_FILE}", WstatsWarning, stacklevel=3)
    _warn_labels(name, parts, stems)
    _warn_missing_codes(name, codebooks, stems)
    return DecodedColumn.of_codes(name, np.concatenate(values), np.concatenate(codes), vocab,
                                  first.label, first.kind, _merged_labels(have), None)


def _merged_labels(cols: Sequence[DecodedColumn]) -> dict[float, str]:
    """Return the value labels of every file, the first file's wording winning."""
    out: dict[float, str] = {}
    for col in reversed(cols):
        out.update(col.value_labels)
    return out


def _warn_labels(name: str, parts: Sequence[Dataset], stems: Sequence[str]) -> None:
    """Warn (once per variable) when value labels differ between two files."""
    seen = [(s, d.columns[name].value_labels) for d, s in zip(parts, stems, strict=True)
            if name in d.columns]
    base_stem, base = seen[0]
    for stem, labels in seen[1:]:
        differ = sorted(k for k in set(base) | set(labels) if base.get(k) != labels.get(k))
        if differ:
            shown = ", ".join(f"{k:g}" for k in differ[:_SHOW])
            warnings.warn(f"variable '{name}': value labels of codes {shown} differ between "
                          f"{base_stem} and {stem}; the labels of {base_stem} are shown",
                          WstatsWarning, stacklevel=4)
            return


def _warn_missing_codes(name: str, codebooks: Sequence[CodebookArg],
                        stems: Sequence[str]) -> None:
    """Warn when per-file codebooks declare different missing codes for *name*."""
    from wstats.decoding.codebook import Codebook

    declared = [(s, _declared(cb, name)) for cb, s in zip(codebooks, stems, strict=True)
                if isinstance(cb, Codebook)]
    if len(declared) < 2:
        return
    base_stem, base = declared[0]
    for stem, codes in declared[1:]:
        if codes != base:
            warnings.warn(
                f"variable '{name}': declared missing codes differ between {base_stem} "
                f"({_codes_text(base)}) and {stem} ({_codes_text(codes)}); each file is "
                "decoded with its own codes", WstatsWarning, stacklevel=4)
            return


def _declared(cb: Codebook, name: str) -> dict[str, str]:
    """Return code -> reason the codebook declares for *name* (substitutes excluded)."""
    codes = cb.codes_for(name, None)
    out: dict[str, str] = {}
    for kind in ("numeric", "tags", "text"):
        for code, rule in getattr(codes, kind).items():
            out[f"{code:g}" if isinstance(code, float) else str(code)] = rule.describe()
    return out


def _codes_text(codes: dict[str, str]) -> str:
    """Return up to a few declared codes as text."""
    if not codes:
        return "none"
    keys = sorted(codes)
    more = f" and {len(keys) - _SHOW} more" if len(keys) > _SHOW else ""
    return ", ".join(f"{k} {codes[k]}" for k in keys[:_SHOW]) + more


def _warn_codebooks(codebooks: Sequence[CodebookArg], stems: Sequence[str]) -> None:
    """Warn when a codebook was given for some files only."""
    given = [s for cb, s in zip(codebooks, stems, strict=True) if cb is not None]
    if given and len(given) < len(stems):
        without = [s for s in stems if s not in given]
        warnings.warn(f"a codebook applies to {', '.join(given)} but not to "
                      f"{', '.join(without)}; their codes are read as the files declare them",
                      WstatsWarning, stacklevel=3)
