"""POST /api/v1/calculations: the stateless calculation contract over HTTP."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Body
from fastapi.responses import JSONResponse

from server.api.examples import EXAMPLES
from server.api.schemas import CalculationRequest, CalculationResponse, ErrorResponse, MethodOut
from server.api.v1.problems import problems
from server.services import calculations
from server.services.errors import Invalid

router = APIRouter(prefix="/api/v1", tags=["calculations"])


@router.post(
    "/calculations",
    response_model=CalculationResponse,
    responses={
        **problems(400),
        422: {"model": ErrorResponse, "description": "readings refused, field by field"},
    },
)
def calculate(
    body: Annotated[
        CalculationRequest,
        Body(
            openapi_examples={
                m: {"summary": m, "value": {"method": m, "readings": r}} for m, r in EXAMPLES.items()
            }
        ),
    ],
) -> CalculationResponse | JSONResponse:
    """Compute a method's results and quality flags from raw readings; stores nothing."""
    try:
        out = calculations.calculate(body.method, body.readings)
    except Invalid as exc:
        return JSONResponse(status_code=422, content={"detail": [e.to_dict() for e in exc.errors]})
    return CalculationResponse.model_validate(out)


@router.get("/methods", response_model=list[MethodOut])
def methods() -> list[MethodOut]:
    """Every method the engine computes, with the standard it follows."""
    return [MethodOut.model_validate(m) for m in calculations.methods()]
