"""Worked examples for the OpenAPI page, all from the invented demo scenario."""

from __future__ import annotations

from typing import Any

from fastapi import Body

from ..demo import DEMO_RPM, demo_anti_alias, demo_fold_request, demo_sliced_chain
from .bodies import register_models
from .schemas import FoldIn

FOLD_EXAMPLES: dict[str, Any] = {
    "drive_unit": {
        "summary": "Drive-unit bench, main channel",
        "description": f"Motor at {DEMO_RPM:.0f} rpm, 12.8 kS/s behind a 2nd-order filter.",
        "value": demo_fold_request(),
    },
    "carrier_only": {
        "summary": "Where does a 10 kHz inverter carrier land?",
        "value": {
            "sample_rate_hz": 12_800.0,
            "anti_alias": demo_anti_alias(),
            "tones": [{"label": "inverter carrier", "freq_hz": 10_000.0, "amplitude": 0.5}],
        },
    },
    "sliced_channel": {
        "summary": "Second channel, decimated by slicing",
        "value": {
            "chain": demo_sliced_chain(),
            "tones": [{"label": "first mesh", "freq_hz": 2550.0, "amplitude": 0.8}],
        },
    },
}


def response_examples(settings: Any) -> dict[tuple[str, str], Any]:
    """Real responses to the first example of each endpoint, computed by the app itself so
    the documentation can never drift from the code. Long lists are shortened."""
    from .compute import fold_payload

    fold = fold_payload(FoldIn.model_validate(demo_fold_request()), settings)
    fold["tones"] = [t for t in fold["tones"] if t["aliased"]][:4] + [
        t for t in fold["tones"] if not t["aliased"]
    ][:2]
    fold["collisions"] = fold["collisions"][:3]
    return {("/api/v1/fold", "post"): fold}


def install_examples(app: Any, settings: Any) -> None:
    """Add the computed response examples to the app's OpenAPI document."""
    original = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema  # type: ignore[no-any-return]
        schema = original()
        register_models(schema, [FoldIn])
        for (path, method), example in response_examples(settings).items():
            op = schema["paths"][path][method]
            content = op["responses"]["200"].setdefault("content", {})
            content.setdefault("application/json", {})["example"] = example
        app.openapi_schema = schema
        return schema

    app.openapi = openapi


SAVE_EXAMPLES: Any = Body(
    openapi_examples={
        "save_fold": {
            "summary": "Save the drive-unit prediction",
            "value": {
                "kind": "fold",
                "request": demo_fold_request(),
                "title": "EDU bench, 9000 rpm",
            },
        }
    }
)
