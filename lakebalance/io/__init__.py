"""Reading the files of a site: one reader per format, daily aggregation, QA, row accounting.

:func:`read_records` is the entry point (:attr:`lakebalance.analysis.Lake.records` calls it).
Formats, chosen by file suffix: delimited text (:mod:`lakebalance.io.csv`), Excel workbooks
(:mod:`lakebalance.io.excel`), WaterML 2.0 documents (:mod:`lakebalance.io.waterml2`); small
strict tables (storage relations, gaugings) through :func:`lakebalance.io.tables.read_table`.
"""

from __future__ import annotations

import sys
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from ..config import Site
    from ..records import Records

__all__ = ["read_records"]


def read_records(site: Site, progress: bool = False) -> Records:
    """Read, convert to SI, check and aggregate to days every series of ``site``.

    Parameters
    ----------
    site : Site
        The validated site file.
    progress : bool
        Show a progress bar over the series on stderr (only when stderr is a terminal).

    Returns
    -------
    Records
        One daily table over the union of the series' periods (missing days NaN), the flags,
        per-series information, every finding and the row accounting of every file.

    Raises
    ------
    InputError, UnitError, ConfigError
        A file or a declared unit is unusable; a correction names an unknown series.
    """
    import pandas as pd

    from ..errors import ConfigError
    from ..records import Records
    from .series import load_series

    keys = [s.key for s in site.series]
    for corr in site.correction:
        if corr.series not in keys:
            from ..errors import suggest

            raise ConfigError(
                f"[[correction]] names series {corr.series!r}, which the site file does not "
                f"declare{suggest(corr.series, keys)}",
                file=site.path,
            )
    specs = list(site.series)
    iterator = specs
    bar = None
    if progress and specs and sys.stderr.isatty():
        from tqdm import tqdm

        bar = tqdm(specs, desc="reading", unit="series", file=sys.stderr, leave=False)
        iterator = bar
    loaded = []
    try:
        for spec in iterator:
            if bar is not None:
                bar.set_postfix_str(spec.file.name)
            loaded.append(load_series(spec, site))
    finally:
        if bar is not None:
            bar.close()
    if loaded:
        start = min(ls.daily.index[0] for ls in loaded)
        end = max(ls.daily.index[-1] for ls in loaded)
        index = pd.date_range(start, end, freq="D", name="date")
    else:
        index = pd.DatetimeIndex([], name="date")
    daily = pd.DataFrame({ls.info.key: ls.daily.reindex(index) for ls in loaded}, index=index)
    flags = pd.DataFrame(
        {ls.info.key: ls.flags.reindex(index, fill_value=False).astype(bool) for ls in loaded},
        index=index,
    )
    stage = [ls.subdaily for ls in loaded if ls.info.role == "stage" and ls.subdaily is not None]
    findings = _storm_spikes_withdrawn(loaded, daily, flags, site)
    return Records(
        site=site,
        daily=daily,
        flags=flags,
        series=tuple(ls.info for ls in loaded),
        findings=findings,
        accounting=tuple(ls.account for ls in loaded),
        subdaily_stage=stage[0] if stage else None,
        check_readings=_checks(loaded),
    )


def _checks(loaded: list) -> pd.Series | None:
    """The field-check readings of every ``staff_gauge`` series, in time order (m)."""
    import pandas as pd

    parts = [ls.subdaily for ls in loaded if ls.info.role == "staff_gauge"]
    parts = [p for p in parts if p is not None and len(p)]
    if not parts:
        return None
    return pd.concat(parts).sort_index().rename("staff_gauge")


def _storm_spikes_withdrawn(loaded, daily, flags, site) -> tuple:
    """Every finding, less the stage spikes on storm days: a rise the gauged inflow or rain
    explains (:func:`lakebalance.qa.storm_days`) is no spike of the stage record. Their days
    are unflagged (with ``[qa] spikes = "remove"`` the readings stay removed)."""
    import numpy as np
    import pandas as pd

    from .. import qa

    storm = np.zeros(len(daily), dtype=bool)
    for ls in loaded:
        if ls.info.role in ("inflow", "rain"):
            storm |= qa.storm_days(daily[ls.info.key].to_numpy(dtype=float))
    out = []
    for ls in loaded:
        for f in ls.findings:
            if (
                storm.any()
                and ls.info.role == "stage"
                and f.kind == "spike"
                and f.first
                and f.last
                and site.qa.spikes == "flag"
            ):
                span = (daily.index >= pd.Timestamp(f.first[:10])) & (
                    daily.index <= pd.Timestamp(f.last[:10])
                )
                if span.any() and storm[span].all():
                    flags.loc[span, ls.info.key] = False
                    continue
            out.append(f)
    return tuple(out)
