"""Toll-plan files: which links are charged, and how much money per vehicle.

A toll plan is a CSV file of our own layout, one rule per row:

================  ========  =========================================================
column            needed    meaning
================  ========  =========================================================
``charge``        yes       money per vehicle (the network's currency), ``>= 0``
``link_id``       either    the charged link, by its id
``attribute``     or        name of a link attribute (a column kept from the link
``equals``                  table, such as ``facility_type``) and the value that
                            selects links: every link whose attribute equals it
``window_start``  no        ``HH:MM``: when the charge starts; ``window_end`` when it
``window_end``              stops. Static runs ignore the window but keep it on record.
``note``          no        free text, ignored
================  ========  =========================================================

Rules apply from top to bottom; a later row that selects a link replaces an earlier
row's charge on it (so ``facility_type = motorway, 2.00`` followed by
``link_id 17, 5.00`` charges 5 on link 17 and 2 on the other motorways). The charges are
added to the tolls the network already carries.

Example::

    attribute,equals,charge,window_start,window_end
    facility_type,bridge,3.50,07:00,09:30
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..exceptions import InputError, NetworkError
from ..pricing import TollPlan
from ._table import Table

__all__ = ["read_toll_plan", "TOLL_PLAN_COLUMNS"]

#: Columns a toll plan may hold.
TOLL_PLAN_COLUMNS = ("link_id", "attribute", "equals", "charge", "window_start",
                     "window_end", "note")

_CLOCK = re.compile(r"^([01]?\d|2[0-4]):([0-5]\d)$")


def _matches(values, wanted):
    """Boolean mask of ``values`` equal to the text ``wanted`` (numerically if both are)."""
    values = np.asarray(values)
    if values.dtype.kind in "iuf":
        try:
            target = float(wanted)
        except ValueError:
            return np.zeros(values.shape, dtype=bool)
        return np.isclose(values.astype(np.float64), target, rtol=0.0, atol=1e-12)
    return np.array([str(v).strip() == wanted for v in values], dtype=bool)


def read_toll_plan(path, network, *, name=None) -> TollPlan:
    """Read a toll-plan CSV for ``network``.

    Parameters
    ----------
    path : path-like
        The file (read only).
    network : Network
        The network whose links the plan names (ids and attributes).
    name : str, optional
        Plan name for reports (default: the file name without extension).

    Returns
    -------
    TollPlan
        With ``charge`` of shape (n_links,) in money per vehicle.

    Raises
    ------
    InputError
        Naming file, row, column and value: missing ``charge`` column; a row with
        neither or both of ``link_id`` and ``attribute``; an unknown link id or
        attribute; an attribute value that selects no link; a charge that is empty,
        not a number, infinite or negative; a malformed or inconsistent time window.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2, 3], tail=[0, 1, 0], head=[1, 2, 2], capacity=10.0,
    ...               free_flow_time=1.0, zone_ids=[1, 3], zone_nodes=[0, 2],
    ...               demand=[[0, 5], [0, 0]],
    ...               link_attrs={"facility_type": ["bridge", "street", "bridge"]})
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "bridges.csv"
    >>> _ = path.write_text("attribute,equals,charge\\nfacility_type,bridge,2.5\\n")
    >>> read_toll_plan(path, net).charge.tolist()
    [2.5, 0.0, 2.5]
    """
    table = Table(path, "toll plan")
    table.require("charge")
    if "link_id" not in table and "attribute" not in table:
        table.require("link_id")  # names the column the plan is missing
    unknown = [c for c in table.columns if c not in TOLL_PLAN_COLUMNS]
    if unknown:
        raise InputError(f"unknown column; a toll plan has columns "
                         f"{', '.join(TOLL_PLAN_COLUMNS)}", path=table.path, row=1,
                         column=unknown[0])
    charge = table.number("charge", minimum=0, describe="charge")
    link_blank = table.blank("link_id")
    attr_blank = table.blank("attribute")
    link_text = table.text("link_id")
    attr_text = table.text("attribute")
    equals_text = table.text("equals")
    out = np.zeros(network.n_links)
    for i in range(table.n_rows):
        if link_blank[i] == attr_blank[i]:
            which = "both" if not link_blank[i] else "neither"
            table.fail(f"a rule names a link by link_id or by attribute and equals; this row "
                       f"has {which}", index=i,
                       column="link_id" if not link_blank[i] else "attribute",
                       value=link_text[i] if not link_blank[i] else "")
        if not link_blank[i]:
            try:
                link_id = int(str(link_text[i]))
            except ValueError:
                table.fail("link_id is not a whole number", index=i, column="link_id",
                           value=link_text[i])
            try:
                idx = network.link_index(link_id)
            except NetworkError:
                table.fail("no link with this id in the network", index=i, column="link_id",
                           value=link_text[i])
            out[idx] = charge[i]
            continue
        attr = str(attr_text[i])
        if attr == "link_id":
            values = network.link_ids
        elif attr in network.link_attrs:
            values = network.link_attrs[attr]
        else:
            known = ", ".join(sorted(network.link_attrs)) or "none"
            table.fail(f"the network has no link attribute of this name (attributes: {known})",
                       index=i, column="attribute", value=attr)
        wanted = str(equals_text[i])
        if "equals" not in table or wanted == "":
            table.fail("a rule by attribute needs the value to match in 'equals'", index=i,
                       column="equals", value=wanted)
        mask = _matches(values, wanted)
        if not mask.any():
            table.fail(f"no link has {attr} equal to this value", index=i, column="equals",
                       value=wanted)
        out[mask] = charge[i]
    window = _window(table)
    out.setflags(write=False)
    return TollPlan(name=name or Path(path).stem, charge=out, window=window,
                    source=str(path))


def _window(table):
    """The plan's time window, if it states one; every stated window must agree."""
    if "window_start" not in table and "window_end" not in table:
        return None
    starts, ends = table.text("window_start"), table.text("window_end")
    seen = None
    for i in range(table.n_rows):
        pair = []
        for column, cell in (("window_start", starts[i]), ("window_end", ends[i])):
            cell = str(cell)
            if cell and not _CLOCK.match(cell):
                table.fail("time must be HH:MM (24-hour clock)", index=i, column=column,
                           value=cell)
            pair.append(cell)
        if not any(pair):
            continue
        if not all(pair):
            column = "window_end" if pair[0] else "window_start"
            table.fail("a time window needs both window_start and window_end", index=i,
                       column=column, value="")
        if seen is None:
            seen = tuple(pair)
        elif tuple(pair) != seen:
            table.fail(f"all rules of one plan share one time window ({seen[0]}-{seen[1]}); "
                       "put other windows in another plan", index=i, column="window_start",
                       value=pair[0])
    return seen
