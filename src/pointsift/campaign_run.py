"""Read campaign inputs, screen them, write the GeoPackage: the edge of ``pointsift campaigns``.

Input is either one long-form layer (one row per reading) or several
layers / files, one per campaign, joined by the well id. Several inputs are
stacked in the order given, with the campaign of each row in the column
:data:`INPUT_CAMPAIGN` (the layer name, or the file name without suffix for
single-layer files); the campaigns keep that order. Stacking one campaign
per input and screening the long form with that column as ``--campaign``
gives identical results.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import pandas as pd
from pyproj import CRS

from .campaigns import CampaignConfig, CampaignResult, screen_campaigns
from .errors import InputError
from .io import SourceInfo, list_layers, read_points, run_info_table, write_geopackage

__all__ = ["INPUT_CAMPAIGN", "read_campaign_inputs", "campaigns_file", "write_campaigns", "CampaignRun"]

#: Column holding each row's campaign when several inputs are stacked.
INPUT_CAMPAIGN = "input_campaign"


def _label(path: Path, layer: str | None, several_layers: bool) -> str:
    return layer if (layer and several_layers) else path.stem


def read_campaign_inputs(inputs: list, *, layer: str | None = None, x: str | None = None, y: str | None = None,
                         crs: str | None = None, thousands: str | None = None
                         ) -> tuple[gpd.GeoDataFrame, SourceInfo, list | None]:
    """Read one long-form layer, or stack several layers/files (one per campaign).

    Parameters
    ----------
    inputs : list of path-like
        One file (long form, or a GeoPackage whose every layer is a
        campaign when ``layer`` is ``"*"``), or several files, one per campaign.
    layer : str, optional
        Layer of a single GeoPackage; ``"*"`` reads every layer as a campaign.
    x, y, crs, thousands : str, optional
        Coordinate columns, CRS and thousands separator of tables (as :func:`pointsift.io.read_points`).

    Returns
    -------
    frame : geopandas.GeoDataFrame
        The rows in input order (stacked inputs carry :data:`INPUT_CAMPAIGN`).
    source : SourceInfo
        Provenance (several inputs: the paths joined by ``;``).
    order : list of str or None
        Campaign labels in input order for stacked inputs, else None.
    """
    paths = [Path(p) for p in inputs]
    if len(paths) == 1 and layer != "*":
        frame, source = read_points(paths[0], layer=layer, x=x, y=y, crs=crs, thousands=thousands)
        return frame, source, None
    parts, sources = [], []
    for path in paths:
        layers = list_layers(path) if path.suffix.lower() == ".gpkg" else [None]
        chosen = layers if (layer == "*" or len(paths) == 1) else ([layer] if layer else layers[:1] if len(layers) == 1 else None)
        if chosen is None:
            raise InputError(f"{str(path)!r} holds {len(layers)} layers: {', '.join(layers)}. Choose one with --layer NAME, or --layer '*' for every layer as a campaign.")
        for name in chosen:
            frame, source = read_points(path, layer=name, x=x, y=y, crs=crs, thousands=thousands)
            if INPUT_CAMPAIGN in frame.columns:
                raise InputError(f"{str(path)!r} already has a column {INPUT_CAMPAIGN!r}; rename it to stack one input per campaign.")
            frame = frame.copy()
            frame[INPUT_CAMPAIGN] = _label(path, name, len(layers) > 1)
            parts.append(frame)
            sources.append(source)
    crs_set = {CRS(p.crs).to_string() if p.crs is not None else None for p in parts}
    if len(crs_set) > 1:
        raise InputError(f"The campaign inputs use different CRS ({', '.join(map(str, crs_set))}); reproject them to one CRS first.")
    labels = [p[INPUT_CAMPAIGN].iloc[0] if len(p) else None for p in parts]
    if len(set(labels)) != len(labels):
        raise InputError(f"Two inputs have the same campaign name ({', '.join(map(str, labels))}); give the files or layers distinct names.")
    geometry = parts[0].geometry.name
    stacked = pd.concat([p.rename_geometry(geometry) if p.geometry.name != geometry else p for p in parts], ignore_index=True)
    stacked = gpd.GeoDataFrame(stacked, geometry=geometry, crs=parts[0].crs)
    info = SourceInfo(";".join(s.path for s in sources), None, sources[0].driver, ";".join(s.sha256 for s in sources))
    return stacked, info, labels


def write_campaigns(result: CampaignResult, out_path, *, overwrite: bool = False, protect: tuple[str, ...] = ()) -> Path:
    """Write the ``readings``, ``wells``, ``changes`` layers and ``run_info`` to one GeoPackage (atomically)."""
    layers = {"readings": result.readings, "wells": result.wells, "changes": result.changes,
              "run_info": run_info_table(result.run_info)}
    return write_geopackage(out_path, layers, overwrite=overwrite, protect=protect)


@dataclass(frozen=True)
class CampaignRun:
    """Outcome of :func:`campaigns_file`."""

    output_path: str
    counts: dict
    seconds: float
    result: CampaignResult = field(repr=False)
    extra_outputs: dict = field(default_factory=dict)


def campaigns_file(inputs: list, out_path, config: CampaignConfig, *, layer: str | None = None, x: str | None = None,
                   y: str | None = None, overwrite: bool = False, report_path=None) -> CampaignRun:
    """Read the campaign inputs, screen them, write ``out_path`` (and the report).

    Parameters
    ----------
    inputs : list of path-like
        See :func:`read_campaign_inputs`.
    out_path : path-like
        Output GeoPackage.
    config : CampaignConfig
        Options. With stacked inputs and no ``campaign``, the campaigns are
        the inputs (:data:`INPUT_CAMPAIGN`), in the order given.
    layer, x, y : str, optional
        As for :func:`read_campaign_inputs`.
    overwrite : bool
        Replace an existing output.
    report_path : path-like, optional
        Also write the HTML report with the campaign sections.

    Returns
    -------
    CampaignRun
    """
    started = time.perf_counter()
    frame, source, order = read_campaign_inputs(inputs, layer=layer, x=x, y=y, crs=config.screen.crs,
                                                thousands=config.screen.thousands)
    if order is not None and config.campaign is None:
        import dataclasses

        config = dataclasses.replace(config, campaign=INPUT_CAMPAIGN)
    result = screen_campaigns(frame, config, campaign_order=order, source=source)
    result.run_info["output_path"] = str(out_path)
    protect = tuple(os.fspath(p) for p in inputs)
    written = write_campaigns(result, out_path, overwrite=overwrite, protect=protect)
    extra = {}
    if report_path is not None:
        from .report.campaigns import write_campaign_report

        extra["report"] = str(write_campaign_report(result, report_path, overwrite=overwrite, protect=protect + (str(written),)))
    return CampaignRun(str(written), result.counts, time.perf_counter() - started, result, extra)
