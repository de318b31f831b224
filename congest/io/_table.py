"""Checked reading of CSV tables: every bad cell is reported by file, row and column.

Rows are numbered as a spreadsheet shows them: the header is row 1, the first data row
is row 2.
"""

from __future__ import annotations

import csv
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from ..exceptions import InputError

__all__ = ["Table"]

#: How many bad rows an error message lists before it gives a count.
SHOWN = 5


def _rows_text(rows, values):
    shown = ", ".join(f"row {r} ({v!r})" for r, v in zip(rows[:SHOWN], values[:SHOWN], strict=True))
    more = f" and {len(rows) - SHOWN} more" if len(rows) > SHOWN else ""
    return shown + more


class Table:
    """A CSV file read as text, with typed, validated access to its columns.

    Parameters
    ----------
    path : path-like
        The file (read once; never written).
    what : str
        What the file holds, for messages ("link table", "trip table", ...).
    """

    def __init__(self, path, what="table"):
        self.path = Path(path)
        self.what = what
        if not self.path.is_file():
            raise InputError(f"{what} not found", path=self.path)
        try:
            with warnings.catch_warnings():
                # a row longer than the header: pandas only warns and drops cells
                warnings.simplefilter("error", pd.errors.ParserWarning)
                frame = pd.read_csv(self.path, dtype=str, keep_default_na=False,
                                    skipinitialspace=True, encoding="utf-8-sig",
                                    index_col=False)
        except pd.errors.EmptyDataError as err:
            raise InputError(f"{what} is empty (no header row)", path=self.path) from err
        except (pd.errors.ParserError, pd.errors.ParserWarning) as err:
            self._long_row(err)
            raise InputError(f"{what} is not a readable CSV file: {err}",
                             path=self.path) from err
        except UnicodeDecodeError as err:
            raise InputError(f"{what} is not UTF-8 text: {err.reason}",
                             path=self.path) from err
        frame.columns = [str(c).strip() for c in frame.columns]
        dup = frame.columns[frame.columns.duplicated()]
        if len(dup):
            raise InputError("column appears twice in the header", path=self.path,
                             row=1, column=dup[0])
        # a list comprehension strips object columns several times faster than .str
        self.frame = pd.DataFrame({c: [v.strip() for v in frame[c].to_numpy(dtype=object)]
                                   for c in frame.columns}, index=frame.index, dtype=object)
        self.n_rows = len(frame)

    def _long_row(self, err):
        """Raise an InputError naming the first row with more cells than the header."""
        with open(self.path, newline="", encoding="utf-8-sig") as fh:
            reader = csv.reader(fh, skipinitialspace=True)
            header = next(reader, [])
            for number, cells in enumerate(reader, start=2):
                if len(cells) > len(header):
                    raise InputError(f"row has {len(cells)} cells but the header has "
                                     f"{len(header)} columns", path=self.path,
                                     row=number, value=",".join(cells)) from err

    @property
    def columns(self):
        return list(self.frame.columns)

    def __contains__(self, column):
        return column in self.frame.columns

    def rows(self, mask):
        """Spreadsheet row numbers of the rows where ``mask`` is true."""
        return (np.flatnonzero(mask) + 2).tolist()

    def fail(self, message, *, index=None, column=None, value=None):
        """Raise an :class:`InputError` about data row ``index`` (0-based)."""
        row = None if index is None else int(index) + 2
        raise InputError(message, path=self.path, row=row, column=column, value=value)

    def require(self, *columns):
        """Raise if any of ``columns`` is missing from the header."""
        for column in columns:
            if column not in self.frame.columns:
                present = ", ".join(self.frame.columns) or "none"
                hint = ""
                for c in self.frame.columns:
                    if c.lower() == column.lower():
                        hint = f"; did you mean {c!r} (names are case-sensitive)?"
                if len(self.frame.columns) == 1:
                    for sep, name in ((";", "semicolons"), ("\t", "tabs"), ("|", "bars")):
                        if sep in self.frame.columns[0]:
                            hint = (f"; the header seems separated by {name}: save the file "
                                    "with commas as separators (CSV, comma-delimited)")
                            break
                raise InputError(f"required column is missing (columns found: {present}){hint}",
                                 path=self.path, row=1, column=column)

    def text(self, column, default=""):
        """Column as an object array of stripped strings (``default`` if absent)."""
        if column not in self.frame.columns:
            return np.full(self.n_rows, default, dtype=object)
        return self.frame[column].to_numpy(dtype=object)

    def blank(self, column):
        """Boolean mask of empty cells (all true when the column is absent)."""
        if column not in self.frame.columns:
            return np.ones(self.n_rows, dtype=bool)
        return (self.frame[column] == "").to_numpy()

    def number(self, column, *, default=None, required=False, minimum=None,
               positive=False, integer=False, describe=None):
        """Column as float64 (or int64 with ``integer``), validated cell by cell.

        Parameters
        ----------
        column : str
        default : float or ndarray, optional
            Used for empty cells and for an absent column. Without a default an empty
            cell is an error.
        required : bool
            The column must be present.
        minimum : float, optional
            Values below it are errors (``minimum=0`` rejects negatives).
        positive : bool
            Values must be > 0.
        integer : bool
            Values must be whole numbers; returns int64.
        describe : str, optional
            Name of the quantity in messages (default: the column name).
        """
        label = describe or column
        if column not in self.frame.columns:
            if required or default is None:
                self.require(column)
            out = np.broadcast_to(np.asarray(default, dtype=np.float64), (self.n_rows,)).copy()
            return out.astype(np.int64) if integer else out
        raw = self.frame[column]
        empty = (raw == "").to_numpy()
        values = pd.to_numeric(raw.where(~empty, "0"), errors="coerce").to_numpy(
            np.float64, copy=True)
        if empty.any():
            if default is None:
                i = int(np.flatnonzero(empty)[0])
                self.fail(f"{label} is empty; a number is required", index=i, column=column,
                          value="")
            fill = np.broadcast_to(np.asarray(default, dtype=np.float64), (self.n_rows,))
            values[empty] = fill[empty]
        bad = np.isnan(values) & ~empty
        if bad.any():
            rows = np.flatnonzero(bad)
            cells = raw.to_numpy()[rows]
            kind = "NaN" if str(cells[0]).lower() == "nan" else "not a number"
            detail = "" if len(rows) == 1 else f" [{len(rows)} rows: {_rows_text(rows + 2, cells)}]"
            self.fail(f"{label} is {kind}{detail}", index=rows[0], column=column,
                      value=cells[0])
        inf = np.isinf(values)
        if inf.any():
            i = int(np.flatnonzero(inf)[0])
            self.fail(f"{label} is infinite; a finite number is required", index=i,
                      column=column, value=raw.iloc[i])
        if minimum is not None and (values < minimum).any():
            rows = np.flatnonzero(values < minimum)
            word = "negative" if minimum == 0 else f"below {minimum:g}"
            detail = "" if len(rows) == 1 else (
                f" [{len(rows)} rows: {_rows_text(rows + 2, raw.to_numpy()[rows])}]")
            self.fail(f"{label} is {word}{detail}", index=rows[0], column=column,
                      value=raw.iloc[rows[0]])
        if positive and (values <= 0).any():
            i = int(np.flatnonzero(values <= 0)[0])
            self.fail(f"{label} must be positive", index=i, column=column, value=raw.iloc[i])
        if integer:
            frac = values != np.round(values)
            if frac.any():
                i = int(np.flatnonzero(frac)[0])
                self.fail(f"{label} must be a whole number", index=i, column=column,
                          value=raw.iloc[i])
            return values.astype(np.int64)
        return values

    def ids(self, column, *, describe=None, required=True):
        """Integer identifiers (node, link or zone ids)."""
        return self.number(column, integer=True, required=required,
                           describe=describe or column)

    def boolean(self, column, default=True):
        """Column of true/false cells (``true/false``, ``1/0``, ``yes/no``, ``t/f``)."""
        if column not in self.frame.columns:
            return np.full(self.n_rows, default, dtype=bool)
        raw = self.frame[column].str.lower().to_numpy(dtype=object)
        out = np.full(self.n_rows, default, dtype=bool)
        for i, cell in enumerate(raw):
            if cell in ("true", "t", "1", "yes", "y", "1.0"):
                out[i] = True
            elif cell in ("false", "f", "0", "no", "n", "0.0"):
                out[i] = False
            elif cell != "":
                self.fail("expected true or false", index=i, column=column,
                          value=self.frame[column].iloc[i])
        return out

    def extras(self, used):
        """Columns not in ``used``, as arrays (numbers where every cell is numeric)."""
        out = {}
        for column in self.frame.columns:
            if column in used or column == "":
                continue
            raw = self.frame[column]
            nums = pd.to_numeric(raw.where(raw != "", "nan"), errors="coerce")
            if (raw != "").all() and raw.str.fullmatch(r"[+-]?\d+").all():
                out[column] = nums.to_numpy(np.int64)
            elif (nums.notna() | (raw == "")).all() and (raw != "").any():
                out[column] = nums.to_numpy(np.float64)
            else:
                out[column] = raw.to_numpy(dtype=object)
        return out


# ---------------------------------------------------------------- shared link checks
def cost_kinds(table, column, default):
    """Cost-function kind codes from names (``bpr``, ``conical``, ``polynomial``) or codes."""
    from ..network import COST_KINDS

    out = np.full(table.n_rows, COST_KINDS[default], dtype=np.int8)
    if column not in table:
        return out
    codes = {str(v): v for v in COST_KINDS.values()}
    for i, cell in enumerate(table.text(column)):
        key = str(cell).strip().lower()
        if key == "":
            continue
        if key in COST_KINDS:
            out[i] = COST_KINDS[key]
        elif key in codes:
            out[i] = codes[key]
        else:
            table.fail(f"unknown cost-function kind; expected one of {sorted(COST_KINDS)}",
                       index=i, column=column, value=cell)
    return out


def check_unique(table, ids, column, what):
    """Raise on the first repeated id, naming both rows."""
    order = np.argsort(ids, kind="stable")
    sorted_ids = ids[order]
    rep = np.flatnonzero(sorted_ids[1:] == sorted_ids[:-1])
    if rep.size:
        first, second = sorted(order[[rep[0], rep[0] + 1]])
        table.fail(f"duplicate {what} (also on row {first + 2})", index=second,
                   column=column, value=int(ids[second]))


def check_links(table, tail_ids, head_ids, kind, alpha, capacity, *, from_col, to_col,
                capacity_col):
    """Self-loops and zero capacity on congestible links."""
    from ..network import COST_KINDS

    loops = np.flatnonzero(tail_ids == head_ids)
    if loops.size:
        i = int(loops[0])
        table.fail(f"link starts and ends at the same node (self-loop; "
                   f"{to_col!r} is {int(head_ids[i])} too)", index=i, column=from_col,
                   value=int(tail_ids[i]))
    # every kind divides the volume by the capacity once alpha > 0 (conical always)
    congestible = (alpha > 0) | (kind == COST_KINDS["conical"])
    zero = np.flatnonzero(congestible & (capacity <= 0))
    if zero.size:
        i = int(zero[0])
        table.fail("capacity is zero on a link whose travel time depends on volume "
                   "(alpha > 0); give a positive capacity or alpha = 0", index=i,
                   column=capacity_col, value=table.text(capacity_col)[i]
                   if capacity_col in table else 0)
    conical = np.flatnonzero((kind == COST_KINDS["conical"]) & (alpha <= 1))
    if conical.size:
        i = int(conical[0])
        table.fail("the conical cost function needs alpha > 1", index=i, value=alpha[i])


def lookup(keys, values):
    """Position of each of ``values`` in the unique array ``keys`` (-1 where absent)."""
    return pd.Index(np.asarray(keys, dtype=np.int64)).get_indexer(
        np.asarray(values, dtype=np.int64)).astype(np.int64)


def demand_matrix(table, origins, destinations, trips, zone_ids, *, origin_col,
                  destination_col, trips_col, zone_word="zone"):
    """Dense OD matrix from rows, rejecting unknown zones and repeated pairs."""
    zone_ids = np.asarray(zone_ids, dtype=np.int64)
    n = zone_ids.size
    oi = lookup(zone_ids, origins)
    di = lookup(zone_ids, destinations)
    bad = np.flatnonzero((oi < 0) | (di < 0))
    if bad.size:
        i = int(bad[0])
        col, vals = (origin_col, origins) if oi[i] < 0 else (destination_col, destinations)
        more = f" ({bad.size} rows name unknown {zone_word}s)" if bad.size > 1 else ""
        table.fail(f"unknown {zone_word}: no {zone_word} with this id{more}", index=i,
                   column=col, value=int(vals[i]))
    if n:
        key = oi * n + di
        check_unique_pairs(table, key, origin_col, origins, destinations)
    demand = np.zeros((n, n))
    demand[oi, di] = trips
    return demand


def check_unique_pairs(table, key, column, origins, destinations):
    order = np.argsort(key, kind="stable")
    rep = np.flatnonzero(key[order][1:] == key[order][:-1])
    if rep.size:
        first, second = sorted(order[[rep[0], rep[0] + 1]])
        table.fail(f"OD pair {int(origins[second])}->{int(destinations[second])} is listed "
                   f"twice (also on row {first + 2}); give each pair once", index=second,
                   column=column, value=int(origins[second]))
