"""Batch endpoint: ``POST /v1/batch``, several single requests in one call.

Each item names a single operation (its operationId) and carries the body that endpoint
takes. Items are validated and answered on their own, in order, with the same caps as
single calls: an item that fails answers its own problem details (field paths prefixed
with ``operations[i]``) and the others are unaffected. The envelope is checked first and
fails the whole call: not an object, ``operations`` missing or not a list, more than
``max_batch_operations`` items, an item without a unique string id, or more than
``max_batch_work`` work units in total (see :mod:`service.settings`).
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

from schemas.batch import BatchRequest, BatchSchema
from service.http import costs, markdown
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint, cost, execute
from service.sampling.errors import ComputationTooLarge
from service.sampling.wording import CAUTION
from service.settings import Settings
from service.web import jsonio
from service.web.problems import Problem, invalid_input

NAME = "batch"
PATH = "/v1/batch"
logger = logging.getLogger(__name__)


def single_operations() -> dict[str, Operation]:
    """Every single endpoint's operation by name: all operations but the batch itself and
    those that need an uploaded file."""
    from service.http import all_operations

    return {op.name: op for op in all_operations() if op.name != NAME and not op.file_required}


def work_units(request: Any) -> int:
    """The work units of one item's request: array elements, plus its whole sample_size.

    >>> work_units({"population": {"items": ["a", "b", "c"]}, "sample_size": 2})
    5
    >>> work_units({"sample_size": 2.5, "methods": []}), work_units(None)
    (0, 0)
    """
    units = 0
    stack = [request]
    while stack:
        value = stack.pop()
        if isinstance(value, list):
            units += len(value)
            stack.extend(v for v in value if isinstance(v, list | dict))
        elif isinstance(value, dict):
            stack.extend(v for v in value.values() if isinstance(v, list | dict))
    if isinstance(request, dict):
        size = request.get("sample_size")
        if isinstance(size, int) and not isinstance(size, bool) and size > 0:
            units += size
    return units


def _count_operations(payload: Any, settings: Settings) -> None:
    """Refuse more operations than allowed before any of them is validated, and text that
    cannot be written back outside the items' requests (each request is checked by its
    own operation, so that a bad one fails only its item)."""
    items = payload.get("operations") if isinstance(payload, dict) else None
    if isinstance(items, list) and len(items) > settings.max_batch_operations:
        raise ComputationTooLarge(
            "operations",
            f"holds {len(items):,} operations; a batch may hold at most "
            f"{settings.max_batch_operations:,}",
        )
    envelope = payload
    if isinstance(items, list):
        envelope = {
            **payload,
            "operations": [
                {k: v for k, v in item.items() if k != "request"}
                if isinstance(item, dict) else item
                for item in items
            ],
        }
    if unencodable := jsonio.lone_surrogates(envelope):
        raise invalid_input(unencodable)


def _check_work(items: list[dict[str, Any]], settings: Settings) -> None:
    total = sum(work_units(item["request"]) for item in items)
    if total > settings.max_batch_work:
        raise ComputationTooLarge(
            "operations",
            f"amount to {total:,} work units (array elements plus sample sizes); a batch "
            f"may hold at most {settings.max_batch_work:,}",
        )


def _prefixed(problem: Problem, prefix: str) -> Problem:
    """``problem`` with each field path under ``prefix``."""
    if problem.errors is None:
        return problem
    errors = {
        f"{prefix}.{field}" if field != "body" else prefix: messages
        for field, messages in problem.errors.items()
    }
    prefixed = invalid_input(errors)
    prefixed.status, prefixed.title, prefixed.type = problem.status, problem.title, problem.type
    return prefixed


def _answer(
    index: int, item: Mapping[str, Any], operations: Mapping[str, Operation], settings: Settings
) -> dict[str, Any]:
    item_id = item["id"]
    name = item["operation"]
    operation = operations.get(name) if isinstance(name, str) else None
    try:
        if operation is None:
            shown = repr(name[:80]) if isinstance(name, str) else "not a string"
            raise invalid_input(
                {
                    f"operations[{index}].operation": [
                        f"must be one of {', '.join(sorted(operations))}; got {shown}"
                    ]
                }
            )
        try:
            document = execute(operation, item["request"], settings)
        except Problem as problem:
            raise _prefixed(problem, f"operations[{index}].request") from None
    except Problem as problem:
        return {"id": item_id, "status": problem.status, "problem": problem.body(PATH)}
    except Exception:
        logger.exception("unhandled error in batch item %d (%s)", index, name)
        failure = Problem(500, "Internal Server Error", "the service failed to answer this item")
        return {"id": item_id, "status": 500, "problem": failure.body(PATH)}
    return {"id": item_id, "status": 200, "result": document}


def _check_cost(
    items: list[dict[str, Any]], operations: Mapping[str, Operation], settings: Settings
) -> None:
    """Refuse the batch when its operations together cost more than one request may.

    Items that are invalid cost nothing here: they are refused on their own.
    """
    each: list[tuple[int, int]] = []
    for index, item in enumerate(items):
        name = item["operation"]
        operation = operations.get(name) if isinstance(name, str) else None
        if operation is not None:
            each.append((cost(operation, item["request"], settings).units, index))
    total = sum(units for units, _ in each)
    if total > settings.max_request_cost:
        largest = ", ".join(
            f"operations[{index}] {units:,}" for units, index in sorted(each, reverse=True)[:3]
        )
        raise costs.too_large(
            costs.Cost(total, ("operations",)),
            settings.max_request_cost,
            f"the batch's {len(items):,} operations (the largest: {largest})",
        )


def _run(inputs: dict[str, Any], settings: Settings) -> dict[str, Any]:
    items: list[dict[str, Any]] = inputs["operations"]
    _check_work(items, settings)
    operations = single_operations()
    _check_cost(items, operations, settings)
    return {
        "results": [_answer(i, item, operations, settings) for i, item in enumerate(items)],
        # Not part of the JSON answer: the Markdown answer shows each item's inputs.
        "items": items,
    }


def _headline(operation: Operation, result: Mapping[str, Any]) -> str:
    """The first answers of an item's block, in one cell: "sample size 59; ..."."""
    names = [n for n in operation.ticket.answer[:3] if n in result]
    if "conclusion" in result and "conclusion" not in names:
        names.append("conclusion")
    parts = []
    for name in names:
        value = result[name]
        if isinstance(value, list):
            continue
        shown = (
            markdown.number(name, value)
            if isinstance(value, float)
            else markdown.CODE_WORDS.get(str(value), str(value))
        )
        parts.append(f"{name.replace('_', ' ')} {shown}")
    return markdown.escape("; ".join(parts), limit=None)


def render_markdown(document: dict[str, Any], result: Any) -> str:
    """One overview table, then one complete block per operation, in order."""
    operations = single_operations()
    lines = [
        "## Answer several requests in one call",
        "",
        f"{len(document['results']):,} operations, answered each on its own, in order.",
        "",
        "| # | id | operation | status | answer |",
        "|---|---|---|---|---|",
    ]
    blocks: list[str] = []
    for index, (answer, item) in enumerate(
        zip(document["results"], result["items"], strict=True), start=1
    ):
        name = item.get("operation")
        operation = operations.get(name) if isinstance(name, str) else None
        if answer["status"] == 200 and operation is not None:
            headline = _headline(operation, answer["result"])
            request_fields = tuple(operation.request_schema.fields)
            block = markdown.render(
                operation.summary, operation.ticket, item["request"], answer["result"],
                request_fields, caution=False,
            )
        else:
            problem = answer["problem"]
            headline = markdown.escape(f"refused: {problem.get('detail', '')}")
            block = _problem_block(problem)
        label = markdown.escape(str(answer["id"]))
        shown_name = markdown.escape(str(name))
        lines.append(f"| {index} | {label} | {shown_name} | {answer['status']} | {headline} |")
        blocks += ["", "---", "", f"**{index}. {label}**", "", block.rstrip()]
    lines += blocks
    lines += ["", f"> {CAUTION}", ""]
    return "\n".join(lines)


def _problem_block(problem: Mapping[str, Any]) -> str:
    lines = [f"### {markdown.escape(str(problem.get('title', 'Refused')))}", ""]
    if not problem.get("errors"):
        lines.append(markdown.escape(str(problem.get("detail", "")), limit=None))
    for field, messages in (problem.get("errors") or {}).items():
        for message in messages if isinstance(messages, list) else [messages]:
            lines.append(f"- {markdown.escape(field)}: {markdown.escape(str(message))}")
    return "\n".join(lines)


OPERATIONS = [
    Operation(
        name=NAME,
        path=PATH,
        takes_item_lists=True,
        summary="Answer several requests in one call",
        description=(
            "Each item names a single operation by its operationId (sample-size, "
            "evaluation, selection, estimation-sample-size, plan-curve, plan-periodic, "
            "staged-plan, staged-evaluation, staged-curve, strata-evaluation, "
            "sequence-evaluation, monetary-sample-size, monetary-selection, "
            "monetary-evaluation) and carries the "
            "body that endpoint takes. Items are validated and answered on their own, in "
            "order, under the same limits as single calls; each answer repeats the item's "
            "id with the status the single endpoint would have given and either its result "
            "or its problem details, whose field paths start with operations[i]. One bad "
            "item never fails the others. The call as a whole is refused (422) when the "
            "envelope is malformed: not an object, operations missing or not a list, more "
            "operations than the configured maximum (1,000 by default), an item without a "
            "unique string id, or more work units than the configured maximum (1,000,000 "
            "by default; the elements of every JSON array in the requests plus their "
            "sample_size). The body may be as large as that of an endpoint taking item "
            "lists."
        ),
        request=BatchRequest,
        response=BatchSchema,
        run=_run,
        precheck=_count_operations,
        carries_requests=True,
        tag="batch",
        renderers={markdown.MARKDOWN: render_markdown},
        ticket=TicketLayout(
            answer=("results",),
            method=lambda document: "each operation answered on its own, as by its endpoint",
        ),
    ),
]

bp = blueprint("batch", OPERATIONS)
