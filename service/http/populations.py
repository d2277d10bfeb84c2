"""Population files: ``POST /v1/populations/profile``, a file in, what it holds out."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from schemas.populations import (
    ProfileRequest,
    ProfileResult,
    ProfileSchema,
    StratifiedRequest,
    StratifiedResult,
    StratifiedSchema,
)
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.sampling.errors import InvalidInput
from service.sampling.populations.profile import profile_population
from service.sampling.populations.reading import ReadLimits, open_population
from service.sampling.populations.stratified import StrataPlan, select_stratified
from service.settings import Settings


def read_limits(settings: Settings) -> ReadLimits:
    """The bounds a population file is read within, from the settings."""
    return ReadLimits(max_line_bytes=settings.max_file_line_bytes)


def uploaded(inputs: dict[str, Any]) -> Path:
    """The uploaded file's path; a JSON request has none."""
    upload: Path | None = inputs.get("upload")
    if upload is None:
        raise InvalidInput(
            "file",
            "is required: send the request as multipart/form-data with a part named file "
            "(the population file) and a part named request (this JSON)",
        )
    return upload


def _profile(inputs: dict[str, Any], settings: Settings) -> ProfileResult:
    path = uploaded(inputs)
    with open_population(path, inputs["population"], read_limits(settings)) as table:
        profile = profile_population(
            table,
            control_total=inputs.get("control_total"),
            control_count=inputs.get("control_count"),
            strata=inputs.get("strata"),
            top_threshold=inputs.get("top_threshold"),
        )
    return ProfileResult(profile, inputs.get("upload_name") or "")


def _stratified(inputs: dict[str, Any], settings: Settings) -> StratifiedResult:
    path = uploaded(inputs)
    strata = inputs["strata"]
    sizes = strata.get("sizes")
    plan = StrataPlan(
        column=strata.get("column"),
        bands=tuple(strata.get("bands", ())),
        top_threshold=strata.get("top_threshold"),
        sizes=sizes,
        sample_size=None if sizes is not None else inputs["sample_size"],
        allocation=strata["allocation"],
    )
    seed = inputs.get("seed")
    with open_population(path, inputs["population"], read_limits(settings)) as table:
        chosen = select_stratified(
            table, plan, seed, inputs["method"], max_items=settings.max_items
        )
        columns = table.columns
    return StratifiedResult(chosen, columns, seed is None, inputs.get("upload_name") or "")


OPERATIONS = [
    Operation(
        name="population-profile",
        path="/v1/populations/profile",
        accepts_file=True,
        file_required=True,
        summary="Profile and reconcile a population file",
        description=(
            "Reads a population file (CSV, XLSX or Parquet; the file part of a "
            "multipart/form-data request, described by population.file in the request "
            "part) and says what it holds: records read, meeting the filters, excluded "
            "and kept; distinct, blank and repeated identifiers, with the lines of the "
            "first repeated ones; for an amount column the exact total, minimum, maximum "
            "and count, and the count and total of negative and of zero amounts. With "
            "control_total or control_count from the ledger, whether the file reconciles "
            "and by how much it differs. With strata, suggested amount strata by the "
            "cumulative square root of frequency rule (Dalenius and Hodges 1959) over the "
            "positive amounts below top_threshold, and the top stratum at or above it."
        ),
        request=ProfileRequest,
        response=ProfileSchema,
        run=_profile,
        tag="populations",
        ticket=TicketLayout(
            answer=(
                "format",
                "rows_read",
                "rows_meeting_filters",
                "rows_excluded",
                "rows_kept",
                "distinct_ids",
                "blank_ids",
                "repeated_ids",
            ),
            method=lambda document: "exact decimal totals; strata by the cumulative square "
            "root of frequency rule (Dalenius and Hodges 1959)",
        ),
    ),
]

OPERATIONS.append(
    Operation(
        name="population-stratified-selection",
        path="/v1/populations/stratified-selection",
        accepts_file=True,
        file_required=True,
        summary="Select stratum by stratum from a population file",
        description=(
            "Cuts the population of an uploaded file (population.file, as for the profile) "
            "into strata, by the values of a column or by amount bands, with an optional top "
            "stratum of the amounts at or above top_threshold taken in full, and selects "
            "from each stratum: sizes given by stratum, or sample_size allocated in "
            "proportion to the strata's sizes or by Neyman allocation (N_h × S_h; Cochran "
            "1977, 5.5), by largest remainders, a stratum whose share exceeds its size being "
            "taken in full. Each stratum is a population of its own in canonical form, with "
            "a seed derived from the seed: \"stratum-\" and the hex SHA-256 of \"stratum\", "
            "a zero byte, the seed, a zero byte and the stratum's label (UTF-8); each stratum "
            "can be re-performed alone through /v1/selection with its identifiers as items "
            "and its derived seed."
        ),
        request=StratifiedRequest,
        response=StratifiedSchema,
        run=_stratified,
        tag="populations",
        ticket=TicketLayout(
            answer=("sample_size", "seed", "method", "allocation"),
            method=lambda document: "stratified selection; Neyman (1934), Cochran (1977) 5.5",
        ),
    )
)

bp = blueprint("populations", OPERATIONS)
