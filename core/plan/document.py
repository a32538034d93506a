"""The plan's inputs as one JSON document: attached to the plan memo, with its fingerprint.

    {"format": "tenure-plan", "version": 1, "title": ..., "options": {first_year, horizon,
     budgets, net, per_site_limit, time_limit, must, pins},
     "assets": [{"tag", "site", "must", "study": <docs/method.md §5 study>}, ...]}

The fingerprint is the SHA-256 of the canonical JSON (sorted keys, no spaces), so
``tenure verify`` can check the attachment against the memo's footer.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping, Sequence
from typing import Any

from core.estimates import Study
from core.plan.inputs import AssetInput
from core.plan.result import CapitalPlan

FORMAT = "tenure-plan"


def plan_title(plan: CapitalPlan) -> str:
    years = plan.calendar_years
    return f"Capital plan {years[0]}-{years[-1]}" if len(years) > 1 else f"Capital plan {years[0]}"


def plan_document(plan: CapitalPlan, inputs: Sequence[AssetInput], studies: Sequence[Study],
                  pins: Mapping[int, int] | None = None,
                  time_limit: float | None = None) -> dict[str, Any]:
    """The inputs that reproduce ``plan`` (every study, tag, site, must flag and option)."""
    from core.studyfile import study_to_dict

    return {
        "format": FORMAT, "version": 1, "title": plan_title(plan),
        "options": {"first_year": plan.first_year, "horizon": plan.horizon,
                    "budgets": list(plan.budgets), "net": plan.net,
                    "per_site_limit": plan.per_site_limit, "time_limit": time_limit,
                    "must": [a.tag or a.title for a in inputs if a.must],
                    "pins": {str(k): v for k, v in sorted((pins or {}).items())}},
        "assets": [{"tag": a.tag, "site": a.site, "must": a.must,
                    "study": study_to_dict(s)} for a, s in zip(inputs, studies, strict=True)],
    }


def canonical(doc: Mapping[str, Any]) -> str:
    return json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def plan_fingerprint(doc: Mapping[str, Any]) -> str:
    """SHA-256 of the canonical JSON of the plan document.

    >>> plan_fingerprint({"format": "tenure-plan"})[:12]
    '0094258e42b8'
    """
    return hashlib.sha256(canonical(doc).encode("utf-8")).hexdigest()


def check_plan_document(doc: Mapping[str, Any]) -> tuple[str | None, str | None, str | None]:
    """(fingerprint, title, problem) of an attached plan document (for ``tenure verify``)."""
    from core.studyfile import parse_study

    try:
        assets = doc["assets"]
        for n, item in enumerate(assets):
            parse_study(item["study"], f"$.assets[{n}].study")
    except Exception as e:  # noqa: BLE001 - any defect: the attachment does not load
        return None, None, f"the attached plan does not load: {e}"
    return plan_fingerprint(doc), str(doc.get("title") or "capital plan"), None
