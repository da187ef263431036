"""Region tasks of ``driftband spectra`` on local worker processes or a Dask cluster.

The genome is cut into windows of ``region_size`` bases (:meth:`SitePlan.regions`); each
window that holds callable class sites is one task, ``count_region(vcf, chrom, start,
end, design, sites)``, that opens the indexed VCF itself and returns summable
:class:`~driftband.spectra.counting.RegionCounts`. A worker holds one region's records and
counts at a time, so its memory is bounded by the region, not the genome. The counts are
integers combined in task order in a fixed-shape tree (:func:`driftband._parallel.
map_reduce`), and projection and assembly come after the sum, so the spectra are the same
byte for byte for 1, 2 or N workers, local or on a cluster.

On a cluster every worker must see the VCF (and its index) at the same absolute path,
e.g. on a shared filesystem.
"""

from __future__ import annotations

import logging
import operator
import os
import socket
from collections.abc import Callable, Iterator
from typing import Any

from .. import _parallel
from ..exceptions import InputError, OptionError
from ..variants.source import VariantSource
from .counting import CountDesign, RegionCounts, count_region
from .plan import DEFAULT_REGION_SIZE, SitePlan

__all__ = ["check_region_size", "count_regions"]

log = logging.getLogger("driftband")


def _count_task(task: tuple) -> RegionCounts:
    """One region (runs in a worker): ``(vcf, chrom, start, end, design, sites)``."""
    vcf, chrom, start, end, design, sites = task
    if isinstance(vcf, str) and not os.path.exists(vcf):
        raise InputError(
            f"variant file not found on worker host {socket.gethostname()}; on a "
            "cluster every worker must see the VCF and its index at the same "
            "path (e.g. a shared filesystem)",
            vcf,
        )
    return count_region(vcf, chrom, start, end, design, sites)


def check_region_size(region_size: int) -> int:
    """``region_size`` if it is a positive whole number of bases (else OptionError)."""
    if isinstance(region_size, bool) or not isinstance(region_size, int) or region_size < 1:
        raise OptionError(f"--region-size must be a positive number of bases, got {region_size!r}")
    return region_size


def count_regions(
    src: VariantSource,
    design: CountDesign,
    plan: SitePlan,
    region_size: int = DEFAULT_REGION_SIZE,
    *,
    workers: int | None = None,
    scheduler: Any = None,
    progress: Callable[[int, int, int], None] | None = None,
) -> RegionCounts:
    """Count every region task of an indexed VCF/BCF or a VCF Zarr store and sum the
    counts.

    Parameters
    ----------
    src : VcfSource or VczSource
        The open, indexed VCF/BCF or store (used as is when the tasks run in this process; workers
        open ``src.path`` themselves).
    design : CountDesign
    plan : SitePlan
        Callable sites, restricted to the chromosomes of the VCF.
    region_size : int
        Bases per task.
    workers : int, optional
        Local worker processes (default: the cores available; 1 counts here).
    scheduler : str or distributed.Client, optional
        Count on this dask cluster instead.
    progress : callable, optional
        ``progress(done, total, records)`` as tasks finish.

    Returns
    -------
    RegionCounts
        The sum over all regions (empty when no region holds callable sites).
    """
    check_region_size(region_size)
    windows = plan.regions(region_size)
    if scheduler is None:
        workers = min(_parallel.resolve_workers(workers), max(1, len(windows)))
    here = scheduler is None and workers == 1
    vcf: VariantSource | str = src if here else os.path.abspath(src.path)
    where = (
        "this process"
        if here
        else f"{workers} worker processes"
        if scheduler is None
        else "the dask cluster"
    )
    log.info("counting %d region(s) of <= %s bp on %s", len(windows), f"{region_size:,}", where)

    def tasks() -> Iterator[tuple]:
        for c, s, e in windows:
            yield vcf, c, s, e, design, plan.region_sites(c, s, e)

    state = {"done": 0, "records": 0}

    def tick(_i: int, r: RegionCounts) -> None:
        state["done"] += 1
        state["records"] += r.records
        if progress is not None:
            progress(state["done"], len(windows), state["records"])

    return _parallel.map_reduce(
        _count_task,
        tasks(),
        operator.add,
        empty=RegionCounts,
        workers=workers,
        scheduler=scheduler,
        name="region",
        on_result=tick,
    )
