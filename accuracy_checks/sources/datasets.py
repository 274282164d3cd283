"""Datasets and URLs: a folder or prefix of Parquet (or CSV) files, local or on object storage,
and one remote file, read through pyarrow's filesystems.

A place is read here when it is a :class:`~accuracy_checks.config.Url` (``s3://``, ``gs://``,
``az://``/``abfs://``, ``memory://``, ``https://``) or a local folder holding Hive-style
``name=value`` folders (:func:`is_dataset`); a plain local file or flat folder stays with
:mod:`accuracy_checks.sources.files`.

**Partitions are columns.** ``issued_on=2026-11-30/part-0.parquet`` gives every row of that
file the column ``issued_on`` with the text ``2026-11-30``; partition values are always read as
text and go through the same converters as file columns
(:func:`~accuracy_checks.sources.columns.convert`: keys as text, dates with their one format).

**Filters go into the read.** A filter on a partition column (the span's periods, the issue
dates a run can use) chooses the files from their paths alone, so a file outside the span is
never opened — not even its footer; a filter on a data column is pushed into the Parquet scan
(row groups skipped by their statistics). The rows read are filtered again after conversion by
the callers, so the result never depends on the push-down.

**Filesystems.** ``s3://`` uses pyarrow's S3 filesystem (credentials, region and endpoint from
the AWS SDK's usual chain: ``AWS_ACCESS_KEY_ID``, ``AWS_SECRET_ACCESS_KEY``,
``AWS_DEFAULT_REGION``, ``AWS_ENDPOINT_URL``, profiles, instance roles), with connect and
request timeouts (:data:`CONNECT_TIMEOUT_S`, :data:`REQUEST_TIMEOUT_S`); ``gs://`` pyarrow's
GCS filesystem; ``abfs://``/``az://`` pyarrow's Azure filesystem; ``memory://`` fsspec's memory
filesystem (extra ``cloud``); ``https://`` one file, fetched with a timeout. ``${NAME}`` in a
URL is replaced from the environment when it is read; messages show the URL with its secrets
masked.

**Errors** (:class:`~accuracy_checks.errors.InputError`, exit 2): a store that cannot be
reached within the timeouts, a missing object, a prefix with no data files, a missing column,
a damaged file in the span; an unknown scheme is refused when the config is read.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import weakref
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeGuard
from urllib.parse import unquote, urlsplit

import pandas as pd

from accuracy_checks.config import Url
from accuracy_checks.config.urls import expand_env, mask_secrets
from accuracy_checks.errors import InputError
from accuracy_checks.sources.columns import Column, convert, no_rows, refuse_missing
from accuracy_checks.sources.dataset_filters import DateFilter, PairFilter, choose, row_expression

__all__ = ["CONNECT_TIMEOUT_S", "NA_TEXT", "REQUEST_TIMEOUT_S", "Dataset", "DateFilter",
           "PairFilter", "dataset_columns", "dataset_format", "is_dataset", "open_dataset",
           "read_dataset_columns", "url_filesystem", "why_masked"]

#: seconds to reach an object store before the run gives up (exit 2)
CONNECT_TIMEOUT_S = 5
#: seconds an object store may stay silent within one request (two attempts at most: a store
#: that accepts connections but never answers is given up after about twice this)
REQUEST_TIMEOUT_S = 10
_PARQUET = (".parquet", ".pq")
_CSV = (".csv", ".csv.gz", ".txt")
#: cells read as missing in number and date columns of CSV datasets (the files' words)
NA_TEXT = ["", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
           "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"]


@dataclass
class Dataset:
    """The data files at a place, their format and their partition values (no file opened)."""

    shown: str  # how messages name it (secrets masked)
    filesystem: Any  # a pyarrow.fs.FileSystem
    root: str
    files: list[str]
    kind: str  # "parquet" | "csv"
    partitions: dict[str, list[str]] = field(default_factory=dict)  # column → value per file
    _tmp: Any = None  # removes a downloaded https:// file's folder (at the latest with the
    #                   dataset; read_dataset_columns calls it when done)


def is_dataset(place: object) -> TypeGuard[Url | Path]:
    """Whether ``place`` is read here: a URL, or a local folder with ``name=value`` folders."""
    if isinstance(place, Url):
        return True
    return isinstance(place, Path) and place.is_dir() and any(
        p.is_dir() and "=" in p.name for p in place.iterdir())


def why_masked(exc: BaseException) -> str:
    """The reader's words for ``exc`` on one line, any secret masked."""
    return mask_secrets(" ".join(str(exc).split()))


def url_filesystem(url: Url, key: str) -> tuple[Any, str, Any]:
    """``(pyarrow filesystem, path in it, temporary folder or None)`` of a URL."""
    import pyarrow.fs as pafs

    text = expand_env(url.url, key)
    parts = urlsplit(text)
    scheme = url.scheme
    path = (parts.netloc.rpartition("@")[2] + parts.path).rstrip("/")
    if scheme == "s3":
        options: dict[str, Any] = {
            "connect_timeout": CONNECT_TIMEOUT_S, "request_timeout": REQUEST_TIMEOUT_S,
            "retry_strategy": pafs.AwsStandardS3RetryStrategy(max_attempts=2)}
        if parts.password:
            options.update(access_key=unquote(parts.username or ""),
                           secret_key=unquote(parts.password))
        return pafs.S3FileSystem(**options, **s3_environment()), path, None
    if scheme in ("gs", "gcs"):
        import datetime as dt

        return (pafs.GcsFileSystem(retry_time_limit=dt.timedelta(seconds=REQUEST_TIMEOUT_S)),
                path, None)
    if scheme in ("abfs", "abfss", "az"):
        if scheme == "az" or "@" not in parts.netloc:
            account = os.environ.get("AZURE_STORAGE_ACCOUNT_NAME")
            if not account:
                raise InputError(
                    f"The URL {url} (config key `{key}`) names no storage account: give "
                    "abfs://container@account.dfs.core.windows.net/path or set "
                    "AZURE_STORAGE_ACCOUNT_NAME."
                )
            return pafs.AzureFileSystem(account_name=account), path, None
        fs, inner = pafs.FileSystem.from_uri(text)
        return fs, inner.rstrip("/"), None
    if scheme == "memory":
        try:
            import fsspec
        except ModuleNotFoundError:
            raise InputError(
                f"The URL {url} (config key `{key}`) needs fsspec: "
                "pip install \"accuracy-checks[cloud]\"."
            ) from None
        memory = fsspec.filesystem("memory")
        inner = memory._strip_protocol(text).rstrip("/")
        return pafs.PyFileSystem(pafs.FSSpecHandler(memory)), inner, None
    if scheme in ("http", "https"):
        return _download(text, url, key)
    raise InputError(f"The URL {url} (config key `{key}`) has a scheme this tool cannot read.")


def s3_environment() -> dict[str, Any]:
    """pyarrow S3 options from the standard variables its SDK does not read itself: the
    region (``AWS_REGION``/``AWS_DEFAULT_REGION``) and the endpoint of an S3-compatible
    store (``AWS_ENDPOINT_URL_S3`` or ``AWS_ENDPOINT_URL``)."""
    options: dict[str, Any] = {}
    region = os.environ.get("AWS_REGION") or os.environ.get("AWS_DEFAULT_REGION")
    if region:
        options["region"] = region
    endpoint = os.environ.get("AWS_ENDPOINT_URL_S3") or os.environ.get("AWS_ENDPOINT_URL")
    if endpoint:
        parts = urlsplit(endpoint if "://" in endpoint else f"https://{endpoint}")
        options["endpoint_override"] = parts.netloc + parts.path.rstrip("/")
        options["scheme"] = parts.scheme
    return options


def _download(text: str, url: Url, key: str) -> tuple[Any, str, Any]:
    """One file over HTTP(S), fetched into a temporary folder (removed with the dataset)."""
    import urllib.error
    import urllib.request

    import pyarrow.fs as pafs

    tmp = tempfile.mkdtemp(prefix="accuracy-checks-")
    target = Path(tmp) / (url.name or "download")
    try:
        with urllib.request.urlopen(text, timeout=REQUEST_TIMEOUT_S) as response, \
                open(target, "wb") as out:
            while chunk := response.read(1 << 20):
                out.write(chunk)
    except (urllib.error.URLError, OSError, ValueError) as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise InputError(
            f"Cannot read {url} (config key `{key}`): {why_masked(exc)}. Check the address and "
            f"that the server answers within {REQUEST_TIMEOUT_S} s."
        ) from None
    return pafs.LocalFileSystem(), str(target), tmp


def _is_data(name: str) -> str | None:
    low = name.lower()
    if low.startswith((".", "_")):
        return None
    if low.endswith(_PARQUET):
        return "parquet"
    if low.endswith(_CSV):
        return "csv"
    return None


def open_dataset(place: Url | Path, role: str, key: str) -> Dataset:
    """The data files at ``place`` (a file, or every Parquet/CSV file below a folder or
    prefix, Hive partition values parsed from their paths). Lists, never opens a file."""
    import pyarrow.fs as pafs

    shown = str(place)
    if isinstance(place, Url):
        fs, root, tmp = url_filesystem(place, key)
    else:
        fs, root, tmp = pafs.LocalFileSystem(), str(place), None
    try:
        info = fs.get_file_info(root)
        if info.type == pafs.FileType.File:
            found = [(root, _is_data(Path(root).name) or
                      ("csv" if Path(root).suffix.lower() in (".tsv",) else "parquet"))]
            base = root.rpartition("/")[0]
        elif info.type == pafs.FileType.Directory:
            listed = fs.get_file_info(pafs.FileSelector(root, recursive=True))
            found = []
            for f in listed:
                rel = f.path[len(root):].lstrip("/")
                if f.type != pafs.FileType.File or any(
                        p.startswith((".", "_")) for p in rel.split("/")[:-1]):
                    continue
                kind = _is_data(f.base_name)
                if kind:
                    found.append((f.path, kind))
            base = root
        else:
            raise InputError(
                f"The {role} {shown} (config key `{key}`) does not exist: no object or prefix "
                "by that name. Check the bucket and the path."
            )
    except InputError:
        raise
    except (OSError, ValueError) as exc:
        raise InputError(
            f"Cannot reach the {role} {shown} (config key `{key}`): {why_masked(exc)}. Check the "
            "bucket, the endpoint (AWS_ENDPOINT_URL for S3-compatible stores) and the "
            f"credentials (connect timeout {CONNECT_TIMEOUT_S} s, request timeout "
            f"{REQUEST_TIMEOUT_S} s)."
        ) from None
    if not found:
        raise InputError(
            f"The {role} {shown} (config key `{key}`) holds no .csv or .parquet files."
        )
    kinds = {k for _, k in found}
    if len(kinds) > 1:
        raise InputError(
            f"The {role} {shown} (config key `{key}`) mixes CSV and Parquet files; keep one "
            "format per dataset."
        )
    files = sorted(p for p, _ in found)
    partitions: dict[str, list[str]] = {}
    for i, f in enumerate(files):
        for part in f[len(base):].lstrip("/").split("/")[:-1]:
            name, eq, value = part.partition("=")
            if eq:
                partitions.setdefault(name, [""] * len(files))[i] = unquote(value)
    data = Dataset(shown, fs, base, files, kinds.pop(), partitions)
    if tmp is not None:
        data._tmp = weakref.finalize(data, shutil.rmtree, tmp, ignore_errors=True)
    return data


def dataset_columns(data: Dataset, role: str, key: str, file: str | None = None) -> list[str]:
    """The column names of the dataset: those of ``file`` (default: the newest file), then
    its partition columns."""
    schema = _schema(data, file or data.files[-1], role, key)
    return [*schema.names, *(p for p in data.partitions if p not in schema.names)]


def _schema(data: Dataset, file: str, role: str, key: str) -> Any:
    import pyarrow.dataset as pds

    try:
        return pds.dataset(file, filesystem=data.filesystem, format=dataset_format(data, [])).schema
    except (OSError, ValueError) as exc:
        raise InputError(
            f"The {role} file {_shown_file(data, file)} (config key `{key}`) cannot be read as "
            f"{'Parquet' if data.kind == 'parquet' else 'CSV'}: {why_masked(exc)}"
        ) from None


def _shown_file(data: Dataset, file: str) -> str:
    if data._tmp is not None:
        return data.shown
    rel = file[len(data.root):].lstrip("/")
    return f"{data.shown.rstrip('/')}/{rel}" if rel else data.shown


def dataset_format(data: Dataset, text_columns: Sequence[str]) -> Any:
    """The file format: ``text_columns`` read as text (CSV) or as dictionaries (Parquet, when
    the files store them as text)."""
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.dataset as pds

    if data.kind == "parquet":
        # text columns dictionary-encoded as Parquet stores them (categoricals in pandas:
        # each distinct value converted once, no string object per row)
        return pds.ParquetFileFormat(read_options=pds.ParquetReadOptions(
            dictionary_columns=list(text_columns)))
    return pds.CsvFileFormat(convert_options=pcsv.ConvertOptions(
        column_types={n: pa.string() for n in text_columns}, strings_can_be_null=True,
        null_values=[""], quoted_strings_can_be_null=True))


def _is_number(kind: Any) -> bool:
    """Whether a column of Arrow type ``kind`` holds a value exactly where it is neither null
    nor NaN (floats and integers: what the number converter keeps)."""
    import pyarrow as pa

    return bool(pa.types.is_floating(kind) or pa.types.is_integer(kind))


def _any_row(dataset: Any, fragment: Any, column: str, cond: Any) -> bool:
    """Whether a row of ``fragment`` passes ``cond``: its batches of ``column`` scanned in
    order until one does (no read ahead: a file whose first rows pass is barely read)."""
    import pyarrow.dataset as pds

    scanner = pds.Scanner.from_fragment(fragment, schema=dataset.schema, columns=[column],
                                        filter=cond, batch_readahead=0,
                                        fragment_readahead=0, use_threads=False)
    return any(batch.num_rows > 0 for batch in scanner.to_batches())


def _distinct(dataset: Any, names: list[str], present: str | None, expression: Any) -> Any:
    """The distinct rows of columns ``names`` (over the rows where column ``present`` holds a
    number that is not NaN), grouped while the files are scanned: never every row in memory."""
    import pyarrow as pa
    import pyarrow.acero as ac
    import pyarrow.compute as pc
    import pyarrow.dataset as pds

    cond = expression
    if present is not None:
        valid = ~pc.field(present).is_null(nan_is_null=True)
        cond = valid if cond is None else cond & valid
        if set(names) <= set(dataset.partitioning.schema.names):
            # partition columns only: a file's values are in its path; scan its column
            # ``present`` until one valid row is found (one batch at a time)
            found = [pds.get_partition_keys(f.partition_expression)
                     for f in dataset.get_fragments() if _any_row(dataset, f, present, cond)]
            return pa.Table.from_pylist([{n: keys.get(n) for n in names} for keys in found],
                                        schema=pa.schema([(n, pa.string()) for n in names])
                                        ).group_by(names).aggregate([])
    scanned = [*names, *([present] if present is not None and present not in names else [])]
    nodes = [ac.Declaration("scan", ac.ScanNodeOptions(dataset, columns=scanned, filter=cond))]
    if cond is not None:
        nodes.append(ac.Declaration("filter", ac.FilterNodeOptions(cond)))
    # dictionaries differ from file to file: grouped as plain text
    keys = [pc.field(n).cast(pa.string())
            if pa.types.is_dictionary(dataset.schema.field(n).type) else pc.field(n)
            for n in names]
    nodes += [ac.Declaration("project", ac.ProjectNodeOptions(keys, names)),
              ac.Declaration("aggregate", ac.AggregateNodeOptions([], keys=names))]
    return ac.Declaration.from_sequence(nodes).to_table()


def read_dataset_columns(place: Url | Path, columns: Sequence[Column], *, role: str, key: str,
                         allow_empty: bool = False, filters: Sequence[DateFilter] = (),
                         distinct: bool = False, present: Column | None = None,
                         pairs: PairFilter | None = None) -> pd.DataFrame:
    """Read ``columns`` of the dataset at ``place`` (partition columns included), the
    ``filters`` pushed into the read, and convert them as a file's columns are converted.

    ``distinct``: only the distinct rows, and only over the rows where the number column
    ``present`` (checked, not returned) holds a value; in Parquet files grouped while
    scanning (the pre-reads over every file: periods with actuals, the series known).
    ``pairs``: only the files of its cycles are opened and only its (issue date, period)
    rows read (a missing date passes); the callers cut the rows again."""
    import pyarrow as pa
    import pyarrow.dataset as pds

    data = open_dataset(place, role, key)
    files = choose(data.files, data.partitions, data.shown, filters, role, pairs)
    extra = [present] if present is not None else []
    if files:  # the newest file read: one outside the filters is never opened
        refuse_missing([*columns, *extra], dataset_columns(data, role, key, files[-1]),
                       f"{role} {data.shown}", "Fix the column name in the config or in the data.")
    grouped = False
    wanted = list(dict.fromkeys(c.name for c in [*columns, *extra]))
    if files:
        numbers = {c.name for c in [*columns, *extra] if c.kind == "number"}
        fmt = dataset_format(data, [n for n in wanted if n not in data.partitions
                             and (data.kind == "csv" or n not in numbers)])
        # partition values are text, whatever they look like ("07" stays "07"), as
        # dictionaries (one copy of each value, a categorical in pandas); the converters
        # make dates and keys of them
        text = pa.dictionary(pa.int32(), pa.string())
        chosen = set(files)  # each value once, in the order the files are read
        partitioning = pds.partitioning(
            pa.schema([(n, text) for n in data.partitions]), flavor="hive",
            dictionaries={n: pa.array(list(dict.fromkeys(
                v for f, v in zip(data.files, values, strict=True) if f in chosen)), pa.string())
                for n, values in data.partitions.items()})
        try:
            dataset = pds.dataset(files, filesystem=data.filesystem, format=fmt,
                                  partitioning=partitioning, partition_base_dir=data.root)
        except (OSError, ValueError, pa.ArrowInvalid) as exc:
            raise InputError(
                f"The {role} {data.shown} (config key `{key}`) cannot be read: {why_masked(exc)}"
            ) from None
        expression = row_expression(data.partitions, data.shown, dataset, filters, pairs, role)
        grouped = distinct and data.kind == "parquet" and (present is None or (
            present.name in dataset.schema.names and present.name not in data.partitions
            and _is_number(dataset.schema.field(present.name).type)))
        try:
            if grouped:
                names = list(dict.fromkeys(c.name for c in columns))
                table = _distinct(dataset, names, present.name if present else None,
                                  expression)
            else:
                table = dataset.to_table(columns=wanted, filter=expression)
        except (OSError, ValueError, pa.ArrowInvalid) as exc:
            raise InputError(
                f"The {role} {data.shown} (config key `{key}`) cannot be read: {why_masked(exc)}"
            ) from None
        frame = table.to_pandas(split_blocks=True, self_destruct=True)
        del table
        for n in data.partitions:  # (the values of files whose rows were all filtered out)
            if n in frame.columns and isinstance(frame[n].dtype, pd.CategoricalDtype):
                frame[n] = frame[n].cat.remove_unused_categories()
    else:
        frame = pd.DataFrame({n: pd.Series([], dtype=object) for n in wanted})
    if data._tmp is not None:
        data._tmp()  # the downloaded file is read: remove it now
    # (grouped over the rows with a value, none is no error: the full read names an empty one)
    if len(frame) == 0 and not allow_empty and not (grouped and present is not None):
        raise no_rows(f"The {role} {data.shown} (config key `{key}`)")
    out: dict[str, pd.Series] = {}
    shown = Path(data.shown)
    for c in [*columns, *([] if grouped else extra)]:
        if c.name in out:
            continue
        raw = frame[c.name]
        if data.kind == "csv" and c.kind in ("date", "number") and (
                raw.dtype == object or pd.api.types.is_string_dtype(raw.dtype)
                or isinstance(raw.dtype, pd.CategoricalDtype)):
            raw = raw.where(~raw.isin(NA_TEXT))
        out[c.name] = convert(raw, shown, c, role, 1)
    result = pd.DataFrame(out, copy=False)  # (no consolidating copy of every column)
    if distinct:
        if present is not None and not grouped:
            result = result.loc[result[present.name].notna()]
            if present.name not in {c.name for c in columns}:
                result = result.drop(columns=present.name)
        result = result.drop_duplicates()
    return result.rename(columns={c.name: c.canonical for c in columns if c.canonical})
