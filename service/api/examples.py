"""Worked examples for the OpenAPI page, all from the invented demo scenario."""

from __future__ import annotations

from typing import Any

from fastapi import Body

from .. import COMPUTATION_VERSION, __version__
from ..contract.diagnose import CompareIn, DiagnoseIn
from ..contract.fold import FoldIn
from ..contract.plan import PlanIn
from ..contract.runup import RunUpRecordIn
from ..core.runup_sim import simulate_run_up
from ..demo import (
    DEMO_RPM,
    demo_anti_alias,
    demo_diagnose_request,
    demo_fold_request,
    demo_plan_request,
    demo_sliced_chain,
    demo_spectrum,
)
from ..http.bodies import register_models
from ..usecases.compare import compare_payload
from ..usecases.diagnose import diagnose_payload
from ..usecases.fold import fold_payload
from ..usecases.plan import plan_payload
from ..usecases.runup import demo_request, runup_payload


def _runup_demo_body() -> dict[str, Any]:
    """A short stretch of the invented e-drive run-up (3,000 to 12,000 rpm in 0.5 s) with
    the controller's speed trace, small enough for the documentation."""
    sim = simulate_run_up(duration_s=0.5, rpm_start=3000.0, rpm_end=12_000.0, seed=3)
    body = demo_request().model_dump(mode="json", exclude_none=True)
    body.pop("pulses_per_rev", None)
    body["nperseg"] = 256
    body["vibration"] = [round(float(v), 4) for v in sim.vibration]
    body["speed_trace"] = {"time_s": [0.0, 0.5], "rpm": [3000.0, 12_000.0]}
    return body


RUNUP_EXAMPLES: dict[str, Any] = {
    "drive_unit_run_up": {
        "summary": "Drive-unit bench run-up with the speed trace",
        "description": "Half a second of the invented e-drive's run-up at 12.8 kS/s behind "
        "the weak 2nd-order filter, with its known sources (shaft orders, first mesh "
        "17 teeth, inverter at 10 kHz).",
        "value": _runup_demo_body(),
    },
}

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


def _short_spectrum(sliced: bool = False) -> dict[str, Any]:
    f, a, _ = demo_spectrum(lines=400, sliced=sliced)
    return {
        "freq_hz": [round(float(v), 3) for v in f],
        "amplitude": [float(f"{v:.4g}") for v in a],
        "unit": "linear",
    }


DIAGNOSE_EXAMPLES: dict[str, Any] = {
    "drive_unit": {
        "summary": "Drive-unit bench, main channel, with its known sources",
        "description": "A 400-line spectrum of the bench at 9000 rpm (synthetic, made by the "
        "app from the invented demo scenario).",
        "value": {**demo_diagnose_request(lines=400), "spectrum": _short_spectrum()},
    },
    "blind": {
        "summary": "Same spectrum, no sources: blind harmonic family search",
        "value": {
            "sample_rate_hz": 12_800.0,
            "anti_alias": demo_anti_alias(),
            "spectrum": _short_spectrum(),
        },
    },
}

COMPARE_EXAMPLES: dict[str, Any] = {
    "two_channels": {
        "summary": "Main channel (12.8 kS/s) against the sliced channel (6.4 kS/s)",
        "value": {
            "a": {"sample_rate_hz": 12_800.0, "spectrum": _short_spectrum()},
            "b": {"sample_rate_hz": 6_400.0, "spectrum": _short_spectrum(sliced=True)},
        },
    },
    "captures": {
        "summary": "The same two channels as a list of captures (2 to 6), with the "
        "sensor's bandwidth as the highest true frequency",
        "value": {
            "captures": [
                {"sample_rate_hz": 12_800.0, "spectrum": _short_spectrum()},
                {"sample_rate_hz": 6_400.0, "spectrum": _short_spectrum(sliced=True)},
            ],
            "max_true_hz": 12_800.0,
        },
    },
}


def response_examples(settings: Any) -> dict[tuple[str, str], Any]:
    """Real responses to the first example of each endpoint, computed by the app itself so
    the documentation can never drift from the code. Long lists are shortened."""

    fold = fold_payload(FoldIn.model_validate(demo_fold_request()), settings)
    fold["tones"] = [t for t in fold["tones"] if t["aliased"]][:4] + [
        t for t in fold["tones"] if not t["aliased"]
    ][:2]
    fold["collisions"] = fold["collisions"][:3]

    diag, _ = diagnose_payload(
        DiagnoseIn.model_validate(DIAGNOSE_EXAMPLES["drive_unit"]["value"]), settings
    )
    diag["peaks"] = [p for p in diag["peaks"] if p["verdict"] == "alias"][:2] + [
        p for p in diag["peaks"] if p["verdict"] == "direct"
    ][:1]
    cmp, _ = compare_payload(
        CompareIn.model_validate(COMPARE_EXAMPLES["two_channels"]["value"]), settings
    )
    for cap in cmp["captures"]:
        cap["peaks"] = cap["peaks"][:3]
    for g in cmp["groups"]:
        g["candidates"] = g["candidates"][:3]
    cmp["groups"] = cmp["groups"][:3]

    plan = plan_payload(PlanIn.model_validate(demo_plan_request()), settings)
    plan["rejected"] = plan["rejected"][-3:]
    plan.pop("runup", None)
    runup = runup_payload(
        RunUpRecordIn.model_validate(RUNUP_EXAMPLES["drive_unit_run_up"]["value"]), settings
    )
    runup["lines"] = runup["lines"][:3]
    runup["predicted"] = runup["predicted"][:1]
    # The display payload is for the page; a few cells show its shape.
    disp = runup["display"]
    disp["map"] = {
        "rpm": disp["map"]["rpm"][:2],
        "freq_hz": disp["map"]["freq_hz"][:3],
        "level_db": [row[:3] for row in disp["map"]["level_db"][:2]],
    }
    disp["lines"] = [
        {**ln, "rpm": ln["rpm"][:3], "freq_hz": ln["freq_hz"][:3]} for ln in disp["lines"][:1]
    ]
    disp["order_spectrum"] = {k: v[:3] for k, v in disp["order_spectrum"].items()}
    for p in runup["predicted"]:
        for key in ("rpm", "apparent_hz", "attenuation_db"):
            p[key] = p[key][:3]
    # Ids and tokens below are shaped like real ones but were made up for the example.
    rid = "h2Vq8pX0cN4bT7kLw9sYd3Rf6Ue1Ga5J"
    saved = {
        "id": rid,
        "delete_token": "Zt5Kx2Qm8Wn4Pj7Lc1Vb9Rd3Hf6Ys0Ge2Ua8Mk4Tq7",
        "url": f"/d/{rid}",
        "api_url": f"/api/v1/diagnoses/{rid}",
        "kind": "fold",
        "computation_version": COMPUTATION_VERSION,
        "result": fold,
    }
    record = {
        "id": rid,
        "kind": "fold",
        "title": "EDU bench, 9000 rpm",
        "created_at": "2026-12-01T09:30:00+00:00",
        "computation_version": COMPUTATION_VERSION,
        "app_version": __version__,
        "current_computation_version": COMPUTATION_VERSION,
        "request": demo_fold_request(),
        "result": fold,
        "spectrum": None,
        "spectra": None,
    }
    return {
        ("/api/v1/plan", "post"): plan,
        ("/api/v1/run-up", "post"): runup,
        ("/api/v1/diagnoses", "post"): saved,
        ("/api/v1/diagnoses/{rid}", "get"): record,
        ("/healthz", "get"): {"status": "ok"},
        ("/readyz", "get"): {
            "status": "ready",
            "version": __version__,
            "computation": COMPUTATION_VERSION,
        },
        ("/api/v1/fold", "post"): fold,
        ("/api/v1/diagnose", "post"): diag,
        ("/api/v1/compare-rates", "post"): cmp,
    }


#: The request model of each saveable kind, as the OpenAPI document names it.
SAVED_KINDS = {
    "fold": "FoldIn",
    "diagnose": "DiagnoseIn",
    "compare": "CompareIn",
    "plan": "PlanIn",
    "run-up": "RunUpRecordIn",
}


def _save_request_by_kind(schema: dict[str, Any]) -> None:
    """Publish ``SaveIn.request`` as the request model its ``kind`` names (the route
    checks it the same way, with errors rooted at ``request``)."""
    save = schema["components"]["schemas"]["SaveIn"]
    save["allOf"] = [
        {
            "if": {"properties": {"kind": {"const": kind}}, "required": ["kind"]},
            "then": {"properties": {"request": {"$ref": f"#/components/schemas/{model}"}}},
        }
        for kind, model in SAVED_KINDS.items()
    ]


def install_examples(app: Any, settings: Any) -> None:
    """Add the computed response examples to the app's OpenAPI document."""
    original = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema  # type: ignore[no-any-return]
        schema = original()

        register_models(schema, [FoldIn, DiagnoseIn, CompareIn, PlanIn, RunUpRecordIn])
        _save_request_by_kind(schema)
        for (path, method), example in response_examples(settings).items():
            op = schema["paths"][path][method]
            code = next(c for c in ("200", "201") if c in op["responses"])
            content = op["responses"][code].setdefault("content", {})
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


PLAN_EXAMPLES: dict[str, Any] = {
    "drive_unit": {
        "summary": "Drive-unit bench up to 12,000 rpm, 0-5 kHz, 60 dB",
        "description": "Every source of the bench, a run-up from 1,000 to 12,000 rpm; the "
        "planner tries the usual converter rates and its default filters.",
        "value": demo_plan_request(),
    },
    "resolve_sideband": {
        "summary": "Also resolve the first mesh from its shaft sideband",
        "value": {
            **demo_plan_request(),
            "resolve": ["first mesh 17/53: GMF 1×", "first mesh 17/53: GMF 1× + 1×shaft"],
        },
    },
    "offered_rates": {
        "summary": "Only the bench converter's rates, an absolute floor, with the run-up",
        "value": {
            **{k: v for k, v in demo_plan_request().items() if k != "rejection_db"},
            "floor": 0.001,
            "rates_hz": [12_800.0, 25_600.0, 51_200.0],
            "runup": {"orders_of_interest": ["first mesh 17/53: GMF 1×", 1], "n_speeds": 200},
        },
    },
    "carrier_only": {
        "summary": "Keep a 10 kHz inverter carrier out of 0-2 kHz",
        "value": {
            "band_hz": [0.0, 2000.0],
            "tones": [
                {"label": "inverter carrier", "freq_hz": 10_000.0, "amplitude": 0.5},
                {"label": "first mesh", "freq_hz": 1700.0, "amplitude": 0.8},
            ],
            "rejection_db": 80.0,
        },
    },
}
